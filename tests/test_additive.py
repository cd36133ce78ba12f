"""Additive summary: the frozen smoother checked against pygam refitted per draw, and the rest."""
import numpy as np
import pandas as pd
import pytest
from pygam import LinearGAM, f, l, s

import summarize_widgets as sw
from conftest import draws_around, household_covariates
from summarize_widgets import SummaryError
from summarize_widgets.summaries.additive import summarize_additive

LAM = {"age": 0.5, "fuel": 2.0, "rooms": 0.1}


def _data(n=500, S=200, seed=11, dtype=np.float64):
    """Simulated bill changes after a home energy retrofit: a smooth age trend, fuel and size shifts."""
    rng = np.random.default_rng(seed)
    X = household_covariates(n, rng)
    age = X["age"].to_numpy()
    f_ = -0.8 * np.sin(age / 12) - 0.6 * (X["fuel"] == "oil").to_numpy() - 0.05 * np.nan_to_num(X["rooms"].to_numpy(), nan=7)
    return draws_around(f_, S, rng, dtype=dtype), X


def _reference_inputs(X, keep=None):
    """pygam's input matrix built here independently: age, fuel codes (sorted labels), filled rooms, indicator."""
    keep = np.ones(len(X), bool) if keep is None else keep
    Xk = X[keep]
    rooms = Xk["rooms"].to_numpy()
    miss = np.isnan(rooms)
    fill = rooms[~miss].mean()
    codes = pd.Categorical(Xk["fuel"], categories=sorted(Xk["fuel"].unique())).codes.astype(float)
    return np.column_stack([Xk["age"], codes, np.where(miss, fill, rooms), miss.astype(float)]), fill


def _reference_gam(Xr, y, weights, lam=LAM, n_splines=10):
    terms = s(0, n_splines=n_splines, lam=lam["age"]) + f(1, lam=lam["fuel"]) + s(2, n_splines=n_splines, lam=lam["rooms"]) + l(3, penalties=None)
    return LinearGAM(terms).fit(Xr, y, weights=weights)


def _reference_curves(gam, Xr, w, summary):
    """Effect-scale curves from the refitted pygam model: mean prediction + f_j(g) - mean f_j(x)."""
    pred = gam.predict(Xr)
    overall = np.average(pred, weights=w)
    out = {}
    for j, name in enumerate(["age", "fuel", "rooms"]):
        grid = np.arange(3.0) if name == "fuel" else np.asarray(summary.grids[name], float)
        Xg = np.repeat(Xr[:1], grid.size, axis=0)
        Xg[:, j] = grid
        centre = np.average(gam.partial_dependence(term=j, X=Xr), weights=w)
        if name == "rooms":  # the missing indicator belongs to rooms' partial dependence
            Xg[:, 3] = 0.0
            centre += np.average(gam.partial_dependence(term=3, X=Xr), weights=w)
        out[name] = overall + gam.partial_dependence(term=j, X=Xg) - centre
    return out, pred, overall


@pytest.mark.parametrize("weights", ["none", "unit"])
def test_smoother_equals_pygam_refitted_per_draw(weights):
    # Reference: pygam LinearGAM with the same terms and lam, fitted to single draws (1e-8 relative).
    T, X = _data()
    # integer unit weights: float32-exact, since pygam casts fit weights to float32
    w = None if weights == "none" else np.random.default_rng(3).integers(1, 5, T.shape[1]).astype(float)
    d = sw.EffectDraws(T, X, weights=w)
    add = summarize_additive(d, lam=LAM)
    Xr, _ = _reference_inputs(X)
    ww = np.ones(T.shape[1]) if w is None else w
    for sd in (0, 99, 199):
        gam = _reference_gam(Xr, T[sd], ww)
        ref, pred, overall = _reference_curves(gam, Xr, ww, add)
        np.testing.assert_allclose(add.fitted_values(sd)[0], pred, rtol=1e-8, atol=1e-8 * np.abs(pred).max())
        np.testing.assert_allclose(add.overall_draws[sd], overall, rtol=1e-8, atol=1e-8 * np.abs(pred).max())
        for name, curve in ref.items():
            np.testing.assert_allclose(add.curve_draws(name)[sd], curve, rtol=1e-8, atol=1e-8 * np.abs(curve).max())


@pytest.mark.parametrize("source", ["weights", "itt"])
def test_per_draw_weights_equal_pygam_on_pseudo_values(source):
    # Definition (linear.py docstring): fit Y_s = w_s T_s / wbar with weights wbar. Reference: pygam on
    # those pseudo-values. Weights in quarters over 256 draws keep wbar float32-exact for pygam.
    T, X = _data(S=256)
    rng = np.random.default_rng(6)
    W = rng.choice([0.25, 0.5, 0.75, 1.0], T.shape)
    W[:, :4] = 0.0  # never weighted: left out
    d = sw.EffectDraws(T, X, weights=W) if source == "weights" else sw.EffectDraws.from_itt(W * T, W, X)
    add = summarize_additive(d, lam=LAM)
    wbar = W.mean(axis=0)
    keep = wbar > 0
    assert add.settings["n_units_used"] == keep.sum()
    Xr, _ = _reference_inputs(X, keep)
    for sd in (5, 200):
        Y = W[sd, keep] * T[sd, keep] / wbar[keep]
        gam = _reference_gam(Xr, Y, wbar[keep])
        ref, pred, _ = _reference_curves(gam, Xr, wbar[keep], add)
        got = add.fitted_values(sd)[0]
        assert np.isnan(got[~keep]).all()
        np.testing.assert_allclose(got[keep], pred, rtol=1e-8, atol=1e-8 * np.abs(pred).max())
        for name, curve in ref.items():
            np.testing.assert_allclose(add.curve_draws(name)[sd], curve, rtol=1e-8, atol=1e-8 * np.abs(curve).max())
        # R^2 from the pseudo-values' residuals, computed directly
        w = wbar[keep]
        sse = np.sum(w * (Y - pred) ** 2)
        sst = np.sum(w * (Y - np.average(Y, weights=w)) ** 2)
        np.testing.assert_allclose(add.fit_r2[sd], 1 - sse / sst, rtol=1e-8)


def test_smoothing_is_chosen_like_pygam_gridsearch():
    # Reference: pygam's own gridsearch (default grid, GCV for LinearGAM) on the posterior mean.
    T, X = _data(S=60)
    d = sw.EffectDraws(T, X)
    add = summarize_additive(d)
    Xr, _ = _reference_inputs(X)
    terms = s(0, n_splines=10) + f(1) + s(2, n_splines=10) + l(3, penalties=None)
    ref = LinearGAM(terms).gridsearch(Xr, T.mean(axis=0), progress=False)
    assert add.lam == {"age": ref.lam[0][0], "fuel": ref.lam[1][0], "rooms": ref.lam[2][0]}
    assert add.settings["criterion"] == "GCV" and add.settings["lam_source"].startswith("GCV")
    np.testing.assert_allclose(add.fitted_values().mean(axis=0), ref.predict(Xr), rtol=1e-8, atol=1e-10)


def test_fit_r2_equals_definition_and_is_between_zero_and_one():
    # Definition (docs/method.md section 3): 1 - sum (T - fit)^2 / sum (T - mean T)^2 per draw, from residuals.
    T, X = _data(S=80)
    add = summarize_additive(sw.EffectDraws(T, X), lam=LAM)
    fit = add.fitted_values()
    sse = ((T - fit) ** 2).sum(axis=1)
    sst = ((T - T.mean(axis=1, keepdims=True)) ** 2).sum(axis=1)
    np.testing.assert_allclose(add.fit_r2, 1 - sse / sst, rtol=1e-8)
    assert ((add.fit_r2 >= 0) & (add.fit_r2 <= 1)).all()
    assert add.fit_r2_note == ""


@pytest.mark.parametrize("weights", ["none", "unit"])
def test_weighted_mean_of_fitted_values_is_the_overall_effect(weights):
    # The intercept is unpenalized apart from pygam's sqrt(eps) ridge, so the weighted mean of the
    # fitted values equals each draw's weighted mean effect up to ~1e-8 / n.
    T, X = _data(S=50)
    w = None if weights == "none" else np.random.default_rng(2).uniform(0.2, 2.0, T.shape[1])
    d = sw.EffectDraws(T, X, weights=w)
    add = summarize_additive(d, lam=LAM)
    ww = np.ones(T.shape[1]) if w is None else w
    fit = add.fitted_values()
    np.testing.assert_allclose((fit * ww).sum(axis=1) / ww.sum(), d.overall, rtol=1e-9, atol=1e-10)
    np.testing.assert_allclose(add.overall_draws, d.overall, rtol=1e-9, atol=1e-10)


def test_draws_in_the_penalty_null_space_are_reproduced():
    # The second-difference penalty does not touch straight lines and the missing indicator is
    # unpenalized, so draws linear in age and (filled) rooms plus a missing shift are their own
    # smooth: re-summarizing the smoothed draws returns them (the projection is idempotent there).
    _, X = _data()
    rng = np.random.default_rng(5)
    Xr, _ = _reference_inputs(X)
    coefs = rng.normal(size=(40, 4))
    T = coefs[:, :1] + coefs[:, 1:2] * Xr[:, 0] / 50 + coefs[:, 2:3] * Xr[:, 2] / 5 + coefs[:, 3:4] * Xr[:, 3]
    add = summarize_additive(sw.EffectDraws(T, X), columns=["age", "rooms"], lam=1.0)
    fit = add.fitted_values()
    np.testing.assert_allclose(fit, T, rtol=1e-7, atol=1e-7)
    again = summarize_additive(sw.EffectDraws(fit, X), columns=["age", "rooms"], lam=1.0)
    np.testing.assert_allclose(again.fitted_values(), fit, rtol=1e-7, atol=1e-7)
    np.testing.assert_allclose(again.fit_r2, 1.0, atol=1e-9)


def test_float32_and_float64_agree():
    T, X = _data()
    a = summarize_additive(sw.EffectDraws(T, X), lam=LAM)
    b = summarize_additive(sw.EffectDraws(T.astype(np.float32), X), lam=LAM)
    np.testing.assert_allclose(b.coef_draws @ b._C["age"].T, a.curve_draws("age"), rtol=1e-5, atol=1e-6)
    np.testing.assert_allclose(b.fitted_values(), a.fitted_values(), rtol=1e-5, atol=1e-6)
    np.testing.assert_allclose(b.fit_r2, a.fit_r2, rtol=1e-5)


@pytest.mark.parametrize("kind", ["equal-tailed", "highest-density"])
def test_curves_table_against_numpy(kind):
    T, X = _data()
    add = summarize_additive(sw.EffectDraws(T, X), lam=LAM)
    tab = add.curves(level=0.9, interval=kind)
    assert tab.attrs["level"] == 0.9 and tab.attrs["interval"] == kind
    # grids: 1st-99th percentile for age, the unique values of rooms, every fuel category
    lo, hi = np.percentile(X["age"], [1, 99])
    np.testing.assert_allclose(tab.loc[tab.covariate == "age", "x"].astype(float), np.linspace(lo, hi, 50))
    assert tab.loc[tab.covariate == "rooms", "x"].tolist() == [2.0, 3.0, 4.0, 5.0, 6.0, 7.0, 8.0]
    assert tab.loc[tab.covariate == "fuel", "x"].tolist() == ["gas", "heat pump", "oil"]
    assert set(tab.loc[tab.covariate == "fuel", "covariate_type"]) == {"categorical"}
    for name in ("age", "fuel", "rooms"):
        cd = add.curve_draws(name)
        part = tab[tab.covariate == name]
        np.testing.assert_allclose(part["mean"], cd.mean(axis=0))
        if kind == "equal-tailed":  # numpy's default (type 7) quantiles
            qlo, qhi = np.quantile(cd, [0.05, 0.95], axis=0)
            np.testing.assert_allclose(part["lower"], qlo)
            np.testing.assert_allclose(part["upper"], qhi)
        # Simultaneous band as in Ruppert, Wand & Carroll (2003, ch. 6), recomputed here:
        m, sd = cd.mean(axis=0), cd.std(axis=0, ddof=1)
        q = np.quantile(np.abs((cd - m) / sd).max(axis=1), 0.9)
        np.testing.assert_allclose(part["lower_joint"], m - q * sd)
        np.testing.assert_allclose(part["upper_joint"], m + q * sd)
        # the joint band covers this share of whole draws (by construction about 90%)
        inside = ((cd >= m - q * sd - 1e-12) & (cd <= m + q * sd + 1e-12)).all(axis=1).mean()
        assert inside >= 0.9
        assert (part["upper_joint"] - part["lower_joint"] >= part["upper"] - part["lower"] - 1e-9).all()
    # the simulated oil households save more: a per-draw contrast, never two marginal intervals
    fuel = add.curve_draws("fuel")
    assert (fuel[:, 2] < fuel[:, 0]).mean() > 0.99


def test_missing_effects_equal_pygam_reference():
    # Effect if every unit's rooms were missing: mean prediction + f(fill) + beta - mean(f(x) + beta * m).
    T, X = _data(S=20)
    add = summarize_additive(sw.EffectDraws(T, X), lam=LAM)
    Xr, fill = _reference_inputs(X)
    assert add.fill == {"rooms": fill}
    tab = add.missing_effects()
    assert tab["covariate"].tolist() == ["rooms"]
    vals = []
    for sd in range(T.shape[0]):
        gam = _reference_gam(Xr, T[sd], np.ones(T.shape[1]))
        Xm = Xr[:1].copy()
        Xm[0, 2], Xm[0, 3] = fill, 1.0
        centre = gam.partial_dependence(term=2, X=Xr).mean() + gam.partial_dependence(term=3, X=Xr).mean()
        vals.append(gam.predict(Xr).mean() + gam.partial_dependence(term=2, X=Xm)[0]
                    + gam.partial_dependence(term=3, X=Xm)[0] - centre)
    np.testing.assert_allclose(tab["mean"].iloc[0], np.mean(vals), rtol=1e-8)
    assert summarize_additive(sw.EffectDraws(T, X), columns=["age"], lam=1.0).missing_effects().empty


def test_settings_and_progress():
    T, X = _data(S=20)
    calls = []
    add = summarize_additive(sw.EffectDraws(T, X), lam=LAM, grid_size=7, n_splines=6,
                             progress=lambda k, n: calls.append((k, n)))
    st = add.settings
    assert st["summary"] == "additive" and st["lam"] == LAM and st["lam_source"] == "given"
    assert st["n_splines"] == 6 and st["grid_size"] == 7 and st["columns"] == ["age", "fuel", "rooms"]
    assert len(add.grids["age"]) == 7 and add.coef_draws.shape == (20, 6 + 3 + 6 + 1 + 1)
    assert calls and calls[-1][0] == calls[-1][1]


# -- errors ---------------------------------------------------------------------------------

def test_bad_arguments_are_named():
    T, X = _data(S=10)
    d = sw.EffectDraws(T, X)
    with pytest.raises(SummaryError, match=r"`columns` names covariates that are not in the covariate table: 'tenure'"):
        summarize_additive(d, columns=["tenure"], lam=1.0)
    with pytest.raises(SummaryError, match=r"`n_splines` must be between 4 and 100; got 3"):
        summarize_additive(d, n_splines=3)
    with pytest.raises(SummaryError, match=r"`grid_size` must be between 2 and 10000; got 1"):
        summarize_additive(d, grid_size=1)
    with pytest.raises(SummaryError, match=r"`lam` must be a positive finite number; got -1"):
        summarize_additive(d, lam=-1)
    with pytest.raises(SummaryError, match=r"`lam` as a dict must give a value for every covariate; missing: \['fuel', 'rooms'\]"):
        summarize_additive(d, lam={"age": 1.0})
    with pytest.raises(SummaryError, match=r"`lam` names covariates that are not summarized: \['tenure'\]"):
        summarize_additive(d, lam={**LAM, "tenure": 1.0})
    with pytest.raises(SummaryError, match=r"`draws` must be an EffectDraws"):
        summarize_additive(T)
    add = summarize_additive(d, columns=["age"], lam=1.0)
    with pytest.raises(SummaryError, match=r"`covariate` must be one of \['age'\]; got 'fuel'"):
        add.curve_draws("fuel")


def test_unusable_covariates_are_named():
    T, X = _data(S=10)
    with pytest.raises(SummaryError, match=r"Covariate 'region' has a single value \('north'\)"):
        summarize_additive(sw.EffectDraws(T, X.assign(region="north")), lam=1.0)
    with pytest.raises(SummaryError, match=r"Covariate 'income' has no observed values"):
        summarize_additive(sw.EffectDraws(T, X.assign(income=np.nan)), lam=1.0)
    one_value = np.where(np.arange(len(X)) % 2 == 0, 3.0, np.nan)
    with pytest.raises(SummaryError, match=r"Covariate 'floors' has fewer than two distinct observed values"):
        summarize_additive(sw.EffectDraws(T, X.assign(floors=one_value)), lam=1.0)
    w = np.ones(T.shape[1])
    w[X["fuel"] != "oil"] = 0.0  # only oil households carry weight
    with pytest.raises(SummaryError, match=r"Covariate 'fuel' has a single category among the units with positive weight"):
        summarize_additive(sw.EffectDraws(T, X, weights=w), lam=1.0)


def test_constant_effect_has_undefined_r2():
    T, X = _data(S=10)
    const = np.repeat(np.linspace(-1, 1, 10)[:, None], T.shape[1], axis=1)
    add = summarize_additive(sw.EffectDraws(const, X), lam=LAM)
    with pytest.raises(SummaryError, match=r"Summary R\^2 is undefined: every posterior draw has the same effect"):
        add.fit_r2
    # the curves of a constant effect are flat at that constant
    np.testing.assert_allclose(add.curve_draws("age"), const[:, :50], atol=1e-9)


def test_pygam_internals_we_use_are_present():
    # summaries/pygam_bridge.py reads pygam's private model matrix and penalty. If a pygam release
    # moves or changes them, this fails loudly (and pyproject.toml pins the checked releases).
    import re
    from importlib.metadata import version
    from pathlib import Path

    from pygam import LinearGAM, s as spline
    from summarize_widgets.summaries.pygam_bridge import CHECKED_VERSIONS, model_matrix, penalty_matrix

    rng = np.random.default_rng(3)
    x = rng.uniform(0, 1, (300, 1))
    y = np.sin(6 * x[:, 0]) + rng.normal(0, 0.1, 300)
    gam = LinearGAM(spline(0, n_splines=8, lam=0.7)).fit(x, y)
    B = model_matrix(gam, x)
    # pygam's own prediction is the model matrix times its coefficients (Gaussian, identity link).
    np.testing.assert_allclose(B @ gam.coef_, gam.predict(x), rtol=1e-10, atol=1e-12)
    P = penalty_matrix(gam)
    assert P.shape == (B.shape[1], B.shape[1])
    np.testing.assert_allclose(P, P.T, atol=1e-12)
    assert np.linalg.eigvalsh(P).min() > -1e-8
    # The penalty is lam times the unscaled term penalty: doubling lam doubles it.
    gam2 = LinearGAM(spline(0, n_splines=8, lam=1.4)).fit(x, y)
    np.testing.assert_allclose(penalty_matrix(gam2), 2 * P, rtol=1e-10, atol=1e-12)
    # The installed pygam is one of the checked releases, and pyproject.toml pins the same range.
    low, high = re.match(r">=([\d.]+),<([\d.]+)", CHECKED_VERSIONS).groups()
    as_tuple = lambda v: tuple(int(p) for p in v.split(".")[:2])  # noqa: E731
    assert as_tuple(low) <= as_tuple(version("pygam")) < as_tuple(high)
    pyproject = (Path(__file__).resolve().parents[1] / "pyproject.toml").read_text()
    assert f'"pygam{CHECKED_VERSIONS}"' in pyproject
