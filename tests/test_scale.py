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


@pytest.mark.parametrize("case", ["plain", "centred", "left-out units", "draw weights"])
def test_reducers_work_through_float32_blocks_slice_by_slice(case):
    """Leaf sums and float64 maps over a float32 block give the float64 results without a block-sized
    float64 copy: numpy's allocations (tracemalloc) stay below a quarter of such a copy."""
    import tracemalloc

    from summarize_widgets.core.draws import assemble_block
    from summarize_widgets.core.passes import LeafSums, LinearMap

    rng = np.random.default_rng(5)
    rows, n = 4, 2**20 + 123  # several slices of units and a ragged last one
    vals = rng.normal(size=(rows, n)).astype(np.float32)
    w = rng.uniform(0.5, 2.0, size=(rows, n)) if case == "draw weights" else None
    block = assemble_block(slice(0, rows), vals, None, w)
    codes = rng.integers(0, 6, n)
    if case == "left-out units":
        codes[::7] = -1
    centre = np.array([3.0, -1.0, 0.5, 2.0]) if case == "centred" else None
    H = rng.normal(size=(n, 3))
    leaf, lmap = LeafSums(codes, 6, centre=centre), LinearMap(H, centre=centre, with_weights=w is not None)
    for r in (leaf, lmap):
        r.start(rows)
    tracemalloc.start()
    try:
        sums, weights, centred = leaf.partial(block)
        product, w_product = lmap.partial(block)
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    assert peak < rows * n * 8 / 4
    # the references: float64 everywhere, whole rows at once
    wt = block.wt.astype(np.float64)
    ww = np.ones((rows, n)) if w is None else w
    kept = codes >= 0
    expect = np.stack([np.bincount(codes[kept], weights=wt[j, kept], minlength=6) for j in range(rows)])
    np.testing.assert_allclose(sums, expect, rtol=1e-12, atol=1e-9)
    c = np.zeros(rows) if centre is None else centre
    np.testing.assert_allclose(product, (wt - c[:, None] * ww) @ H, rtol=1e-12, atol=1e-9)
    if centre is not None:
        centred_expect = np.stack([np.bincount(codes[kept], weights=(wt[j] - c[j])[kept], minlength=6) for j in range(rows)])
        np.testing.assert_allclose(centred, centred_expect, rtol=1e-12, atol=1e-9)
    if w is not None:
        w_expect = np.stack([np.bincount(codes[kept], weights=w[j, kept], minlength=6) for j in range(rows)])
        np.testing.assert_allclose(weights, w_expect, rtol=1e-12, atol=1e-9)
        np.testing.assert_allclose(w_product, w @ H, rtol=1e-12, atol=1e-9)


def test_fitted_tree_keeps_no_float64_copy_of_the_covariates(draws):
    """What a tree keeps per unit: the float32 encoded matrix and each unit's leaf, not also a float64
    copy of every column (rebuilt from the covariates when the rules are written)."""
    tree = sw.summarize_tree(draws, max_depth=3)
    n, k = draws.n_units, len(tree.columns)
    per_unit = sum(v.nbytes for v in vars(tree._f).values() if isinstance(v, np.ndarray) and v.shape[:1] == (n,))
    assert per_unit <= n * (4 * k + 8)
    assert tree.nodes()["rule"].str.contains("age").any()  # rules still written from the raw values


def test_large_linear_design_is_rebuilt_not_kept(draws, monkeypatch):
    """Past FLOAT64_MAP_BYTES the linear summary keeps no copy of its design beside the map: fitted
    values and the standardized scale come out as with the design held in full."""
    whole = sw.summarize_linear(draws)
    monkeypatch.setattr(projection, "FLOAT64_MAP_BYTES", 1000)
    monkeypatch.setattr(projection, "CHUNK_UNITS", 400)
    small = sw.summarize_linear(draws)
    assert not isinstance(small.design_matrix, np.ndarray)
    np.testing.assert_allclose(small.fitted_values(slice(0, 3)), whole.fitted_values(slice(0, 3)), rtol=1e-5, atol=1e-6)
    assert small.spread == pytest.approx(whole.spread, rel=1e-12) and small.centre == pytest.approx(whole.centre, rel=1e-12)
    from summarize_widgets.summaries.size_path import linear_size_path

    a, b = linear_size_path(draws, small), linear_size_path(draws, whole)  # rebuilds the design when not held
    assert a.steps == b.steps
    np.testing.assert_allclose(a.r2_draws, b.r2_draws, rtol=1e-5, atol=1e-6)  # float32 map: float32 digits


def test_piecewise_additive_builds_each_design_piece_once(draws, monkeypatch):
    """The model matrix of millions of units is the slow part of the additive fit: each piece is built
    once (mapped and summed together), not once for the map and again for the column means."""
    monkeypatch.setattr(projection, "CHUNK_UNITS", 400)  # four pieces of 1,500 units
    built = []
    real = additive.model_matrix

    def counted(gam, X, *args, **kwargs):
        if len(X) > 100:  # the pieces, not the 50-point grids of the curves
            built.append(len(X))
        return real(gam, X, *args, **kwargs)

    monkeypatch.setattr(additive, "model_matrix", counted)
    sw.summarize_additive(draws)
    assert sorted(built) == [300, 400, 400, 400]


def test_tall_skinny_qr_in_small_pieces_matches_one_piece(draws, monkeypatch):
    """Pieces of the QR smaller than a design piece, ragged, some with fewer rows than columns."""
    whole_lin, whole_add = sw.summarize_linear(draws).table(), sw.summarize_additive(draws)
    monkeypatch.setattr(projection, "CHUNK_UNITS", 400)
    monkeypatch.setattr(projection, "QR_ROWS", 37)
    np.testing.assert_allclose(_numbers(sw.summarize_linear(draws).table()), _numbers(whole_lin), rtol=1e-8, atol=1e-10)
    piece_add = sw.summarize_additive(draws)
    np.testing.assert_allclose(_numbers(piece_add.curves()), _numbers(whole_add.curves()), rtol=1e-8, atol=1e-10)
    np.testing.assert_allclose(piece_add.fit_r2, whole_add.fit_r2, rtol=1e-8)
