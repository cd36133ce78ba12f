"""EffectDraws: input forms, no copies, weighted means against numpy, and every validation error."""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import xarray as xr

import summarize_widgets.core.draws as draws_module
from summarize_widgets import EffectDraws
from summarize_widgets.core.validate import SummaryError

S, N = 6, 5  # draws, households


@pytest.fixture
def tau():
    return np.random.default_rng(11).normal(-40.0, 25.0, size=(S, N))  # change in winter bills per household


@pytest.fixture
def households():
    return pd.DataFrame(
        {
            "floor_area": [72.0, 110.5, np.nan, 64.0, 95.0],
            "heating": pd.Categorical(["gas", "oil", "gas", "electric", "gas"]),
            "renter": [True, False, True, False, False],
        }
    )


@pytest.fixture(params=[None, 2], ids=["one-block", "blocks-of-2"])
def block_rows(request, monkeypatch):
    """Run a test with the whole matrix in one block, and again with blocks of 2 draws."""
    if request.param is not None:
        monkeypatch.setattr(draws_module, "_BLOCK_BYTES", 8 * N * request.param)
    return request.param


# -- input forms ------------------------------------------------------------------------------
def test_float32_stays_float32_and_is_not_copied(tau, households):
    v32 = tau.astype(np.float32)
    d = EffectDraws(v32, households)
    assert d.dtype == np.float32
    assert np.shares_memory(d._values, v32)
    d64 = EffectDraws(tau, households, weights=np.arange(1.0, N + 1))
    assert d64.dtype == np.float64 and np.shares_memory(d64._values, tau)


def test_memory_mapped_values_are_used_in_place(tmp_path, tau, households):
    mm = np.lib.format.open_memmap(tmp_path / "tau.npy", mode="w+", dtype=np.float64, shape=(S, N))
    mm[:] = tau
    d = EffectDraws(mm, households)
    assert isinstance(d._values, np.memmap) and np.shares_memory(d._values, mm)
    np.testing.assert_array_equal(d.posterior_mean, tau.mean(axis=0))


def test_dataframe_and_integer_input(tau, households):
    names = [f"hh{i}" for i in range(N)]
    # columns that name units are matched to the covariates' index, never paired by position
    with pytest.raises(SummaryError, match=r"`values` carries unit labels that do not match the covariates' index"):
        EffectDraws(pd.DataFrame(tau, columns=names), households)
    d = EffectDraws(pd.DataFrame(tau, columns=names), households.set_axis(names))
    np.testing.assert_array_equal(d.values, tau)
    d = EffectDraws(pd.DataFrame(tau), households)  # default column numbers 0..n-1: positions
    np.testing.assert_array_equal(d.values, tau)
    ints = np.arange(S * N).reshape(S, N)
    d = EffectDraws(ints, households)
    assert d.dtype == np.float64
    np.testing.assert_array_equal(d._values, ints.astype(float))


def test_dataarray_chain_draw_unit_stacked_chain_major(tau, households):
    cube = tau.reshape(2, 3, N)  # (chain, draw, household)
    # stored in another dim order: EffectDraws must transpose before stacking
    da = xr.DataArray(cube.transpose(2, 1, 0), dims=("household", "draw", "chain"))
    d = EffectDraws(da, households)
    assert (d.n_chains, d.draws_per_chain) == (2, 3)
    # manual chain-major stacking: all of chain 0, then all of chain 1
    np.testing.assert_array_equal(d._values, np.concatenate([cube[0], cube[1]], axis=0))
    d2 = EffectDraws(xr.DataArray(tau.T, dims=("household", "draw")), households)
    np.testing.assert_array_equal(d2._values, tau)
    assert d2.n_chains == 1


def test_chains_given_by_the_caller(tau, households):
    d = EffectDraws(tau, households, chains=3, label="bill change")
    assert (d.n_chains, d.draws_per_chain, d.label) == (3, 2, "bill change")
    info = d.describe()
    assert info["n_chains"] == 3 and info["covariates"] == ["floor_area", "heating", "renter"]
    assert "6 draws x 5 units, 3 chains" in repr(d)


# -- weighted means against numpy -------------------------------------------------------------------
def test_posterior_mean_and_overall_without_weights(tau, households, block_rows):
    d = EffectDraws(tau, households)
    np.testing.assert_allclose(d.posterior_mean, np.average(tau, axis=0), rtol=1e-13)
    np.testing.assert_allclose(d.overall, np.average(tau, axis=1), rtol=1e-13)
    np.testing.assert_array_equal(d.mean_weights, np.ones(N))


def test_unit_weights(tau, households, block_rows):
    w = np.array([1.0, 2.5, 0.5, 3.0, 1.0])
    d = EffectDraws(tau, households, weights=w)
    # numpy.average with the weights broadcast to every draw: per unit, w_i cancels (the plain mean)
    np.testing.assert_allclose(d.posterior_mean, np.average(tau, axis=0, weights=np.broadcast_to(w, tau.shape)), rtol=1e-13)
    np.testing.assert_allclose(d.overall, np.average(tau, axis=1, weights=w), rtol=1e-13)
    np.testing.assert_allclose(d.mean_weights, w, rtol=1e-15)
    assert not d.has_draw_weights


def test_per_draw_weights(tau, households, block_rows):
    W = np.random.default_rng(5).uniform(0.0, 2.0, size=(S, N))
    d = EffectDraws(tau.astype(np.float32), households, weights=W)
    v = tau.astype(np.float32).astype(np.float64)
    np.testing.assert_allclose(d.posterior_mean, np.average(v, axis=0, weights=W), rtol=1e-12)
    np.testing.assert_allclose(d.overall, np.average(v, axis=1, weights=W), rtol=1e-12)
    np.testing.assert_allclose(d.mean_weights, W.mean(axis=0), rtol=1e-13)
    assert d.has_draw_weights


def test_unit_with_zero_weight_everywhere_has_no_mean(tau, households):
    w = np.array([1.0, 0.0, 1.0, 1.0, 1.0])
    d = EffectDraws(tau, households, weights=w)
    assert np.isnan(d.posterior_mean[1])
    np.testing.assert_allclose(np.delete(d.posterior_mean, 1), np.delete(tau.mean(axis=0), 1), rtol=1e-13)


def test_from_itt_is_a_ratio_of_sums(tau, households, block_rows):
    rng = np.random.default_rng(9)
    uptake = rng.uniform(0.05, 0.9, size=(S, N))  # complier share per household and draw
    outcome = uptake * tau  # ITT on bills = complier share x CLATE
    v = np.array([1.0, 2.0, 1.0, 0.5, 1.0])
    d = EffectDraws.from_itt(outcome, uptake, households, weights=v)
    assert d.is_complier_weighted and d.has_draw_weights and d.label == "LATE"
    # docs/method.md section 5: per unit, the ratio of sums over draws (v_i cancels)
    np.testing.assert_allclose(d.posterior_mean, outcome.sum(axis=0) / uptake.sum(axis=0), rtol=1e-13)
    # per draw, the Wald ratio over all units == numpy's uptake-weighted mean of the unit CLATEs
    np.testing.assert_allclose(d.overall, (v * outcome).sum(axis=1) / (v * uptake).sum(axis=1), rtol=1e-13)
    np.testing.assert_allclose(d.overall, np.average(tau, axis=1, weights=v * uptake), rtol=1e-12)
    # both matrices are kept as given
    assert np.shares_memory(d._values, outcome) and np.shares_memory(d._den, uptake)


# -- validation errors ---------------------------------------------------------------------------
def test_row_mismatch_and_transposed_hint(tau, households):
    with pytest.raises(SummaryError, match=r"`values` has shape \(6, 5\) but `covariates` has 4 rows; `values` must be \(n_draws, n_units\) = \(\?, 4\)\.$"):
        EffectDraws(tau, households.iloc[:4])
    with pytest.raises(SummaryError, match=r"`values` has shape \(5, 6\) .* It looks transposed: pass `values\.T` \(shape \(6, 5\)\)"):
        EffectDraws(tau.T, households)
    with pytest.raises(SummaryError, match=r"`uptake_itt` has shape \(5, 6\) .* It looks transposed"):
        EffectDraws.from_itt(tau, np.ones((N, S)), households)
    with pytest.raises(SummaryError, match=r"`outcome_itt` has shape \(6, 5\) but `uptake_itt` has shape \(4, 5\); they must match"):
        EffectDraws.from_itt(tau, np.ones((4, N)), households)


def test_nonfinite_draws_are_counted(tau, households, block_rows):
    bad = tau.copy()
    bad[1, 0] = np.nan
    bad[1, 3] = np.nan
    bad[4, 3] = np.inf
    with pytest.raises(SummaryError, match=r"`values` contains 3 NaN or infinite values in 2 draws and 2 units \(first draw 1, first unit 0\)"):
        EffectDraws(bad, households)
    with pytest.raises(SummaryError, match=r"`values` contains 3 NaN or infinite values in 2 draws and 2 units"):
        EffectDraws(bad, households, weights=np.ones((S, N)))
    uptake = np.full((S, N), 0.5)
    uptake[5, 2] = -np.inf
    with pytest.raises(SummaryError, match=r"`uptake_itt` contains 1 NaN or infinite value in 1 draw and 1 unit \(first draw 5, first unit 2\)"):
        EffectDraws.from_itt(tau, uptake, households)
    with pytest.raises(SummaryError, match=r"`outcome_itt` contains 3 NaN"):
        EffectDraws.from_itt(bad, uptake, households)


def test_values_so_large_that_sums_overflow(households):
    with pytest.raises(SummaryError, match=r"`values` is too large in magnitude \(largest \|value\| 1e\+308\)"):
        EffectDraws(np.full((S, N), 1e308), households)
    with pytest.raises(SummaryError, match=r"`values` times `weights` is too large in magnitude"):
        EffectDraws(np.full((S, N), 1e300), households, weights=np.full(N, 1e300))


def test_too_few_draws_or_units(tau, households):
    with pytest.raises(SummaryError, match=r"`values` has 1 draw; at least 2 posterior draws are needed"):
        EffectDraws(tau[:1], households)
    with pytest.raises(SummaryError, match=r"`values` has 1 unit; at least 2 units are needed"):
        EffectDraws(tau[:, :1], households.iloc[:1])


@pytest.mark.parametrize(
    "weights, message",
    [
        (np.array([1.0, -0.5, 1.0, 1.0, -2.0]), r"`weights` contains 2 negative values \(smallest -2\); weights must be >= 0"),
        (np.array([1.0, np.nan, 1.0, 1.0, 1.0]), r"`weights` contains 1 NaN or infinite values; weights must be finite"),
        (np.ones(4), r"`weights` must have shape \(5,\) \(one per unit\) or \(6, 5\) \(one per draw and unit\); got shape \(4,\)"),
        (np.ones((5, 6)), r"got shape \(5, 6\)"),
        (np.array(["a"] * 5), r"`weights` must be numeric; got dtype <U1"),
        (np.zeros(5), r"`weights` are zero for every unit \(zero total weight\)"),
    ],
)
def test_bad_weights(tau, households, weights, message):
    with pytest.raises(SummaryError, match=message):
        EffectDraws(tau, households, weights=weights)


def test_from_itt_weights_must_be_per_unit(tau, households):
    with pytest.raises(SummaryError, match=r"`weights` for complier-weighted draws must be one per unit, shape \(5,\); got shape \(6, 5\)"):
        EffectDraws.from_itt(tau, np.ones((S, N)), households, weights=np.ones((S, N)))


def test_negative_uptake_is_refused(tau, households):
    uptake = np.full((S, N), 0.4)
    uptake[0, 1] = -0.01
    uptake[3, 4] = -0.2
    with pytest.raises(SummaryError, match=r"`uptake_itt` has 2 negative values \(smallest -0\.2\)\. Complier weighting assumes monotonicity"):
        EffectDraws.from_itt(tau, uptake, households)


def test_bad_covariates(tau, households):
    dup = pd.concat([households, households[["renter"]]], axis=1)
    with pytest.raises(SummaryError, match=r"`covariates` has duplicated column names: 'renter'"):
        EffectDraws(tau, dup)
    with pytest.raises(SummaryError, match=r"`covariates` must be a pandas DataFrame with one row per unit; got ndarray"):
        EffectDraws(tau, households.to_numpy())
    with pytest.raises(SummaryError, match=r"got dict"):
        EffectDraws(tau, households.to_dict())
    with pytest.raises(SummaryError, match=r"`covariates` has no columns"):
        EffectDraws(tau, pd.DataFrame(index=range(N)))


@pytest.mark.parametrize(
    "chains, message",
    [
        (4, r"`chains` = 4 does not divide the 6 draws; draws must be stored chain-major"),
        (0, r"`chains` must be between 1 and 6; got 0"),
        (7, r"`chains` must be between 1 and 6; got 7"),
        (1.5, r"`chains` must be an integer; got 1\.5 \(float\)"),
        (True, r"`chains` must be an integer; got True \(bool\)"),
    ],
)
def test_bad_chains(tau, households, chains, message):
    with pytest.raises(SummaryError, match=message):
        EffectDraws(tau, households, chains=chains)


def test_bad_values(tau, households):
    with pytest.raises(SummaryError, match=r"`values` must be 2-D \(n_draws, n_units\) or 3-D \(n_chains, n_draws, n_units\); got 4-D shape \(1, 2, 3, 5\)"):
        EffectDraws(tau.reshape(1, 2, 3, N), households)
    with pytest.raises(SummaryError, match=r"`values` must hold numbers; got dtype object"):
        EffectDraws(tau.astype(object), households)
    da = xr.DataArray(tau.reshape(1, S, N, 1), dims=("chain", "draw", "household", "season"))
    with pytest.raises(SummaryError, match=r"`values` must have dims \(chain, draw, <unit>\) with exactly one unit dimension; got dims \('chain', 'draw', 'household', 'season'\)"):
        EffectDraws(da, households)
