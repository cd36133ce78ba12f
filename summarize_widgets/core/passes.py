"""Passes over the draws, written as chunked reductions.

A pass hands consecutive blocks of draws (:class:`~summarize_widgets.core.draws.DrawBlock`)
to one or more reducers. A reducer splits its work in two:

- ``partial(block)`` reduces one block to a small result (per-draw rows of the block, or
  a per-unit array to be summed over blocks when the reducer's ``summed`` is True). It
  reads nothing but the block and the reducer's own fixed arrays, so it can run where the
  block lives: on a worker thread, or on a Dask worker next to a chunk of a zarr store;
- ``store(rows, part)`` writes that result into the reducer's outputs, on the caller's
  side (``rows`` is the block's slice of draws; ``None`` with the sum over all blocks for
  a ``summed`` reducer).

In-memory NumPy draws (including ``np.memmap``) run on a thread pool (NumPy releases the
GIL in the heavy loops). Lazy draws (a Dask array, or an xarray object opened with chunks)
run as one Dask computation (:mod:`summarize_widgets.core.lazy`) on whatever scheduler is
active: the threaded one, a ``dask.distributed.LocalCluster`` or a remote ``Client``.
Several summaries share one pass by handing all their reducers to one :func:`run_pass`.

A reducer with only ``consume(block)`` (the older protocol) still works: it runs on the
caller's side, and lazy blocks are brought to it.
"""
from __future__ import annotations

import os
from collections.abc import Callable, Sequence
from concurrent.futures import ThreadPoolExecutor
from typing import Protocol

import numpy as np

from .validate import SummaryError

__all__ = ["Reducer", "BlockReducer", "run_pass", "LeafSums", "LinearMap", "add_parts", "SLICE_UNITS",
           "unit_slices", "block_slice"]


class Reducer(Protocol):
    """What a pass needs from a reducer (see the module notes)."""

    summed: bool

    def start(self, n_draws: int) -> None:
        """Allocate per-draw outputs."""

    def partial(self, block):
        """Reduce one block to a small picklable result."""

    def store(self, rows, part) -> None:
        """Write a block's result (``rows`` a slice), or the sum over blocks (``rows`` None)."""


class BlockReducer:
    """Base of the reducers here: ``consume(block)`` = ``store(block.rows, partial(block))``."""

    #: True when the parts of all blocks are added and stored once (per-unit sums).
    summed = False

    def start(self, n_draws: int) -> None:  # pragma: no cover - every reducer overrides it
        raise NotImplementedError

    def partial(self, block):  # pragma: no cover
        raise NotImplementedError

    def store(self, rows, part) -> None:  # pragma: no cover
        raise NotImplementedError

    def consume(self, block) -> None:
        self.store(None if self.summed else block.rows, self.partial(block))


def add_parts(a, b):
    """Sum two parts of a ``summed`` reducer (arrays, or tuples of arrays / None)."""
    if a is None:
        return b
    if isinstance(a, tuple):
        return tuple(add_parts(x, y) for x, y in zip(a, b))
    return a + b


def _default_threads() -> int:
    return max(1, min(2, os.cpu_count() or 1))


def block_step(draws, reducers, rows_per_block=None) -> int:
    """Draws per block of an in-memory pass."""
    step = rows_per_block or draws.block_rows()
    wanted = max((getattr(r, "block_bytes", 0) for r in reducers), default=0)
    if rows_per_block is None and wanted:
        # Matrix-product reducers re-read their (n_units x k) matrix once per block: larger blocks
        # cut that traffic and let BLAS reach its speed.
        step = max(step, min(draws.n_draws, wanted // (8 * draws.n_units)))
    return step


def run_pass(draws, reducers: Sequence[Reducer], *, progress: Callable[[int, int], None] | None = None,
             threads: int | None = None, rows_per_block: int | None = None) -> None:
    """Run every reducer over all blocks of ``draws`` in one pass.

    Parameters
    ----------
    draws : EffectDraws
    reducers : sequence of Reducer
    progress : callable(done_blocks, total_blocks), optional
        Called after each block (from the calling thread). Without one, long passes show
        a tqdm progress bar (:func:`summarize_widgets.core.progress.auto_progress`).
    threads : int, optional
        Worker threads for in-memory draws (default: up to 2). Lazy draws use the active
        Dask scheduler's workers.
    rows_per_block : int, optional
        Draws per block for in-memory draws (default: about 8 MB of float64 per block).
        Lazy draws are reduced one chunk of draws at a time (the array's own chunks).
    """
    try:
        _run_pass(draws, list(reducers), progress, threads, rows_per_block)
    except MemoryError as exc:
        raise SummaryError(_memory_message(draws, reducers, exc)) from None


def _memory_message(draws, reducers, exc) -> str:
    maps = sum(int(getattr(r, "H", np.empty(0)).nbytes) for r in reducers)
    lazy = getattr(draws, "is_lazy", False)
    rows = draws.block_rows()
    block = rows * draws.n_units * (draws.dtype.itemsize if lazy else 8)
    return (
        f"Ran out of memory in a pass over the draws ({draws.n_draws} x {draws.n_units}, {draws.dtype}; {exc}): "
        f"each block of {rows} draws takes about {block / 2**20:.0f} MiB per worker and the summaries' maps "
        f"{maps / 2**20:.0f} MiB (DEVELOPERS.md \"Memory\" has the formula). Free memory, summarize fewer "
        "covariates at once, or read the draws lazily (a .npy file memory-mapped, or zarr through Dask with "
        "smaller chunks of draws)."
    )


def _run_pass(draws, reducers, progress, threads, rows_per_block) -> None:
    from .progress import pass_progress

    for r in reducers:
        r.start(draws.n_draws)
    if getattr(draws, "is_lazy", False):
        from .lazy import run_lazy_pass

        with pass_progress(draws, progress) as tick:
            run_lazy_pass(draws, reducers, progress=tick)
        return
    step = block_step(draws, reducers, rows_per_block)
    starts = list(range(0, draws.n_draws, step))
    total = len(starts)
    sums = {}

    def work(start):
        block = draws.block(slice(start, min(start + step, draws.n_draws)))
        parts = []
        for r in reducers:
            if hasattr(r, "partial"):
                parts.append(r.partial(block))
            else:
                r.consume(block)  # older protocol: writes its own rows
                parts.append(None)
        return block.rows, parts

    def absorb(rows, parts):
        for k, (r, part) in enumerate(zip(reducers, parts)):
            if not hasattr(r, "partial"):
                continue
            if r.summed:
                sums[k] = add_parts(sums.get(k), part)
            else:
                r.store(rows, part)

    threads = threads or _default_threads()
    with pass_progress(draws, progress, total=total) as tick:
        if threads == 1 or total == 1:
            for k, s in enumerate(starts, 1):
                absorb(*work(s))
                tick(k, total)
        else:
            with ThreadPoolExecutor(threads) as pool:
                for k, result in enumerate(pool.map(work, starts), 1):
                    absorb(*result)
                    tick(k, total)
    for k, total_part in sums.items():
        reducers[k].store(None, total_part)


#: Units per slice when a reducer works through a block piece by piece: float32 draws are widened,
#: centred and bincounted one slice at a time, so the temporaries (a few MB) stay in cache instead
#: of each costing a block-sized float64 copy (at 8,000,000 units a copy of one draw is 64 MB of
#: fresh pages, slower than the reduction itself; benchmarks/bench_scale.py).
SLICE_UNITS = 2**17


def unit_slices(n_units: int, step: int = SLICE_UNITS):
    """``(a, b)`` bounds of consecutive slices of at most ``step`` units covering ``0..n_units``."""
    return [(a, min(a + step, n_units)) for a in range(0, n_units, step)]


def block_slice(block, a: int, b: int, centre=None, *, weights: bool = False) -> np.ndarray:
    """Units ``a:b`` of a block's weighted draws ``w_si T_si`` (or of its per-draw weights ``w_si``
    with ``weights``), float64; with ``centre``, ``w_si (T_si - c_s)``.

    Summing centred values instead of ``w_si T_si`` keeps the digits of the spread when the effects
    carry a large common offset (1e9 plus effects of 1e-3): the offset never enters a sum.
    """
    if weights:
        w = block.w
        return np.asarray(w[:, a:b] if w.ndim == 2 else w[None, a:b], dtype=np.float64)
    if centre is None:
        return np.asarray(block.wt[:, a:b], dtype=np.float64)
    out = np.array(block.wt[:, a:b], dtype=np.float64)  # a copy: centred in place
    c = np.asarray(centre, dtype=np.float64)[block.rows, None]
    w = block.w
    if w is None:
        out -= c
    else:
        out -= c * np.asarray(w[:, a:b] if w.ndim == 2 else w[None, a:b], dtype=np.float64)
    return out


class LeafSums(BlockReducer):
    """Per draw and group: ``A_sg = sum_{i in g} w_si T_si`` and, with per-draw weights, ``W_sg = sum_{i in g} w_si``.

    Parameters
    ----------
    codes : ndarray of int, shape (n_units,)
        Group of each unit, 0..n_groups-1 (units with code -1 are left out).
    n_groups : int
    centre : None or ndarray, shape (n_draws,)
        Per-draw constants ``c_s``: the sums are then accumulated centred, ``sum_{i in g} w_si (T_si - c_s)``
        (kept as ``centred_sums``), and ``sums`` is rebuilt from them (see :func:`block_slice`).
    """

    def __init__(self, codes: np.ndarray, n_groups: int, centre=None):
        self.centre = centre
        codes = np.asarray(codes)
        self.n_groups = int(n_groups)
        # Units left out (code -1) are counted in one extra group that is dropped at the end (no
        # gather of the kept units); int32 codes halve the memory of millions of units.
        self.codes = np.where(codes >= 0, codes, self.n_groups).astype(np.int32 if n_groups < 2**31 - 1 else np.int64)

    def start(self, n_draws: int) -> None:
        self.sums = np.zeros((n_draws, self.n_groups))
        self.centred_sums = None if self.centre is None else np.zeros((n_draws, self.n_groups))
        self.weights = None  # filled only when weights vary by draw

    def _group_sums(self, block, *, centre=None, weights=False) -> np.ndarray:
        """Per row and group, the sum over units of the block's (centred) weighted draws, or of
        its weights: one bincount per row and slice of units (see :data:`SLICE_UNITS`)."""
        G = self.n_groups + 1
        rows = 1 if weights and (block.w is None or block.w.ndim == 1) else block.wt.shape[0]
        out = np.zeros((rows, G))
        for a, b in unit_slices(self.codes.size):
            codes = self.codes[a:b].astype(np.intp)  # bincount would convert them once per row
            if weights and block.w is None:
                out[0] += np.bincount(codes, minlength=G)
                continue
            mat = block_slice(block, a, b, centre, weights=weights)
            for j in range(mat.shape[0]):
                out[j] += np.bincount(codes, weights=mat[j], minlength=G)
            del mat  # before the next slice is made: one slice in memory at a time
        return out[:, :self.n_groups]

    def partial(self, block):
        weights = None
        if block.w is not None and block.w.ndim == 2:
            weights = self._group_sums(block, weights=True)
        if self.centre is None:
            return self._group_sums(block), weights, None
        centred = self._group_sums(block, centre=self.centre)
        wg = weights if weights is not None else self._group_sums(block, weights=True)
        return centred + np.asarray(self.centre, dtype=np.float64)[block.rows, None] * wg, weights, centred

    def store(self, rows, part) -> None:
        sums, weights, centred = part
        self.sums[rows] = sums
        if centred is not None:
            self.centred_sums[rows] = centred
        if weights is not None:
            if self.weights is None:
                self.weights = np.zeros_like(self.sums)
            self.weights[rows] = weights


class LinearMap(BlockReducer):
    """Per draw: ``wt_s @ H`` for a fixed (n_units, k) matrix H (a frozen linear smoother or projection);
    with ``centre``, ``(wt_s - c_s w_s) @ H``.

    With per-draw weights it also stores ``w_s @ H`` when ``with_weights`` is set.
    Accumulates in float64 whatever the draws' dtype, unless H is float32 (a design too large
    for float64 in memory, see DEVELOPERS.md "Memory"): then the product runs in float32 over
    slices of at most 2^16 units, added in float64.
    """

    #: Preferred block size in bytes (see :func:`run_pass`).
    block_bytes = 64 * 2**20
    #: Units per float32 product slice (bounds float32 accumulation error to ~2^8 roundings).
    slice_units = 2**16

    def __init__(self, H: np.ndarray, *, with_weights: bool = False, centre=None):
        self.centre = centre  # per-draw constants: ``(wt_s - c_s w_s) @ H`` instead (see block_slice)
        H = np.asarray(H)
        self.H = np.ascontiguousarray(H, dtype=np.float32 if H.dtype == np.float32 else np.float64)
        self.with_weights = with_weights

    def start(self, n_draws: int) -> None:
        self.out = np.zeros((n_draws, self.H.shape[1]))
        self.weights_out = np.zeros((n_draws, self.H.shape[1])) if self.with_weights else None

    def _product(self, block, *, centre=None, weights=False):
        """``M @ H`` for the block's weighted draws M (centred with ``centre``), or its weights."""
        H = self.H
        mat = block.w if weights else block.wt
        if weights and mat.ndim == 1:
            mat = mat[None, :]
        if centre is None and mat.dtype == np.float64 and H.dtype == np.float64:
            return mat @ H  # nothing to convert: one product
        # float32 draws, a float32 map or centring: slice by slice, so no block-sized float64 copy is
        # made; a float32 map keeps float32 products over at most 2^16 units, added in float64.
        step = self.slice_units if H.dtype == np.float32 else SLICE_UNITS
        out = np.zeros((mat.shape[0], H.shape[1]))
        for a, b in unit_slices(H.shape[0], step):
            if centre is None and not weights:
                m = block.wt[:, a:b]
            else:
                m = block_slice(block, a, b, centre, weights=weights)
            out += (m if m.dtype == H.dtype else m.astype(H.dtype)) @ H[a:b]
            del m  # before the next slice is made
        return out

    def partial(self, block):
        out = self._product(block, centre=self.centre)
        w_out = None
        if self.with_weights and block.w is not None:
            w_out = self._product(block, weights=True)
            if block.w.ndim == 1:
                w_out = np.broadcast_to(w_out[0], out.shape).copy()
        return out, w_out

    def store(self, rows, part) -> None:
        out, w_out = part
        self.out[rows] = out
        if w_out is not None:
            self.weights_out[rows] = w_out
