"""Passes over the draws, written as chunked reductions.

A pass hands consecutive blocks of draws (:class:`~summarize_widgets.draws.DrawBlock`)
to one or more reducers. Each reducer writes the rows of its per-draw output
that belong to the block, so blocks are independent: they can run on a thread
pool (NumPy releases the GIL in the heavy loops), come from a memory-mapped
file, and let a progress bar count blocks. Several summaries can share one pass.
"""
from __future__ import annotations

import os
from collections.abc import Callable, Sequence
from concurrent.futures import ThreadPoolExecutor
from typing import Protocol

import numpy as np

__all__ = ["Reducer", "run_pass", "LeafSums", "LinearMap"]


class Reducer(Protocol):
    """What a pass needs from a reducer."""

    def start(self, n_draws: int) -> None:
        """Allocate per-draw outputs."""

    def consume(self, block) -> None:
        """Reduce one block; write only rows ``block.rows`` of the outputs."""


def _default_threads() -> int:
    return max(1, min(2, os.cpu_count() or 1))


def run_pass(draws, reducers: Sequence[Reducer], *, progress: Callable[[int, int], None] | None = None,
             threads: int | None = None, rows_per_block: int | None = None) -> None:
    """Run every reducer over all blocks of ``draws`` in one pass.

    Parameters
    ----------
    draws : EffectDraws
    reducers : sequence of Reducer
    progress : callable(done_blocks, total_blocks), optional
        Called after each block (from the calling thread).
    threads : int, optional
        Worker threads (default: up to 2).
    rows_per_block : int, optional
        Draws per block (default: about 8 MB of float64 per block).
    """
    for r in reducers:
        r.start(draws.n_draws)
    step = rows_per_block or draws.block_rows()
    wanted = max((getattr(r, "block_bytes", 0) for r in reducers), default=0)
    if rows_per_block is None and wanted:
        # Matrix-product reducers re-read their (n_units x k) matrix once per block: larger blocks
        # cut that traffic and let BLAS reach its speed.
        step = max(step, min(draws.n_draws, wanted // (8 * draws.n_units)))
    starts = list(range(0, draws.n_draws, step))
    total = len(starts)

    def work(start):
        block = draws.block(slice(start, min(start + step, draws.n_draws)))
        for r in reducers:
            r.consume(block)

    threads = threads or _default_threads()
    if threads == 1 or total == 1:
        for k, s in enumerate(starts, 1):
            work(s)
            if progress:
                progress(k, total)
        return
    with ThreadPoolExecutor(threads) as pool:
        for k, _ in enumerate(pool.map(work, starts), 1):
            if progress:
                progress(k, total)


class LeafSums:
    """Per draw and group: ``A_sg = sum_{i in g} w_si T_si`` and, with per-draw weights, ``W_sg = sum_{i in g} w_si``.

    Parameters
    ----------
    codes : ndarray of int, shape (n_units,)
        Group of each unit, 0..n_groups-1 (units with code -1 are left out).
    n_groups : int
    """

    def __init__(self, codes: np.ndarray, n_groups: int):
        codes = np.asarray(codes)
        self._keep = None if (codes >= 0).all() else np.flatnonzero(codes >= 0)
        self.codes = codes if self._keep is None else codes[self._keep]
        self.n_groups = int(n_groups)

    def start(self, n_draws: int) -> None:
        self.sums = np.zeros((n_draws, self.n_groups))
        self.weights = None  # filled only when weights vary by draw

    def _rows_bincount(self, mat, out):
        codes, G = self.codes, self.n_groups
        for j in range(mat.shape[0]):
            row = mat[j] if self._keep is None else mat[j, self._keep]
            out[j] = np.bincount(codes, weights=row, minlength=G)

    def consume(self, block) -> None:
        self._rows_bincount(block.wt, self.sums[block.rows])
        if block.w is not None and block.w.ndim == 2:
            if self.weights is None:
                self.weights = np.zeros_like(self.sums)
            self._rows_bincount(block.w, self.weights[block.rows])


class LinearMap:
    """Per draw: ``wt_s @ H`` for a fixed (n_units, k) matrix H (a frozen linear smoother or projection).

    With per-draw weights it also stores ``w_s @ H`` when ``with_weights`` is set.
    Accumulates in float64 whatever the draws' dtype.
    """

    #: Preferred block size in bytes (see :func:`run_pass`).
    block_bytes = 64 * 2**20

    def __init__(self, H: np.ndarray, *, with_weights: bool = False):
        self.H = np.ascontiguousarray(H, dtype=np.float64)
        self.with_weights = with_weights

    def start(self, n_draws: int) -> None:
        self.out = np.zeros((n_draws, self.H.shape[1]))
        self.weights_out = np.zeros((n_draws, self.H.shape[1])) if self.with_weights else None

    def consume(self, block) -> None:
        wt = block.wt if block.wt.dtype == np.float64 else block.wt.astype(np.float64)
        self.out[block.rows] = wt @ self.H
        if self.with_weights and block.w is not None:
            self.weights_out[block.rows] = (block.w @ self.H) if block.w.ndim == 2 else np.broadcast_to(block.w @ self.H, self.out[block.rows].shape)
