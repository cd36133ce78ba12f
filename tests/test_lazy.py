"""Draws that are not in memory: a zarr store read through Dask, on the threaded scheduler and
on a two-worker LocalCluster, gives the same tables as the in-memory path."""
import numpy as np
import pandas as pd
import pytest

import summarize_widgets as sw
from summarize_widgets.core import lazy

from conftest import household_covariates

da = pytest.importorskip("dask.array")
zarr = pytest.importorskip("zarr")

S, N = 120, 1500


@pytest.fixture(scope="module")
def study(tmp_path_factory):
    rng = np.random.default_rng(7)
    X = household_covariates(N, rng)
    T = (rng.normal(size=(S, N)) + 0.03 * X["age"].to_numpy() - 0.5 * (X["fuel"] == "oil").to_numpy()).astype(np.float32)
    path = tmp_path_factory.mktemp("lazy") / "draws.zarr"
    z = zarr.open_array(str(path), mode="w", shape=T.shape, chunks=(16, 500), dtype="f4")
    z[:] = T
    return X, T, path


@pytest.fixture
def small_blocks(monkeypatch):
    # Several chunks of draws even at this size: 16 draws of 1,500 float32 units is 96 kB.
    monkeypatch.setattr(lazy, "LAZY_BLOCK_BYTES", 100_000)


def _tables(bundle):
    return {"subgroups": bundle.tree.table(), "fit": bundle.tree.fit_r2_by_depth(), "nodes": bundle.tree.nodes(),
            "linear": bundle.linear.table(), "curves": bundle.additive.curves(), "groups": bundle.groups.table()}


def _assert_same(a, b, tol=1e-10):
    for name in a:
        ta, tb = a[name], b[name]
        assert list(ta.columns) == list(tb.columns), name
        num = ta.select_dtypes("number").columns
        np.testing.assert_allclose(ta[num].to_numpy(float), tb[num].to_numpy(float), rtol=tol, atol=tol,
                                   equal_nan=True, err_msg=name)
        other = [c for c in ta.columns if c not in num]
        pd.testing.assert_frame_equal(ta[other], tb[other], check_dtype=False)


GROUPS = {"older": "age >= 65", "oil heating": "fuel == 'oil'"}


def _job(draws):
    return _tables(sw.summarize_all(draws, depth=3, max_depth=4, groups=GROUPS))


def test_zarr_store_stays_lazy_and_matches_memory_threaded(study, small_blocks):
    X, T, path = study
    lazy_draws = sw.EffectDraws(da.from_zarr(str(path)), X)
    assert lazy_draws.is_lazy and len(lazy_draws.values.chunks[0]) > 1  # not loaded; several chunks of draws
    assert lazy_draws.values.chunks[1] == (N,)
    mem = sw.EffectDraws(T, X)
    np.testing.assert_allclose(lazy_draws.posterior_mean, mem.posterior_mean, rtol=1e-12)
    np.testing.assert_allclose(lazy_draws.scan.centred_squares, mem.scan.centred_squares, rtol=1e-12)
    import dask

    with dask.config.set(scheduler="threads"):
        _assert_same(_job(mem), _job(lazy_draws))


def test_zarr_store_on_a_two_worker_local_cluster(study, small_blocks):
    import warnings

    import dask

    distributed = pytest.importorskip("distributed")
    X, T, path = study
    expected = _job(sw.EffectDraws(T, X))
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
                                  dashboard_address=None, worker_dashboard_address=None) as cluster, \
            distributed.Client(cluster) as client:
        assert len(client.scheduler_info()["workers"]) == 2
        # the reducers' maps reach the workers once, ahead of the graph: no graph large enough for
        # Dask's warning even with its threshold at 20 kB (the maps here are larger)
        with dask.config.set({"distributed.admin.large-graph-warning-threshold": "20kB"}), warnings.catch_warnings():
            warnings.filterwarnings("error", message=".*large graph.*")
            got = _job(sw.EffectDraws(da.from_zarr(str(path)), X))
        # the blocks were reduced on the workers: both ran tasks of the pass
        assert all(n > 0 for n in client.run(lambda dask_worker: len(dask_worker.data) + dask_worker.state.executed_count).values())
    _assert_same(expected, got)


def test_xarray_zarr_with_chain_dims_stays_lazy(study, tmp_path, small_blocks):
    xr = pytest.importorskip("xarray")
    X, T, _ = study
    arr = xr.DataArray(T.reshape(4, S // 4, N), dims=("chain", "draw", "household"))
    arr.to_dataset(name="tau").to_zarr(str(tmp_path / "ds.zarr"), consolidated=False)
    opened = xr.open_zarr(str(tmp_path / "ds.zarr"), consolidated=False)["tau"]
    draws = sw.EffectDraws(opened, X)
    assert draws.is_lazy and draws.n_chains == 4 and draws.n_draws == S
    mem = sw.EffectDraws(T, X, chains=4)
    _assert_same({"t": sw.summarize_tree(mem, max_depth=2).table()}, {"t": sw.summarize_tree(draws, max_depth=2).table()})


def test_lazy_complier_weighted_matches_memory(small_blocks):
    rng = np.random.default_rng(3)
    X = household_covariates(800, rng)
    pi = rng.uniform(0.2, 0.8, size=(64, 800))
    itt = pi * (rng.normal(size=(64, 800)) + 0.02 * X["age"].to_numpy())
    mem = sw.EffectDraws.from_itt(itt, pi, X)
    lz = sw.EffectDraws.from_itt(da.from_array(itt, chunks=(8, 800)), da.from_array(pi, chunks=(8, 800)), X)
    assert lz.is_lazy
    _assert_same({"t": sw.summarize_tree(mem, max_depth=2).table(), "l": sw.summarize_linear(mem).table()},
                 {"t": sw.summarize_tree(lz, max_depth=2).table(), "l": sw.summarize_linear(lz).table()})


def test_lazy_nonfinite_draw_is_reported(small_blocks):
    rng = np.random.default_rng(4)
    X = household_covariates(300, rng)
    T = rng.normal(size=(40, 300))
    T[17, 5] = np.nan
    with pytest.raises(sw.SummaryError, match="NaN|non-finite"):
        sw.EffectDraws(da.from_array(T, chunks=(8, 300)), X)


class _CountingStore:
    """A read-only array that counts every read of a block of draws (as a zarr store would serve them)."""

    def __init__(self, values):
        self.values = values
        self.shape, self.dtype, self.ndim = values.shape, values.dtype, values.ndim
        self.reads = {}

    def __getitem__(self, key):
        out = self.values[key]
        if out.size:
            rows = key[0] if isinstance(key, tuple) else key
            k = (rows.start, rows.stop)
            self.reads[k] = self.reads.get(k, 0) + 1
        return out


def test_whole_job_reads_each_block_of_lazy_draws_exactly_twice(study):
    X, T, _ = study
    store = _CountingStore(T)
    arr = da.from_array(store, chunks=(16, N), asarray=False, meta=np.empty((0, 0), np.float32))
    draws = sw.EffectDraws(arr, X)  # pass 1: the validation scan
    assert set(store.reads.values()) == {1}
    sw.summarize_all(draws, depth=3, max_depth=6, groups=GROUPS)  # pass 2: every projection at once
    assert len(store.reads) == -(-S // 16) and set(store.reads.values()) == {2}, store.reads


def test_whole_job_reads_each_block_in_memory_exactly_twice(study, monkeypatch):
    X, T, _ = study
    reads = {}
    original = sw.EffectDraws.block

    def counting(self, r):
        reads[(r.start, r.stop)] = reads.get((r.start, r.stop), 0) + 1
        return original(self, r)

    monkeypatch.setattr(sw.EffectDraws, "block", counting)
    bundle = sw.summarize_draws(T.astype(np.float64), X, depth=2, groups=GROUPS)
    assert bundle.linear is not None and bundle.additive is not None and bundle.groups is not None
    assert reads and set(reads.values()) == {2}, reads
    # a summary computed alone still costs one pass
    reads.clear()
    sw.summarize_linear(bundle.draws)
    assert set(reads.values()) == {1}


def test_lazy_pass_keeps_few_partial_sums_alive(study, monkeypatch):
    """Per-unit partial sums of a lazy pass on the local scheduler are absorbed as each chunk is done:
    a bounded number are alive at once, however many chunks (as one graph, Dask read ahead and kept
    them: 6.8 GiB at 1,000 x 8,000,000)."""
    import weakref

    import dask

    from summarize_widgets.core.passes import BlockReducer, run_pass

    X, T, _ = study
    alive, most = [], [0]

    class PerUnit(BlockReducer):
        summed = True

        def start(self, n_draws):
            self.total = None

        def partial(self, block):
            part = np.asarray(block.wt, dtype=np.float64).sum(axis=0)
            alive.append(weakref.ref(part))
            most[0] = max(most[0], sum(r() is not None for r in alive))
            return part

        def store(self, rows, part):
            self.total = part

    monkeypatch.setattr(lazy, "LAZY_BLOCK_BYTES", 1)  # the store's own chunks: 60 of 2 draws
    draws = sw.EffectDraws(da.from_array(T, chunks=(2, N)), X)
    probe = PerUnit()
    with dask.config.set(scheduler="threads", num_workers=2):
        run_pass(draws, [probe])
    assert len(alive) == -(-S // 2) and most[0] <= 4, most[0]
    eager = PerUnit()
    run_pass(sw.EffectDraws(T, X), [eager])  # the same sums from the in-memory path
    np.testing.assert_allclose(probe.total, eager.total, rtol=1e-10)
