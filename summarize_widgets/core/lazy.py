"""Draws that are not in memory: Dask arrays, lazily opened xarray objects and zarr arrays.

Nothing here loads the draws. :func:`lazy_matrix` turns such an input into a 2-D Dask
array (draws x units) whose chunks span every unit; :func:`run_lazy_pass` runs the
reducers of a pass (:mod:`summarize_widgets.core.passes`) as one Dask computation: each
chunk of draws is reduced where it lives (``reducer.partial``), only the small per-draw
results travel back, and per-unit sums are added in a tree on the workers. The active
scheduler decides where that runs: Dask's threaded scheduler by default, a
``dask.distributed`` ``LocalCluster`` or a remote ``Client(address)`` when one is active.
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
    # Named explicitly: hashing the reducers' maps (n_units x k) to name them would cost a copy.
    token = uuid.uuid4().hex
    red = delayed(reducers, traverse=False, name=f"pass-reducers-{token}")
    w = delayed(draws.weights, traverse=False, name=f"pass-weights-{token}") if draws.weights is not None else None
    summed = [bool(getattr(r, "summed", False)) for r in reducers]
    per_draw = [not s for s in summed]
    parts = [delayed(_reduce_block, pure=True)(red, w, int(edges[k]), int(edges[k + 1]), v_parts[k], d_parts[k])
             for k in range(len(v_parts))]
    row_parts = [delayed(_pick, pure=True)(p, per_draw) for p in parts]
    total = _tree_sum([delayed(_pick, pure=True)(p, summed) for p in parts], _add_lists) if any(summed) else None
    n = len(row_parts)
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
