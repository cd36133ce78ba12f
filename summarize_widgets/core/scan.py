"""The validation scan's reducers: what :class:`~summarize_widgets.core.draws.EffectDraws`
measures in its one pass over the draws.

:class:`ScanRows` gives, per draw, the weight total, the weighted total, a centring
constant and the centred weighted sum of squares (docs/method.md section 3), and flags draws
with non-finite values and negative uptake effects; :class:`ScanColumns` gives, per unit,
the weighted sums over draws (the posterior mean's numerator and denominator). Both run
through :func:`~summarize_widgets.core.passes.run_pass`, so the scan is a Dask computation
for lazy draws like every other pass. Float32 blocks are widened to float64 a few rows at
a time, so the scan's memory stays a fixed number of float64 rows whatever the block size.
"""
from __future__ import annotations

import numpy as np

from .passes import BlockReducer

__all__ = ["ScanRows", "ScanColumns", "CENTRE_UNITS"]

#: Units used to pick each draw's centring constant (any constant is exact; a typical value avoids cancellation).
CENTRE_UNITS = 256
# float64 bytes converted at once when widening a float32 block (a few rows of millions of units).
_WIDEN_BYTES = 32 * 2**20


def _row_chunks(n_rows: int, n_units: int):
    step = max(1, _WIDEN_BYTES // (8 * n_units))
    for a in range(0, n_rows, step):
        yield slice(a, min(a + step, n_rows))


class ScanRows(BlockReducer):
    """Per draw: ``W_s``, ``A_s``, ``c_s``, ``Q_s``, a non-finite flag and uptake checks.

    Parameters
    ----------
    unit_weights : None or ndarray, shape (n_units,)
        Fixed unit weights of complier-weighted draws (they multiply the centred squares).
    complier : bool
        True for complier-weighted draws (``block.uptake`` holds the uptake ITT).
    """

    def __init__(self, unit_weights=None, complier: bool = False):
        self.unit_weights = unit_weights
        self.complier = complier

    def start(self, n_draws: int) -> None:
        self.centre = np.full(n_draws, np.nan)
        self.centred_squares = np.full(n_draws, np.nan)  # sum_i w_si (T_si - c_s)^2
        self.weight_sums = np.full(n_draws, np.nan)  # sum_i w_si
        self.weighted_sums = np.full(n_draws, np.nan)  # sum_i w_si T_si
        self.bad = np.zeros(n_draws, bool)
        self.uptake_min = np.full(n_draws, np.inf)
        self.uptake_negative = np.zeros(n_draws, np.int64)

    def partial(self, block):
        m, n = block.wt.shape
        out = {k: np.full(m, np.nan) for k in ("c", "q", "W", "A")}
        out["bad"] = np.zeros(m, bool)
        out["umin"] = np.full(m, np.inf)
        out["uneg"] = np.zeros(m, np.int64)
        with np.errstate(over="ignore", invalid="ignore"):
            for rr in _row_chunks(m, n):
                self._rows(block, rr, out)
        return out

    def _rows(self, block, rr, out):
        wt = np.asarray(block.wt[rr], dtype=np.float64)
        rowsum = wt.sum(axis=1)
        w = block.w
        if w is None:
            wsum = np.full(wt.shape[0], float(wt.shape[1]))
        elif w.ndim == 1:
            wsum = np.full(wt.shape[0], float(w.sum()))
        else:
            wsum = np.asarray(w[rr], dtype=np.float64).sum(axis=1)
        if not (np.isfinite(rowsum).all() and np.isfinite(wsum).all()):
            out["bad"][rr] = True
            return
        if self.complier:  # monotonicity check while the rows are in cache
            den = block.uptake[rr]
            out["umin"][rr] = den.min(axis=1)
            out["uneg"][rr] = (den < 0).sum(axis=1)
        out["W"][rr] = wsum
        out["A"][rr] = rowsum
        out["c"][rr], out["q"][rr] = self._centred_squares(block, rr, wt, rowsum, wsum)

    def _centred_squares(self, block, rr, wt, rowsum, wsum):
        """Per draw: a centring constant c_s and ``sum_i w_si (T_si - c_s)^2``.

        Fast route: ``sum w T^2 - 2 c sum w T + c^2 sum w`` from one product. When that
        would lose more than six of float64's sixteen digits to cancellation (effects large
        relative to their spread), the rows are recomputed by centring before squaring
        (docs/method.md section 3).
        """
        k = min(CENTRE_UNITS, wt.shape[1])
        if not self.complier:
            # Unweighted draws: the block's weighted values are its values, already widened above.
            vals = wt if block.wt is block.values else np.asarray(block.values[rr], dtype=np.float64)
            c = vals[:, :k].mean(axis=1)
            ss = np.einsum("ij,ij->i", wt, vals)
            q = ss - 2.0 * c * rowsum + c * c * wsum
            unsafe = ~(q > 1e-6 * ss)
            w = block.w
            for j in np.flatnonzero(unsafe):
                x = vals[j] - c[j]
                if w is not None:
                    x = x * (w[rr][j] if w.ndim == 2 else w)
                q[j] = np.dot(x, vals[j] - c[j])
            return c, q
        # complier-weighted: T = ITT_y / pi with weight v * pi, so w (T - c)^2 = v (ITT_y - c pi)^2 / pi.
        num = np.asarray(block.values[rr], dtype=np.float64)
        den = np.asarray(block.uptake[rr], dtype=np.float64)
        dk = den[:, :k].sum(axis=1)
        c = np.where(dk > 0, num[:, :k].sum(axis=1) / np.where(dk > 0, dk, 1.0), 0.0)
        resid = num - c[:, None] * den
        with np.errstate(divide="ignore", invalid="ignore"):
            contrib = np.where(den > 0, resid * resid / np.where(den > 0, den, 1.0), 0.0)
        if self.unit_weights is not None:
            contrib = contrib * self.unit_weights
        return c, contrib.sum(axis=1)

    def store(self, rows, part) -> None:
        self.centre[rows] = part["c"]
        self.centred_squares[rows] = part["q"]
        self.weight_sums[rows] = part["W"]
        self.weighted_sums[rows] = part["A"]
        self.bad[rows] = part["bad"]
        self.uptake_min[rows] = part["umin"]
        self.uptake_negative[rows] = part["uneg"]


class ScanColumns(BlockReducer):
    """Per unit, summed over draws: ``sum_s w_si T_si`` and ``sum_s w_si``.

    Parameters
    ----------
    n_units : int
    unit_weights : None or ndarray, shape (n_units,)
        Fixed weights per unit (None: ones), used when the block's weights do not vary by draw.
    """

    summed = True

    def __init__(self, n_units: int, unit_weights=None):
        self.n_units = int(n_units)
        self.unit_weights = unit_weights

    def start(self, n_draws: int) -> None:
        self.weighted = np.zeros(self.n_units)
        self.weights = np.zeros(self.n_units)

    def partial(self, block):
        with np.errstate(over="ignore", invalid="ignore"):
            colsum = block.wt.sum(axis=0, dtype=np.float64)
            w = block.w
            if w is None or w.ndim == 1:
                return colsum, float(block.wt.shape[0])  # count of draws; times the unit weights in store
            return colsum, np.asarray(w, dtype=np.float64).sum(axis=0)

    def store(self, rows, part) -> None:
        colsum, wsum = part
        self.weighted = colsum
        if np.ndim(wsum) == 0:
            self.weights = wsum * (np.ones(self.n_units) if self.unit_weights is None else self.unit_weights)
        else:
            self.weights = wsum
