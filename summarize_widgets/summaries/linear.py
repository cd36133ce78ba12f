"""Linear summary: the best linear approximation of every posterior draw.

Both the linear and the additive summary project each draw onto a FIXED design
``B`` with FIXED unit weights ``wbar_i`` (the posterior-mean weight of each unit,
:attr:`EffectDraws.mean_weights`). Per draw ``s`` the projected coefficients are

    gamma_s = (B' Wbar B + P)^{-1} B' (w_s * T_s),

the weighted (penalized) least-squares fit of the pseudo-values
``Y_si = w_si T_si / wbar_i`` with weights ``wbar_i`` (docs/method.md sections 2 and 4;
``P = 0`` here, a spline penalty in :mod:`summarize_widgets.additive`). With fixed
per-unit weights ``Y = T`` and this is the plain weighted projection. With per-draw
weights (including complier-weighted draws from :meth:`EffectDraws.from_itt`,
where ``w_s * T_s`` is the outcome ITT and ``w_s`` the uptake ITT) the per-draw
weights enter through the numerator only: the fit's weights stay ``wbar``, and no
unit-level division ``ITT_y / pi`` is ever made. Units with ``wbar_i = 0`` take no
part. The machinery here (:class:`FrozenProjection`) is shared by both summaries.
"""
from __future__ import annotations

import numpy as np
import pandas as pd
from scipy.linalg import solve_triangular

from ..core.design import MAX_LEVELS, classify_columns, linear_design
from ..core.passes import BlockReducer, LinearMap, run_pass
from . import projection
from .projection import ProjectedFit, SummaryPlan, no_heterogeneity, offset_centre, project, weighted_map
from ..core.validate import SummaryError, check_columns, check_levels
from ..core.draws import EffectDraws
from ..core.stats import MC_COLUMNS, STAT_COLUMNS
from .base import SummaryResult

__all__ = ["summarize_linear", "plan_linear", "LinearSummary", "FrozenProjection", "LINEAR_COLUMNS", "STANDARD_COLUMNS"]

#: The standardized scale of every coefficient (docs/method.md section 4): ``per_sd`` is the
#: standard deviation of a numeric covariate (weighted as in the fit; NaN for the intercept and
#: for category and missing-indicator terms, which stay per switch); ``std_*`` summarize the
#: coefficient per that SD, and for the intercept the effect at the covariates' means and
#: reference categories.
STANDARD_COLUMNS = ("per_sd", "std_mean", "std_sd", "std_lower", "std_upper", "std_prob_positive",
                    "std_mcse_mean", "std_mcse_lower", "std_mcse_upper")
#: Columns of the linear summary's table, in order.
LINEAR_COLUMNS = ("term", *STAT_COLUMNS, *MC_COLUMNS, *STANDARD_COLUMNS)


class _PseudoSquares(BlockReducer):
    """Reducer: per draw ``sum_i wbar_i (Y_si - c_s)^2 = sum_i (wt_si - c_s wbar_i)^2 / wbar_i``.

    Needed only with per-draw weights (with fixed weights this is ``draws.scan.centred_squares``).
    Centring by ``c_s`` happens before squaring, in float64, to avoid cancellation.
    """

    def __init__(self, wbar: np.ndarray, keep: np.ndarray, centre: np.ndarray):
        self._idx = None if keep.all() else np.flatnonzero(keep)
        self._w = wbar[keep]
        self._inv_w = 1.0 / self._w
        self._centre = centre

    def start(self, n_draws: int) -> None:
        self.out = np.zeros(n_draws)

    def partial(self, block):
        wt = block.wt if self._idx is None else block.wt[:, self._idx]
        wt = np.asarray(wt, dtype=np.float64)
        r = wt - self._centre[block.rows, None] * self._w
        return np.einsum("ij,ij->i", r * self._inv_w, r)

    def store(self, rows, part) -> None:
        self.out[rows] = part


def _rank_check(R: np.ndarray, terms: list[str]) -> None:
    """Raise naming the terms when the weighted design ``QR`` has dependent columns."""
    norms = np.linalg.norm(R, axis=0)
    zero = [t for t, v in zip(terms, norms) if v == 0]
    if zero:
        raise SummaryError(
            f"The linear design is rank-deficient: term(s) {', '.join(repr(t) for t in zero)} are zero for every "
            "unit with positive weight (no such units). Drop the column(s) from `columns`."
        )
    # Scale columns to unit length first so a covariate's units do not count as collinearity.
    _, sv, vt = np.linalg.svd(R / norms)
    tol = sv.max() * max(R.shape) * np.finfo(float).eps * 100
    if sv.min() > tol:
        return
    null = vt[sv <= tol]
    involved = np.abs(null).max(axis=0) > 1e-6
    names = [t for t, k in zip(terms, involved) if k]
    raise SummaryError(
        "The linear design is rank-deficient: the terms "
        f"{', '.join(repr(t) for t in names)} are linearly dependent among the units with positive weight "
        "(for example two identical columns, or a column constant among those units). "
        "Drop one of the covariates involved from `columns`."
    )


class FrozenProjection:
    """Weighted (penalized) least squares onto a fixed design, for every draw in one pass.

    Parameters
    ----------
    draws : EffectDraws
    design : ndarray, shape (n_kept, p)
        The design ``B`` restricted to the units with ``wbar > 0`` (``keep``); must contain
        a column of ones (``intercept``).
    keep : ndarray of bool, shape (n_units,)
    penalty : None or ndarray, shape (p, p)
        Penalty ``P`` (None: ordinary weighted least squares, rank checked).
    intercept : int
        Index of the column of ones.
    terms : list of str
        Column names, for the rank-deficiency message.
    qr : tuple (Q, R), optional
        The thin QR of ``sqrt(wbar) B`` when the caller already has it.
    map_ : tuple (R, H), optional
        Instead of ``qr``: ``R`` and ``H = B R^{-1}`` (n_kept, p) from
        :func:`~summarize_widgets.summaries.projection.weighted_map` (millions of units:
        no ``Q`` is ever formed, ``H`` may be float32).

    Notes
    -----
    With ``sqrt(Wbar) B = Q R`` (thin QR), a pass computes ``z_s = Q' sqrt(Wbar) Y_s`` for every
    draw as ``wt_s @ H`` with ``H = Wbar^{-1/2} Q`` (one :class:`LinearMap`; the draws are
    never copied and no draw is refitted). Then ``gamma_s = A z_s`` with ``A = R^{-1}``, or,
    penalized, ``A = (R'R + P)^{-1} R'`` computed as pygam does (SVD of ``[R; E]``,
    ``E'E = P``). This equals ``(B'WbarB + P)^{-1} B' wt_s`` while working with an
    orthonormal basis, so nothing squares the condition number of ``B``. The same ``z_s``
    gives the residual sum of squares exactly: with centred pseudo-values
    ``Y^c = Y - c_s`` and ``d_s = gamma_s - c_s e_intercept`` (so ``B d_s = B gamma_s - c_s``),
    ``SSE_s = Q'_s - |z^c_s|^2 + |z^c_s - R d_s|^2`` and ``SST_s = Q'_s - (q1' z^c_s)^2 / W``,
    where ``q1 = Q' sqrt(wbar)`` and ``Q'_s = sum_i wbar_i (Y_si - c_s)^2``.
    """

    def __init__(self, draws, design: np.ndarray, keep: np.ndarray, *, penalty=None, intercept: int = 0, terms=None,
                 qr=None, map_=None):
        if map_ is not None:
            n_kept, p = map_[1].shape
        else:
            n_kept, p = design.shape if design is not None else qr[0].shape
        if n_kept <= p:
            raise SummaryError(
                f"The summary has {p} coefficients but only {n_kept} units with positive weight; "
                "it needs more units than coefficients (use fewer covariates or fewer splines)."
            )
        wbar = draws.mean_weights
        w = wbar[keep]
        sw = np.sqrt(w)
        Q = None
        if map_ is not None:
            R, Hk = map_
        elif qr is not None:
            Q, R = qr
        elif n_kept > projection.CHUNK_UNITS:  # millions of units: factorize piecewise (weighted_map)
            R, Hk = weighted_map(lambda a, b: design[a:b], sw, p)
        else:
            Q, R = np.linalg.qr(sw[:, None] * design)
        if penalty is None:
            _rank_check(R, list(terms) if terms is not None else [str(k) for k in range(p)])
            self.coef_map = solve_triangular(R, np.eye(p))
        else:
            E = np.linalg.cholesky(np.asarray(penalty, dtype=np.float64)).T  # E'E = P
            U, d, Vt = np.linalg.svd(np.vstack([R, E]), full_matrices=False)
            self.coef_map = (Vt.T / d) @ U[:p].T
        self.R = R
        self.wsum = float(w.sum())
        self.keep = keep
        self.intercept = int(intercept)
        if Q is not None:
            self.q1 = Q.T @ sw
            H = np.zeros((draws.n_units, p))
            H[keep] = Q / sw[:, None]
        else:
            # q1 = Q' sqrt(w) = H' w, summed in float64 piece by piece (H may be float32)
            self.q1 = sum(Hk[a:a + projection.CHUNK_UNITS].T.astype(np.float64) @ w[a:a + projection.CHUNK_UNITS]
                          for a in range(0, n_kept, projection.CHUNK_UNITS))
            if keep.all():
                H = Hk
            else:
                H = np.zeros((draws.n_units, p), dtype=Hk.dtype)
                H[keep] = Hk
        self.H = H

    def run(self, draws, progress=None):
        """One pass: coefficients (n_draws, p), raw R^2 (n_draws,) with NaN where undefined."""
        run_pass(draws, self.reducers(draws), progress=progress)
        return self.finish(draws)

    def reducers(self, draws) -> list:
        """The reducers of the projection pass (to share one pass with other summaries)."""
        self._lmap = LinearMap(self.H, centre=offset_centre(draws))
        self._squares = None
        if draws.has_draw_weights:
            self._squares = _PseudoSquares(draws.mean_weights, self.keep, draws.scan.centre)
        return [self._lmap] + ([self._squares] if self._squares is not None else [])

    def finish(self, draws):
        """Coefficients (n_draws, p) and raw R^2 (n_draws,) once the pass of :meth:`reducers` has run."""
        lmap, squares = self._lmap, self._squares
        self._lmap = self._squares = None
        self.H = None  # the n x p map is not needed after the pass
        z = lmap.out
        q = squares.out if squares is not None else draws.scan.centred_squares
        c = draws.scan.centre
        if lmap.centre is None:
            coef = z @ self.coef_map.T
            zc = z - c[:, None] * self.q1
            dc = coef.copy()
            dc[:, self.intercept] -= c
        else:
            # The pass summed centred draws (a large common offset): z is already z^c. Each draw's
            # summary is the summary of T - c_s plus c_s on the intercept, so an offset is carried
            # exactly, not shrunk by a penalty's ridge on the constant direction.
            zc = z
            dc = zc @ self.coef_map.T
            coef = dc.copy()
            coef[:, self.intercept] += c
        resid = zc - dc @ self.R.T
        sse = q - np.einsum("ij,ij->i", zc, zc) + np.einsum("ij,ij->i", resid, resid)
        sst = q - (zc @ self.q1) ** 2 / self.wsum
        none = no_heterogeneity(sst, self.wsum, c)  # the same scale-free rule as the tree summary
        with np.errstate(divide="ignore", invalid="ignore"):
            r2 = np.where(none, np.nan, 1.0 - np.clip(sse, 0.0, None) / np.where(none, 1.0, sst))
        # Excursions beyond [0, 1] are rounding only (SSE <= SST for a fit with an intercept).
        return coef, np.clip(r2, 0.0, 1.0)


def check_draws(draws):
    """Raise unless ``draws`` is an EffectDraws; return the mask of units with positive mean weight."""
    if not isinstance(draws, EffectDraws):
        raise SummaryError(f"`draws` must be an EffectDraws (see summarize_widgets.EffectDraws); got {type(draws).__name__}.")
    keep = draws.mean_weights > 0
    return keep


class LinearSummary(SummaryResult, ProjectedFit):
    """Posterior of the best linear approximation ``B gamma`` of the effect, ``B = [1, X]``.

    Build it with :func:`summarize_linear`. The coefficients' posterior is the posterior
    of the best linear approximation over this sample, not of a "true" linear model
    (docs/method.md section 4).

    Attributes
    ----------
    terms : list of str
        Coefficient names, ``"(intercept)"`` first; dummies read ``"fuel = oil"``, missing
        indicators ``"age: missing"``.
    coef_draws : ndarray, shape (n_draws, n_terms)
    reference : dict
        Reference (omitted) category of each categorical covariate.
    centre, spread : dict
        Weighted mean and standard deviation (divisor the summed weight) of each numeric
        covariate's design column among the units used, with the fit's weights ``wbar``:
        the standardized scale (coefficient x SD; intercept at the means).
    fill : dict
        Value put in place of missing values of each numeric covariate.
    label : str
    settings : dict
    """

    summary_type = "linear"

    def __init__(self, draws, coef, r2, terms, specs, fill, design, keep, settings, scales=None):
        SummaryResult.__init__(self, draws, settings)
        ProjectedFit.__init__(self, coef, r2, design, keep)
        self.terms = list(terms)
        self.columns = [s.name for s in specs]
        self.reference = {s.name: s.categories[0] for s in specs if s.kind == "categorical"}
        self.fill = {k: v for k, v in fill.items() if any(s.name == k and s.n_missing for s in specs)}
        if scales is None:
            scales = _term_scales(design, terms, specs, np.asarray(draws.mean_weights)[keep])
        self.centre, self.spread = scales

    def standardized_draws(self) -> np.ndarray:
        """Coefficient draws on the standardized scale, shape (n_draws, n_terms).

        A numeric covariate's coefficient times its SD (:attr:`spread`); category and
        missing-indicator terms unchanged (per switch from the reference); the intercept
        replaced by the fitted effect at the numeric covariates' means (:attr:`centre`) with
        every category at its reference and no value missing: ``gamma_0 + sum_j gamma_j mean_j``.
        This is the same fit as the projection onto standardized columns ``(x - mean) / SD``.
        """
        coef = np.asarray(self.coef_draws, dtype=np.float64)
        out = coef.copy()
        for j, term in enumerate(self.terms):
            if term in self.spread:
                out[:, j] = coef[:, j] * self.spread[term]
                out[:, 0] += coef[:, j] * self.centre[term]
        return out

    def table(self, level: float = 0.95, interval: str = "equal-tailed") -> pd.DataFrame:
        """One row per coefficient.

        Columns (:data:`LINEAR_COLUMNS`): ``term``, then the statistics core's ``mean``, ``sd``,
        ``lower``, ``upper`` (credible interval at ``level``), ``prob_positive`` (share of draws
        above 0) and Monte Carlo error columns. ``df.attrs`` holds ``level``, ``interval``,
        ``label``, ``reference`` (reference categories) and ``summary``.
        """
        cols = self.statistics(self.terms, self.coef_draws, level=level, interval=interval)
        out = pd.DataFrame({"term": self.terms, **cols})
        std_keys = [f"{t} [standardized]" for t in self.terms]
        std = self.statistics(std_keys, self.standardized_draws(), level=level, interval=interval)
        out["per_sd"] = [self.spread.get(t, np.nan) for t in self.terms]
        for c in STANDARD_COLUMNS[1:]:
            out[c] = std[c[len("std_"):]]
        out.attrs.update({"level": float(level), "interval": interval, "label": self.label, "unit": self.draws.unit,
                          "better": self.draws.better, "reference": dict(self.reference), "summary": "linear",
                          "standardized": "sd"})
        return out

    def apply_to(self, draws, *, progress=None) -> "LinearSummary":
        """The same linear terms (design frozen) projected from other draws of the same units.

        ``draws`` (EffectDraws) must describe the same units: same covariate index, in the same
        order, with the same values in this summary's columns. The design (terms, reference
        categories, fill values of missing numerics) depends on the covariates only, so it is
        the same design; applied to the draws summarized, this reproduces the summary exactly.
        """
        from .compare import check_same_units

        check_draws(draws)
        check_same_units(self.draws, draws, self.columns)
        out = summarize_linear(draws, columns=self.columns, max_levels=self.settings["max_levels"],
                               pool_levels=self.settings["pool_levels"], progress=progress)
        out.settings["structure_from"] = self.settings.get("structure_from", self.label)
        return out

    def __repr__(self) -> str:
        return f"LinearSummary('{self.label}': {len(self.terms)} terms, {self.coef_draws.shape[0]} draws)"


def summarize_linear(draws, *, columns=None, max_levels: int = MAX_LEVELS, pool_levels: int | None = None,
                     progress=None) -> LinearSummary:
    """Project every draw onto a linear model in the covariates.

    Parameters
    ----------
    draws : EffectDraws
    columns : list of str, optional
        Covariates (default: all). Numeric columns enter as they are (missing values:
        filled with the column mean plus a missing indicator); categorical columns are
        dummy-coded against their first category.
    max_levels : int, default 50
        A categorical column with more levels is refused (one coefficient per level), with a
        message naming it and its count, unless ``pool_levels`` is given.
    pool_levels : int, optional
        Keep the ``pool_levels`` most common levels of every column with more than ``max_levels``
        and pool the rest into one category ``"(other)"``.
    progress : callable(done, total), optional
        Called after each block of the single pass over the draws.

    Returns
    -------
    LinearSummary

    Notes
    -----
    Weighted least squares with the fixed weights ``wbar_i`` (posterior-mean weight per
    unit) of the pseudo-values ``Y_si = w_si T_si / wbar_i``; see the module docstring for
    what per-draw and complier weights do. With per-draw weights the weighted mean of the
    fitted values is ``sum_i w_si T_si / sum_i wbar_i``, whose denominator is fixed at its
    posterior mean (not the per-draw ratio of :attr:`EffectDraws.overall`).
    """
    plan = plan_linear(draws, columns=columns, max_levels=max_levels, pool_levels=pool_levels)
    return project(draws, [plan], progress=progress)[0]


def _term_scales(design, terms, specs, w) -> tuple[dict, dict]:
    """Weighted mean and SD (divisor the summed weight) of each numeric covariate's design column."""
    numeric = {s.name for s in specs if s.kind == "numeric"}
    w = np.asarray(w, dtype=np.float64)
    centre, spread = {}, {}
    for j, term in enumerate(terms):
        if term in numeric:
            x = np.asarray(design[:, j], dtype=np.float64)
            m = float(np.dot(w, x) / w.sum())
            centre[term] = m
            spread[term] = float(np.sqrt(np.dot(w, (x - m) ** 2) / w.sum()))
    return centre, spread


class _DesignRows:
    """Rows ``a:b`` (among the units used) of the linear design, rebuilt from the covariates."""

    def __init__(self, covariates, specs, fill, keep):
        self.covariates, self.specs, self.fill = covariates, specs, dict(fill)
        self.index = np.flatnonzero(keep)

    def __call__(self, a, b):
        return linear_design(self.covariates.iloc[self.index[a:b]], self.specs, fill=self.fill)[0]


def plan_linear(draws, *, columns=None, max_levels: int = MAX_LEVELS, pool_levels: int | None = None) -> SummaryPlan:
    """The fit-structure step of :func:`summarize_linear` (design, its QR; no pass over the draws)."""
    keep = check_draws(draws)
    cols = check_columns(columns, list(draws.covariates.columns))
    max_levels, pool_levels = check_levels(max_levels, pool_levels)
    specs = classify_columns(draws.covariates, cols, max_levels=max_levels, pool_levels=pool_levels, summary="linear")
    B, terms, fill = linear_design(draws.covariates, specs)
    Bk = B if keep.all() else B[keep]
    del B
    proj = FrozenProjection(draws, Bk, keep, intercept=0, terms=terms)
    scales = _term_scales(Bk, terms, specs, draws.mean_weights[keep])
    if Bk.nbytes > projection.FLOAT64_MAP_BYTES:
        # kept for fitted_values only: rebuilt from the covariates piece by piece when asked, not
        # held beside the projection map (352 MB in float32 at 8,000,000 units and 11 terms)
        Bk = projection.ChunkedDesign(_DesignRows(draws.covariates, specs, fill, keep), *Bk.shape)
    settings = {
        "columns": cols,
        "max_levels": max_levels,
        "pool_levels": pool_levels,
        "terms": list(terms),
        "n_draws": draws.n_draws,
        "n_units": draws.n_units,
        "n_units_used": int(keep.sum()),
        "weights": "posterior-mean weight per unit (per-draw weights enter the numerator only)"
        if draws.has_draw_weights else draws.weights_description,
        "complier_weighted": draws.is_complier_weighted,
        "structure_from": draws.label,
    }

    def finish():
        coef, r2 = proj.finish(draws)
        return LinearSummary(draws, coef, r2, terms, specs, fill, Bk, keep, settings, scales=scales)

    return SummaryPlan(proj.reducers(draws), finish, "linear")
