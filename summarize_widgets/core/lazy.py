"""Draws that are not in memory: Dask arrays, lazily opened xarray objects and zarr arrays.

Nothing here loads the draws. :func:`lazy_matrix` turns such an input into a 2-D Dask
array (draws x units) whose chunks span every unit; :func:`run_lazy_pass` runs the
reducers of a pass (:mod:`summarize_widgets.core.passes`) over its chunks: each chunk of
draws is reduced where it lives (``reducer.partial``) and only the small per-draw results
travel back. The active scheduler decides where that runs. On Dask's local schedulers
(threaded, the default, or synchronous) a window of one chunk per worker thread is in flight
and each result is absorbed when done, so memory holds a fixed number of chunks whatever
their count; with a ``dask.distributed`` ``LocalCluster`` or a remote ``Client(address)``
the pass is one Dask computation whose per-unit sums are added in a tree on the workers.
"""
from __future__ import annotations

import uuid

import numpy as np

from .validate import SummaryError

__all__ = ["is_lazy", "lazy_matrix", "run_lazy_pass", "lazy_source", "LAZY_BLOCK_BYTES"]

#: Target bytes of one chunk of draws in a lazy pass (chunks of the store are merged up to it).
LAZY_BLOCK_BYTES = 128 * 2**20


def _dask_array_type():
    try:
        import dask.array as da
    except ImportError:  # pragma: no cover - dask is a dependency
        return None
    return da.Array


def is_lazy(values) -> bool:
    """True for a Dask array, a zarr array, or an xarray object backed by Dask."""
    arr_type = _dask_array_type()
    if arr_type is not None and isinstance(values, arr_type):
        return True
    if type(values).__module__.startswith("zarr") and hasattr(values, "shape") and hasattr(values, "dtype"):
        return True
    try:
        import xarray as xr
    except ImportError:  # pragma: no cover
        return False
    return isinstance(values, xr.DataArray) and arr_type is not None and isinstance(values.data, arr_type)


def _block_rows(chunks, n_units, itemsize) -> int:
    """Draws per chunk: a multiple of the store's own chunk, about LAZY_BLOCK_BYTES."""
    base = max(1, int(chunks[0]) if chunks else 1)
    want = max(1, LAZY_BLOCK_BYTES // max(1, itemsize * n_units))
    return max(base, (want // base) * base)


def lazy_matrix(values, name: str):
    """Return (2-D Dask array of draws x units, chains from dims or None) without loading anything."""
    import dask.array as da

    chains = None
    if isinstance(values, da.Array):
        arr = values
    elif not hasattr(values, "dims"):  # a zarr array
        arr = da.from_zarr(values)
    else:
        dims = list(values.dims)
        if "chain" in dims and "draw" in dims:
            others = [d for d in dims if d not in ("chain", "draw")]
            if len(others) != 1:
                raise SummaryError(
                    f"`{name}` must have dims (chain, draw, <unit>) with exactly one unit dimension; got dims {tuple(dims)}."
                )
            chains = int(values.sizes["chain"])
            arr = values.transpose("chain", "draw", others[0]).data
        elif "draw" in dims and len(dims) == 2:
            other = [d for d in dims if d != "draw"][0]
            arr = values.transpose("draw", other).data
        else:
            arr = values.data
    if arr.ndim == 3:  # (chain, draw, unit), chain-major
        if chains is None:
            chains = int(arr.shape[0])
        arr = arr.reshape(arr.shape[0] * arr.shape[1], arr.shape[2], merge_chunks=True)
    if arr.ndim != 2:
        raise SummaryError(f"`{name}` must be 2-D with shape (n_draws, n_units); got {arr.ndim}-D shape {arr.shape}.")
    if arr.dtype.kind in "biu":
        arr = arr.astype(np.float64)
    elif arr.dtype.kind != "f":
        raise SummaryError(f"`{name}` must hold numbers; got dtype {arr.dtype}.")
    elif arr.dtype not in (np.float32, np.float64):
        arr = arr.astype(np.float64)
    rows = _block_rows(arr.chunks[0], arr.shape[1], arr.dtype.itemsize)
    if len(arr.chunks[1]) != 1 or any(c != rows for c in arr.chunks[0][:-1]):
        arr = arr.rechunk({0: rows, 1: -1})
    return arr, chains


def lazy_source(arr) -> str:
    """An id of a lazy array's contents: Dask's deterministic name of its graph."""
    return f"dask:{arr.name}"


def _reduce_block(reducers, weights, start, stop, vals, den):
    """Run on a worker: one chunk of draws through every reducer's ``partial``."""
    from .draws import assemble_block

    block = assemble_block(slice(start, stop), np.asarray(vals), None if den is None else np.asarray(den), weights)
    return [r.partial(block) for r in reducers]


def _pick(parts, mask):
    return [p if m else None for p, m in zip(parts, mask)]


def _add_lists(a, b):
    from .passes import add_parts

    return [add_parts(x, y) for x, y in zip(a, b)]


def _tree_sum(items, combine):
    from dask import delayed

    while len(items) > 1:
        items = [delayed(combine, pure=True)(items[k], items[k + 1]) if k + 1 < len(items) else items[k]
                 for k in range(0, len(items), 2)]
    return items[0]


def _active_client():
    """The dask.distributed Client that is Dask's current scheduler, or None."""
    try:
        import dask.base
        from distributed import Client
    except ImportError:  # pragma: no cover - distributed is a dependency
        return None
    sched = dask.base.get_scheduler()
    owner = getattr(sched, "__self__", None)
    return owner if isinstance(owner, Client) else None


def _local_workers():
    """Worker threads when Dask's active scheduler is its threaded (or synchronous) one, else None."""
    import os

    import dask
    import dask.base
    import dask.local
    import dask.threaded

    sched = dask.base.get_scheduler()
    if sched is dask.local.get_sync:
        return 1
    if sched is dask.threaded.get:
        n = dask.config.get("num_workers", None)
        return max(1, int(n) if n else (os.cpu_count() or 1))
    return None


def _run_window(reducers, edges, v_parts, d_parts, summed, store_rows, workers, weights):
    """Reduce chunk by chunk on ``workers`` threads, at most ``workers`` chunks in flight."""
    from concurrent.futures import FIRST_COMPLETED, ThreadPoolExecutor, wait

    from .passes import add_parts

    def work(k):
        vals = np.asarray(v_parts[k].compute(scheduler="synchronous"))
        den = None if d_parts[k] is None else np.asarray(d_parts[k].compute(scheduler="synchronous"))
        return k, _reduce_block(reducers, weights, int(edges[k]), int(edges[k + 1]), vals, den)

    totals = [None] * len(reducers)
    todo = iter(range(len(v_parts)))
    with ThreadPoolExecutor(workers) as pool:
        running = {pool.submit(work, k) for k in [k for _, k in zip(range(workers), todo)]}
        while running:
            done, running = wait(running, return_when=FIRST_COMPLETED)
            for fut in done:
                k, result = fut.result()
                store_rows(k, result)
                for j, (part, s) in enumerate(zip(result, summed)):
                    if s:
                        totals[j] = add_parts(totals[j], part)
                nxt = next(todo, None)
                if nxt is not None:
                    running.add(pool.submit(work, nxt))
    for r, part, s in zip(reducers, totals, summed):
        if s:
            r.store(None, part)


def run_lazy_pass(draws, reducers, *, progress=None) -> None:
    """One Dask computation over the chunks of ``draws`` (reducers already started)."""
    import dask
    from dask import delayed

    legacy = [r for r in reducers if not hasattr(r, "partial")]
    if legacy:  # older protocol: bring each chunk to the caller
        for block in draws.blocks():
            for r in legacy:
                r.consume(block)
        reducers = [r for r in reducers if hasattr(r, "partial")]
        if not reducers:
            return
    vals = draws.values
    den = draws.uptake_values
    if den is not None and den.chunks != vals.chunks:
        den = den.rechunk(vals.chunks)
    v_parts = vals.to_delayed().ravel()
    d_parts = den.to_delayed().ravel() if den is not None else [None] * len(v_parts)
    edges = np.concatenate([[0], np.cumsum(vals.chunks[0])]).astype(int)
    summed = [bool(getattr(r, "summed", False)) for r in reducers]
    per_draw = [not s for s in summed]
    n = len(v_parts)
    done = [0]

    def store_rows(k, result, count=True):
        rows = slice(int(edges[k]), int(edges[k + 1]))
        for r, part, keep in zip(reducers, result, per_draw):
            if keep:
                r.store(rows, part)
        if count:
            done[0] += 1
            if progress:
                progress(done[0], n)

    client = _active_client()
    local = None if client is not None else _local_workers()
    if local is not None:
        # Dask's local schedulers: a window of `local` chunks in flight, each read and reduced by one
        # task and absorbed as soon as it is done. As one graph, the threaded scheduler read chunks and
        # kept per-unit partial sums well ahead of the additions that free them (6.8 GiB at 1,000 x
        # 8,000,000 in 250 chunks, against 1.3 GiB in 8 chunks).
        _run_window(reducers, edges, v_parts, d_parts, summed, store_rows, local, draws.weights)
        return
    # Named explicitly: hashing the reducers' maps (n_units x k) to name them would cost a copy.
    token = uuid.uuid4().hex
    red = delayed(reducers, traverse=False, name=f"pass-reducers-{token}")
    w = delayed(draws.weights, traverse=False, name=f"pass-weights-{token}") if draws.weights is not None else None
    if client is not None:
        # The reducers' maps (n_units x k) go to every worker once, ahead of the graph, instead of
        # inside it (Dask warned of a graph of 550 MB at 2,000,000 units).
        red = client.scatter(reducers, broadcast=True, hash=False)
        if draws.weights is not None:
            w = client.scatter(draws.weights, broadcast=True, hash=False)
    parts = [delayed(_reduce_block, pure=True)(red, w, int(edges[k]), int(edges[k + 1]), v_parts[k], d_parts[k])
             for k in range(len(v_parts))]
    row_parts = [delayed(_pick, pure=True)(p, per_draw) for p in parts]
    total = _tree_sum([delayed(_pick, pure=True)(p, summed) for p in parts], _add_lists) if any(summed) else None
    if client is not None:
        from distributed import as_completed

        futures = client.compute(row_parts)
        total_future = client.compute(total) if total is not None else None
        index = {f.key: k for k, f in enumerate(futures)}
        for fut, result in as_completed(futures, with_results=True):
            store_rows(index[fut.key], result)
        totals = total_future.result() if total_future is not None else None
    else:
        from dask.callbacks import Callback

        keys = {p.key: k for k, p in enumerate(row_parts)}

        class _Count(Callback):
            def _posttask(self, key, result, dsk, state, worker_id):
                if key in keys:
                    done[0] += 1
                    if progress:
                        progress(done[0], n)

        with _Count():
            results, totals = dask.compute(row_parts, total)
        for k, result in enumerate(results):
            store_rows(k, result, count=False)
    if totals is not None:
        for r, part, s in zip(reducers, totals, summed):
            if s:
                r.store(None, part)
