"""What every projected summary shares: the per-draw summary R^2 and the fitted draws."""
from __future__ import annotations

import numpy as np

from ..core.validate import SummaryError

__all__ = ["no_heterogeneity", "RESOLUTION", "offset_centre", "checked_r2", "r2_note", "ProjectedFit", "SummaryPlan",
           "project", "weighted_map", "ChunkedDesign", "FLOAT64_MAP_BYTES", "CHUNK_UNITS"]


#: Relative resolution below which a draw's spread across units is rounding, not heterogeneity:
#: 64 float64 epsilons (about 1.4e-14) of the draw's typical value.
RESOLUTION = 64 * np.finfo(np.float64).eps


def no_heterogeneity(sst, wsum, centre) -> np.ndarray:
    """Which draws have no heterogeneity: a spread across units at float64's own rounding level.

    ``sst`` is the centred total sum of squares of each draw, ``wsum`` its total weight and
    ``centre`` its centring constant (a typical value). The test compares the draw's spread
    ``sqrt(SST / W)`` with the resolution of the numbers themselves, ``RESOLUTION * |centre|``:
    the only digits that cannot carry information are those float64 rounds away. So it is
    scale-free (multiplying every effect by 1e-12 or 1e12 changes no verdict) and a large common
    offset hides only a spread below about 1e-14 of it (1e12 + a spread of 4 is heterogeneous;
    the old rule, a spread below 1e-10 of the centre, called it constant). A spread of exactly
    zero is none.
    """
    sst = np.asarray(sst, dtype=np.float64)
    wsum = np.asarray(wsum, dtype=np.float64)
    scale = RESOLUTION * np.abs(np.asarray(centre, dtype=np.float64))
    with np.errstate(over="ignore", invalid="ignore"):
        return ~(sst > wsum * scale * scale)


def offset_centre(draws):
    """Per-draw centring constants when the draws carry a large common offset, else None.

    With ``c_s`` the scan's typical value of draw ``s`` and ``Q_s`` its centred sum of squares,
    a pass that sums ``w T`` directly keeps about ``log10(Q_s / (c_s^2 W_s)) + 16`` digits of the
    spread; when that falls below 13 digits (``c_s^2 W_s > 1e3 Q_s``) the projection passes sum
    ``w (T - c_s)`` instead (docs/method.md section 3, numerics), so effects of 1e9 plus a spread of
    1e-3 give the summary R^2 of the spread itself. Ordinary draws skip the extra subtraction.
    """
    scan = draws.scan
    c = np.asarray(scan.centre, dtype=np.float64)
    q = np.asarray(scan.centred_squares, dtype=np.float64)
    W = np.asarray(scan.weight_sums, dtype=np.float64)
    with np.errstate(over="ignore", invalid="ignore"):
        heavy = c * c * W > 1e3 * np.maximum(q, 0.0)
    return c if bool(np.any(heavy & (c != 0))) else None


def checked_r2(r2: np.ndarray) -> np.ndarray:
    """Return ``r2``; raise when no draw has heterogeneity (NaN marks single draws without any)."""
    if np.isnan(r2).all():
        raise SummaryError(
            "Summary R^2 is undefined: every posterior draw has the same effect for all units "
            "(no heterogeneity to explain), so there is nothing for a summary to capture."
        )
    return r2


def r2_note(r2: np.ndarray) -> str:
    """How many draws had no heterogeneity (their R^2 is NaN), or ""."""
    k = int(np.isnan(r2).sum())
    return "" if k == 0 else f"{k} of {r2.size} draws have no heterogeneity; their summary R^2 is undefined (NaN)."


class ProjectedFit:
    """Mixin for summaries stored as coefficient draws on a fixed design.

    Parameters
    ----------
    coef : ndarray, shape (n_draws, p)
        Projected coefficients per draw (``coef_draws``).
    r2 : ndarray, shape (n_draws,)
        Summary R^2 per draw, NaN where a draw has no heterogeneity.
    design : ndarray or sparse matrix, shape (n_kept, p)
        The fixed design over the units that take part.
    keep : ndarray of bool, shape (n_units,)
        Which units take part (positive posterior-mean weight).
    """

    def __init__(self, coef, r2, design, keep):
        self.coef_draws = coef
        self._r2 = r2
        self._design = design
        self._keep = keep

    @property
    def design_matrix(self):
        """The fixed design over the units that take part, shape (n_kept, p) (dense or sparse; do not modify)."""
        return self._design

    @property
    def kept_units(self) -> np.ndarray:
        """Which units take part in the summary (positive posterior-mean weight), shape (n_units,)."""
        return self._keep

    @property
    def fit_r2(self) -> np.ndarray:
        """Summary R^2 per draw, shape (n_draws,) (docs/method.md section 3, with the pseudo-values).

        NaN for draws with no heterogeneity (``fit_r2_note`` says how many); raises
        :class:`SummaryError` when no draw has any.
        """
        return checked_r2(self._r2)

    @property
    def fit_r2_note(self) -> str:
        """How many draws had no heterogeneity (their R^2 is undefined), or ""."""
        return r2_note(self._r2)

    def fitted_values(self, rows=None) -> np.ndarray:
        """Projected draws ``B gamma_s``, shape (n_rows, n_units); NaN for units with zero weight.

        Parameters
        ----------
        rows : None, int, slice or array of int
            Which draws (default: all; mind the memory, n_draws x n_units).
        """
        coef = self.coef_draws if rows is None else np.atleast_2d(self.coef_draws[rows])
        out = np.full((coef.shape[0], self._keep.size), np.nan)
        out[:, self._keep] = (self._design @ coef.T).T
        return out


class SummaryPlan:
    """A summary's structure, fitted on the posterior mean, waiting for its pass over the draws.

    The "fit structure" step (``plan_tree``, ``plan_linear``, ``plan_additive``, ``plan_groups``)
    reads only the validation scan's results (posterior mean, weights) and the covariates; the
    "project" step is one pass running :attr:`reducers` (shared with other plans by
    :func:`project`), after which :meth:`finish` builds the result from the reducers' outputs.

    Parameters
    ----------
    reducers : list
        The reducers the projection needs (see :mod:`summarize_widgets.core.passes`).
    finish : callable() -> summary result
        Builds the result once the pass has run.
    name : str
        What is projected ("tree", "linear", "additive", "groups"), for progress and errors.
    """

    def __init__(self, reducers, finish, name: str = ""):
        self.reducers = list(reducers)
        self._finish = finish
        self.name = name

    def finish(self):
        """The summary result (call once, after the pass)."""
        return self._finish()


def project(draws, plans, *, progress=None) -> list:
    """Run the projections of every plan in ONE pass over ``draws``; return their results in order.

    Parameters
    ----------
    draws : EffectDraws
    plans : sequence of SummaryPlan
    progress : callable(done, total), optional
    """
    from ..core.passes import run_pass

    plans = list(plans)
    reducers = [r for p in plans for r in p.reducers]
    if reducers:
        run_pass(draws, reducers, progress=progress)
    return [p.finish() for p in plans]


#: A projection map ``H`` (n_units x p) larger than this in float64 is kept in float32
#: (DEVELOPERS.md "Memory": each product then sums at most 2^16 float32 terms, added in float64).
FLOAT64_MAP_BYTES = 256 * 2**20
#: Units per piece when a design is built, factorized and mapped piecewise.
CHUNK_UNITS = 2**18
#: Rows per piece of the tall-skinny QR in :func:`weighted_map`. Smaller pieces stay in cache (0.6 s
#: per 2^18 x 49 rows in pieces of 4,096 on one BLAS thread against 1.7 s whole), but with
#: OpenBLAS's own threads small pieces are slower, and its thread count is not ours to change
#: (changed from one thread while another runs BLAS, a notebook's kernel hung).
QR_ROWS = 2**18


def _dense(mat) -> np.ndarray:
    return mat.toarray() if hasattr(mat, "toarray") else np.asarray(mat, dtype=np.float64)


def weighted_map(design_rows, sw: np.ndarray, p: int):
    """The thin QR ``sqrt(W) B = Q R`` of a design built piece by piece, as ``R`` and ``H = Q / sqrt(W)``.

    Parameters
    ----------
    design_rows : callable(a, b) -> (b - a, p) dense or sparse
        Rows ``a:b`` of the design ``B`` (built on demand, so the whole design need not exist).
    sw : ndarray, shape (n,)
        Square roots of the (positive) fit weights.
    p : int

    Returns
    -------
    R : ndarray (p, p)
    H : ndarray (n, p)
        float32 when it would exceed :data:`FLOAT64_MAP_BYTES` in float64. ``Q = sqrt(W) H``,
        so ``z_s = Q' sqrt(W) Y_s = H' (w_s T_s)``.

    Notes
    -----
    A two-level tall-skinny QR (Demmel et al. 2012, "Communication-optimal parallel and
    sequential QR"): ``sqrt(W_k) B_k = Q_k R_k`` per piece, then ``[R_1; ...; R_K] = Q_s R``,
    and ``Q`` restricted to piece k is ``Q_k Q_s[k]``. It is a QR of the whole matrix (no
    normal equations, no inverse of ``R``, so designs with exactly collinear columns, such
    as spline bases beside an intercept, stay as stable as with one QR).
    """
    n = sw.size
    H = np.empty((n, p), dtype=np.float32 if n * p * 8 > FLOAT64_MAP_BYTES else np.float64)
    triangles, spans = [], []
    # Factorized in pieces of at most QR_ROWS rows (each piece's Q is mapped by its block of Qs).
    for a0 in range(0, n, CHUNK_UNITS):
        b0 = min(a0 + CHUNK_UNITS, n)
        A = np.array(_dense(design_rows(a0, b0)), dtype=np.float64)  # own copy: weighted in place
        A *= sw[a0:b0, None]
        for a in range(a0, b0, QR_ROWS):
            b = min(a + QR_ROWS, b0)
            Qk, Rk = np.linalg.qr(A[a - a0:b - a0])
            H[a:b, :Qk.shape[1]] = Qk / sw[a:b, None]  # fewer columns when the piece has fewer rows than p
            triangles.append(Rk)
            spans.append((a, b))
        del A
    Qs, R = np.linalg.qr(np.vstack(triangles))
    row = 0
    for (a, b), Rk in zip(spans, triangles):
        k = Rk.shape[0]
        H[a:b] = H[a:b, :k].astype(np.float64) @ Qs[row:row + k]
        row += k
    return R, H


class ChunkedDesign:
    """A design matrix built piece by piece on demand (``design @ M`` works, nothing else is stored).

    Parameters
    ----------
    design_rows : callable(a, b) -> (b - a, p) dense or sparse
    n_rows, p : int
    """

    def __init__(self, design_rows, n_rows: int, p: int):
        self._rows = design_rows
        self.shape = (int(n_rows), int(p))

    def __matmul__(self, M):
        M = np.asarray(M)
        out = np.empty((self.shape[0],) + M.shape[1:])
        for a in range(0, self.shape[0], CHUNK_UNITS):
            b = min(a + CHUNK_UNITS, self.shape[0])
            out[a:b] = self._rows(a, b) @ M
        release = getattr(self._rows, "release", None)
        if release is not None:  # whatever the rows were built from is dropped again
            release()
        return out
