"""Millions of units, tested small: the piecewise design path (tall-skinny QR, pygam compiled on a
subsample, float32 maps) gives the summaries of the one-piece path."""
import numpy as np
import pytest

import summarize_widgets as sw
from summarize_widgets.summaries import additive, projection

from conftest import household_covariates


@pytest.fixture(scope="module")
def draws():
    rng = np.random.default_rng(11)
    X = household_covariates(1500, rng)
    age = X["age"].to_numpy()
    T = rng.normal(size=(60, 1500)) + np.sin(age / 10) - 0.4 * (X["fuel"] == "oil").to_numpy()
    return sw.EffectDraws(T, X)


def _numbers(df):
    return df.select_dtypes("number").to_numpy(float)


def test_piecewise_design_matches_one_piece(draws, monkeypatch):
    whole_lin = sw.summarize_linear(draws).table()
    whole_add = sw.summarize_additive(draws)
    monkeypatch.setattr(projection, "CHUNK_UNITS", 400)  # four pieces
    monkeypatch.setattr(additive, "COMPILE_UNITS", 300)  # pygam compiles on a subsample
    piece_lin = sw.summarize_linear(draws).table()
    piece_add = sw.summarize_additive(draws)
    assert piece_add.settings["n_units_compiled"] < draws.n_units
    assert piece_add.lam == whole_add.lam  # the GCV choice uses every unit either way
    np.testing.assert_allclose(_numbers(piece_lin), _numbers(whole_lin), rtol=1e-8, atol=1e-10)
    np.testing.assert_allclose(_numbers(piece_add.curves()), _numbers(whole_add.curves()), rtol=1e-8, atol=1e-10)
    np.testing.assert_allclose(piece_add.fit_r2, whole_add.fit_r2, rtol=1e-8)
    np.testing.assert_allclose(piece_add.fitted_values(slice(0, 3)), whole_add.fitted_values(slice(0, 3)), rtol=1e-8)


def test_float32_maps_stay_close(draws, monkeypatch):
    whole = sw.summarize_additive(draws)
    monkeypatch.setattr(projection, "CHUNK_UNITS", 400)
    monkeypatch.setattr(projection, "FLOAT64_MAP_BYTES", 0)  # every map in float32
    small = sw.summarize_additive(draws)
    a, b = _numbers(small.curves()), _numbers(whole.curves())
    # float32 products over pieces of at most 2^16 units, added in float64 (DEVELOPERS.md "Memory")
    assert np.nanmax(np.abs(a - b)) < 1e-4 * np.nanmax(np.abs(b))
    np.testing.assert_allclose(small.fit_r2, whole.fit_r2, atol=1e-4)


def test_large_npy_is_memory_mapped_by_default(tmp_path, monkeypatch):
    from summarize_widgets.io import load

    rng = np.random.default_rng(2)
    X = household_covariates(200, rng)
    np.save(tmp_path / "tau.npy", rng.normal(size=(20, 200)))
    monkeypatch.setattr(load, "MMAP_BYTES", 1000)  # "large": above 1 kB here
    assert isinstance(sw.load_draws(tmp_path / "tau.npy", X).values, np.memmap)
    monkeypatch.setattr(load, "MMAP_BYTES", 10**9)
    assert not isinstance(sw.load_draws(tmp_path / "tau.npy", X).values, np.memmap)


def test_memory_error_says_what_ran_out_and_what_to_do(tmp_path, monkeypatch):
    rng = np.random.default_rng(2)
    X = household_covariates(200, rng)
    np.save(tmp_path / "tau.npy", rng.normal(size=(20, 200)))

    def no_memory(*args, **kwargs):
        raise MemoryError("Unable to allocate 29.8 GiB for an array with shape (1000, 8000000)")

    monkeypatch.setattr(np, "load", no_memory)
    with pytest.raises(sw.SummaryError, match=r"not enough memory to read .* mmap") as info:
        sw.load_draws(tmp_path / "tau.npy", X, mmap=False)
    assert "truncated" not in str(info.value)


def test_memory_error_in_a_pass_names_the_blocks(draws, monkeypatch):
    from summarize_widgets.core.passes import LinearMap

    def no_memory(self, block):
        raise MemoryError("Unable to allocate")

    monkeypatch.setattr(LinearMap, "partial", no_memory)
    with pytest.raises(sw.SummaryError, match=r"Ran out of memory in a pass .* MiB per worker .*Memory"):
        sw.summarize_linear(draws)


def test_float32_block_is_widened_once_for_reducers_that_share_it():
    from summarize_widgets.core.draws import assemble_block
    from summarize_widgets.core.passes import LeafSums, LinearMap, widen_shared

    rng = np.random.default_rng(5)
    vals = rng.normal(size=(4, 50)).astype(np.float32)
    block = assemble_block(slice(0, 4), vals, None, None)
    H = rng.normal(size=(50, 3))
    leaf = LeafSums(rng.integers(0, 4, 50), 4)
    one = widen_shared(block, [leaf])
    assert one is block  # a single reducer widens for itself
    two = widen_shared(block, [leaf, LinearMap(H)])
    assert two.wt.dtype == np.float64 and two.values is two.wt
    np.testing.assert_array_equal(two.wt, vals.astype(np.float64))
    assert widen_shared(block, [leaf, LinearMap(H.astype(np.float32))]) is block  # float32 maps keep float32 blocks
    # Same sums and products either way (bincount and float64 products widen internally anyway).
    for r in (leaf, LinearMap(H)):
        r.start(4)
    np.testing.assert_array_equal(leaf.partial(block)[0], leaf.partial(two)[0])
    np.testing.assert_array_equal(LinearMap(H).partial(block)[0], LinearMap(H).partial(two)[0])
