"""Additive summary: smooth trends in each covariate, with posterior bands.

A penalized additive model (pygam's ``LinearGAM``) is fitted once to the weighted
posterior mean, its smoothing chosen by pygam's grid search (GCV, its default
criterion for a Gaussian model of unknown scale) unless given. Its model matrix
and penalty are then frozen and the linear smoother is applied to every draw in
one pass (docs/method.md sections 2 and 4): with the smoothing fixed this is exactly
what refitting the same model to each draw would give. Weights: see
:mod:`summarize_widgets.linear` (fixed weights ``wbar_i``, pseudo-values
``Y_si = w_si T_si / wbar_i``; per-draw weights enter the numerator only).
"""
from __future__ import annotations

import functools
import operator
import warnings
from numbers import Real

import numpy as np
import pandas as pd

from ..core.quiet import quiet_stdout
from ..core.design import MAX_LEVELS, ColumnSpec, category_codes, classify_columns, numeric_values
from ..core.validate import SummaryError, check_columns, check_int, check_levels
from ..core.intervals import simultaneous_band
from ..core.stats import MC_COLUMNS, STAT_COLUMNS
from .base import SummaryResult
from .pygam_bridge import PYGAM_RIDGE as _PYGAM_RIDGE
from .pygam_bridge import model_matrix, penalty_matrix
from . import projection
from .projection import ChunkedDesign, ProjectedFit, SummaryPlan, project, weighted_map
from .linear import FrozenProjection, check_draws

__all__ = ["summarize_additive", "plan_additive", "COMPILE_UNITS", "AdditiveSummary", "CURVE_COLUMNS", "MISSING_COLUMNS"]

#: Columns of the additive summary's curves table, in order.
CURVE_COLUMNS = ("covariate", "covariate_type", "x", *STAT_COLUMNS, "lower_joint", "upper_joint", *MC_COLUMNS)
#: Columns of the table of effects at a missing value.
MISSING_COLUMNS = ("covariate", *STAT_COLUMNS, *MC_COLUMNS)



def _check_lam(lam, columns):
    """None, one positive number for every term, or a dict covariate -> positive number."""
    def positive(v, name):
        if isinstance(v, bool) or not isinstance(v, Real) or not np.isfinite(v) or v <= 0:
            raise SummaryError(f"`{name}` must be a positive finite number; got {v!r}.")
        return float(v)

    if lam is None:
        return None
    if isinstance(lam, dict):
        unknown = [k for k in lam if k not in columns]
        if unknown:
            raise SummaryError(f"`lam` names covariates that are not summarized: {unknown}. Summarized: {columns}.")
        absent = [c for c in columns if c not in lam]
        if absent:
            raise SummaryError(f"`lam` as a dict must give a value for every covariate; missing: {absent}.")
        return {c: positive(lam[c], f"lam[{c!r}]") for c in columns}
    v = positive(lam, "lam")
    return {c: v for c in columns}


def _features(covariates: pd.DataFrame, specs: list[ColumnSpec], keep: np.ndarray):
    """pygam's input matrix for the kept units, and how each covariate is encoded.

    Numeric: filled values (missing -> the observed mean, plus a 0/1 indicator column);
    categorical: consecutive codes over the categories present among the kept units.
    """
    cols, info, indicators = [], [], []
    for spec in specs:
        s = covariates[spec.name][keep]
        if spec.kind == "numeric":
            x = numeric_values(s)
            miss = np.isnan(x)
            obs = x[~miss]
            if np.unique(obs).size < 2:
                raise SummaryError(
                    f"Covariate {spec.name!r} has fewer than two distinct observed values among the units with "
                    "positive weight; a smooth trend needs at least two. Drop it from `columns`."
                )
            fill = float(obs.mean())
            cols.append(np.where(miss, fill, x))
            ind = None
            if miss.any():
                ind = len(indicators)
                indicators.append(miss.astype(np.float64))
            info.append({"spec": spec, "fill": fill if miss.any() else None, "indicator": ind, "observed": obs})
        else:
            codes = category_codes(s, spec)
            present = np.unique(codes)
            if present.size < 2:
                raise SummaryError(
                    f"Covariate {spec.name!r} has a single category among the units with positive weight; "
                    "it cannot describe any difference. Drop it from `columns`."
                )
            remap = np.full(len(spec.categories), -1)
            remap[present] = np.arange(present.size)
            cols.append(remap[codes].astype(np.float64))
            info.append({"spec": spec, "labels": [spec.categories[k] for k in present]})
    n_cov = len(cols)
    for item in info:
        if item.get("indicator") is not None:
            item["indicator"] = n_cov + item["indicator"]
    return np.column_stack(cols + indicators), info


def _grid(obs: np.ndarray, grid_size: int) -> np.ndarray:
    """``grid_size`` points from the 1st to the 99th percentile, or the unique values if fewer."""
    uniq = np.unique(obs)
    if uniq.size <= grid_size:
        return uniq
    lo, hi = np.percentile(obs, [1, 99])
    if hi <= lo:  # heavy ties at one value: fall back to the full observed range
        lo, hi = uniq[0], uniq[-1]
    return np.linspace(lo, hi, grid_size)


class AdditiveSummary(SummaryResult, ProjectedFit):
    """Posterior of an additive summary ``f_0 + sum_j f_j(x_j)`` of the effect.

    Build it with :func:`summarize_additive`.

    Attributes
    ----------
    columns : list of str
    covariate_types : dict
        Covariate -> "numeric" or "categorical".
    grids : dict
        Covariate -> grid values (numeric) or category labels (categorical).
    coef_draws : ndarray, shape (n_draws, n_coefs)
        Projected coefficients, in pygam's term order (intercept last).
    lam : dict
        Covariate -> smoothing parameter used.
    fill : dict
        Numeric covariate with missing values -> the value put in their place.
    label : str
    settings : dict
    """

    summary_type = "additive"

    def __init__(self, draws, coef, r2, info, C, C_missing, design, keep, bbar, lam, settings):
        SummaryResult.__init__(self, draws, settings)
        ProjectedFit.__init__(self, coef, r2, design, keep)
        self.columns = [it["spec"].name for it in info]
        self.covariate_types = {it["spec"].name: it["spec"].kind for it in info}
        self.grids = {k: v[0] for k, v in C.items()}
        self._C = {k: v[1] for k, v in C.items()}
        self._C_missing = C_missing
        self.fill = {it["spec"].name: it["fill"] for it in info if it.get("fill") is not None}
        self._bbar = bbar
        self.lam = lam

    @property
    def kinds(self) -> dict:
        """Deprecated name of :attr:`covariate_types`."""
        import warnings

        warnings.warn("AdditiveSummary.kinds is now AdditiveSummary.covariate_types.", DeprecationWarning, stacklevel=2)
        return dict(self.covariate_types)

    @property
    def overall_draws(self) -> np.ndarray:
        """Per draw, the ``wbar``-weighted mean of the fitted values, shape (n_draws,)."""
        return self.coef_draws @ self._bbar

    def _check_covariate(self, covariate):
        if covariate not in self._C:
            raise SummaryError(f"`covariate` must be one of {self.columns}; got {covariate!r}.")

    def curve_draws(self, covariate: str) -> np.ndarray:
        """Per-draw curve of one covariate on the effect scale, shape (n_draws, n_grid).

        At grid value ``g``: ``overall_s + f_j,s(g) - avg_i f_j,s(x_ij)`` (wbar-weighted average
        over the units; for a numeric covariate with missing values ``f_j`` includes the
        missing-indicator term, so the curve is the effect if every unit had ``x_j = g``
        observed). Columns follow ``grids[covariate]``.
        """
        self._check_covariate(covariate)
        return self.coef_draws @ self._C[covariate].T

    def curves(self, level: float = 0.95, interval: str = "equal-tailed") -> pd.DataFrame:
        """Every covariate's curve with pointwise and simultaneous bands.

        Columns (:data:`CURVE_COLUMNS`): ``covariate``, ``covariate_type`` ("numeric" or
        "categorical"), ``x`` (grid value or category label), the statistics core's ``mean``,
        ``sd``, ``lower``, ``upper`` (pointwise credible interval at ``level``),
        ``prob_positive``, then ``lower_joint``, ``upper_joint`` (simultaneous band over that
        covariate's grid, :func:`~summarize_widgets.core.intervals.simultaneous_band`) and the
        Monte Carlo error columns. ``df.attrs`` holds ``level``, ``interval``, ``label``,
        ``summary``.
        """
        frames = []
        for name in self.columns:
            cd = self.curve_draws(name)
            x = self.grids[name]
            cols = self.statistics([("curve", name, k) for k in range(cd.shape[1])], cd, level=level, interval=interval)
            jlo, jhi = simultaneous_band(cd, level)
            frame = pd.DataFrame({
                "covariate": name,
                "covariate_type": self.covariate_types[name],
                "x": pd.Series(list(x), dtype=object),
                **{k: cols[k] for k in STAT_COLUMNS},
                "lower_joint": jlo,
                "upper_joint": jhi,
                **{k: cols[k] for k in MC_COLUMNS},
            })
            frames.append(frame)
        out = pd.concat(frames, ignore_index=True)
        out.attrs.update({"level": float(level), "interval": interval, "label": self.label, "unit": self.draws.unit,
                          "better": self.draws.better, "summary": "additive"})
        return out

    def missing_effects(self, level: float = 0.95, interval: str = "equal-tailed") -> pd.DataFrame:
        """For numeric covariates with missing values: the effect if every unit's value were missing.

        Same scale as :meth:`curves` (``overall_s + f_j,s(fill) + beta_j,s - avg_i(...)``).
        Columns (:data:`MISSING_COLUMNS`): ``covariate`` and the statistics core's columns;
        empty when no summarized numeric covariate has missing values.
        """
        names = list(self._C_missing)
        if not names:
            return pd.DataFrame(columns=list(MISSING_COLUMNS))
        draws = self.coef_draws @ np.column_stack([self._C_missing[k] for k in names])
        cols = self.statistics([("missing", k) for k in names], draws, level=level, interval=interval)
        return pd.DataFrame({"covariate": names, **cols})

    def apply_to(self, draws, *, progress=None) -> "AdditiveSummary":
        """The same smooth terms (basis, smoothing and grids frozen) projected from other draws.

        ``draws`` (EffectDraws) must describe the same units (same covariate index, order and
        values in this summary's columns) and give positive weight to the same units. The
        smoothing chosen on the first posterior mean is kept (not searched again), so the
        frozen smoother is the same; applied to the draws summarized, this reproduces the
        summary exactly.
        """
        from .compare import check_same_units

        keep = check_draws(draws)
        check_same_units(self.draws, draws, self.columns)
        if not np.array_equal(keep, self.kept_units):
            raise SummaryError(
                f"`draws` gives zero weight to {int((~keep).sum())} units and this summary to {int((~self.kept_units).sum())} "
                "(not the same units); the frozen basis needs the same units with positive weight."
            )
        out = summarize_additive(draws, columns=self.columns, n_splines=self.settings["n_splines"], lam=dict(self.lam),
                                 grid_size=self.settings["grid_size"], max_levels=self.settings["max_levels"],
                                 pool_levels=self.settings["pool_levels"], progress=progress)
        for key in ("lam_source", "criterion"):
            out.settings[key] = self.settings[key]
        out.settings["structure_from"] = self.settings.get("structure_from", self.label)
        return out

    def __repr__(self) -> str:
        return f"AdditiveSummary('{self.label}': {len(self.columns)} covariates, {self.coef_draws.shape[0]} draws)"


def _pygam_model(X, info, n_splines, lam):
    from pygam import LinearGAM, f, l, s

    terms = []
    for j, item in enumerate(info):
        lj = 0.6 if lam is None else lam[item["spec"].name]  # 0.6: pygam's default, replaced by the search
        if item["spec"].kind == "numeric":
            terms.append(s(j, n_splines=n_splines, lam=lj))
        else:
            terms.append(f(j, lam=lj))
    for item in info:
        if item.get("indicator") is not None:
            # Missing-indicator method: an unpenalized shift for units whose value is missing.
            terms.append(l(item["indicator"], penalties=None))
    return LinearGAM(functools.reduce(operator.add, terms))


#: pygam's default smoothing grid and its GCV inflation factor (pygam.GAM.gridsearch and
#: GAM._estimate_GCV_UBRE: GCV = n * deviance / (n - gamma * edof)^2 with gamma = 1.4).
_LAM_GRID = np.logspace(-3, 3, 11)
_GCV_GAMMA = 1.4


def _gcv_search(R, z, yy, P1, n):
    """The grid value minimizing pygam's GCV for a Gaussian additive model with penalty ``lam * P1``.

    With ``sqrt(W) B = Q R`` and ``z = Q' sqrt(W) y``, each candidate needs only p x p work, done as
    pygam's PIRLS does it: ``E'E = lam P1 + ridge``, SVD ``[R; E] = U D V'``, ``U1`` the top p rows of
    ``U``; fitted values ``Q U1 U1' z``, ``edof = |U1|_F^2``, weighted deviance
    ``|sqrt(W) y|^2 - 2 |U1' z|^2 + |U1 U1' z|^2``.
    """
    p = R.shape[0]
    best, best_score = None, np.inf
    for lam in _LAM_GRID:
        E = np.linalg.cholesky(lam * P1 + _PYGAM_RIDGE * np.eye(p)).T
        U, _, _ = np.linalg.svd(np.vstack([R, E]), full_matrices=False)
        U1 = U[:p, :p]
        u = U1.T @ z
        dev = yy - 2.0 * (u @ u) + np.sum((U1 @ u) ** 2)
        edof = float(np.sum(U1 * U1))
        score = n * dev / (n - _GCV_GAMMA * edof) ** 2
        if score < best_score:
            best, best_score = float(lam), score
    return best


def summarize_additive(draws, *, columns=None, n_splines: int = 10, lam=None, grid_size: int = 50,
                       max_levels: int = MAX_LEVELS, pool_levels: int | None = None, progress=None) -> AdditiveSummary:
    """Fit an additive model to the posterior mean and apply its frozen smoother to every draw.

    Parameters
    ----------
    draws : EffectDraws
    columns : list of str, optional
        Covariates (default: all). Numeric ones get a penalized cubic spline ``s()``
        (missing values: filled with the observed mean, plus an unpenalized linear term on a
        missing indicator); categorical ones a factor term ``f()`` (one level per category).
    n_splines : int, default 10
        Basis functions per numeric covariate (4 to 100).
    lam : None, float or dict, optional
        Smoothing. None (default): pygam's ``gridsearch`` over its default grid
        (``logspace(-3, 3, 11)``, one value shared by all terms) minimizing GCV. A number
        applies to every term; a dict gives one per covariate.
    grid_size : int, default 50
        Points per numeric curve, between the 1st and 99th percentile of the observed
        values (all unique values when there are at most ``grid_size``). Categorical
        curves have one point per category.
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
    AdditiveSummary

    Notes
    -----
    Units with zero posterior-mean weight are left out. The frozen smoother uses pygam's
    model matrix and penalty (lam times each term's penalty, plus pygam's
    ``sqrt(eps)`` ridge), so per draw it equals ``LinearGAM(...).fit`` with the same terms
    and lam. pygam casts fit weights to float32; the frozen smoother keeps the float64
    weights (the two agree exactly when the weights are float32 numbers, e.g. no weights).
    """
    plan = plan_additive(draws, columns=columns, n_splines=n_splines, lam=lam, grid_size=grid_size, max_levels=max_levels,
                         pool_levels=pool_levels)
    return project(draws, [plan], progress=progress)[0]


#: Units pygam sees when it compiles the terms on millions of units (knots, categories); the
#: subsample always holds each numeric feature's smallest and largest value and one unit of
#: every category, so the compiled terms are those of all units (see :func:`plan_additive`).
COMPILE_UNITS = 20_000


def _compile_rows(X: np.ndarray, size: int) -> np.ndarray:
    """Rows pygam compiles the terms on: every row when few; else the extremes of each column,
    one row per distinct value of each column with few values, and a seeded uniform sample."""
    n = X.shape[0]
    if n <= size:
        return np.arange(n)
    picked = [np.random.default_rng(0).choice(n, size, replace=False)]
    for j in range(X.shape[1]):
        col = X[:, j]
        picked.append(np.array([np.argmin(col), np.argmax(col)]))
        uniq, first = np.unique(col, return_index=True)
        if uniq.size <= 10_000:  # categorical codes and indicators: one row of each value
            picked.append(first)
    return np.unique(np.concatenate(picked))


class _FeatureRows:
    """Rows ``a:b`` of the frozen model matrix, from features rebuilt on first use (see ChunkedDesign)."""

    def __init__(self, gam, covariates, specs, keep):
        self.gam, self.covariates, self.specs, self.keep = gam, covariates, specs, keep
        self.X = None

    def __call__(self, a, b):
        if self.X is None:
            self.X = _features(self.covariates, self.specs, self.keep)[0]
        return model_matrix(self.gam, self.X[a:b])

    def release(self):
        self.X = None


def plan_additive(draws, *, columns=None, n_splines: int = 10, lam=None, grid_size: int = 50,
                  max_levels: int = MAX_LEVELS, pool_levels: int | None = None) -> SummaryPlan:
    """The fit-structure step of :func:`summarize_additive` (no pass over the draws).

    Compiles pygam's terms, chooses the smoothing by GCV on the posterior mean and freezes
    the smoother; its projection (one pass) gives the :class:`AdditiveSummary`.

    Notes
    -----
    On more than :data:`~summarize_widgets.summaries.projection.CHUNK_UNITS` units the model
    matrix is built, factorized (tall-skinny QR) and mapped piece by piece, never whole, and
    pygam compiles its terms on :data:`COMPILE_UNITS` units (:func:`_compile_rows`: a seeded
    uniform sample plus each feature's extremes and every category, so knots and levels are
    those of all units). The GCV choice of smoothing uses ALL units (it needs only the
    factor ``R`` and ``z``), and so does every projection.
    """
    keep = check_draws(draws)
    cols = check_columns(columns, list(draws.covariates.columns))
    n_splines = check_int(n_splines, "n_splines", low=4, high=100)
    grid_size = check_int(grid_size, "grid_size", low=2, high=10_000)
    lam = _check_lam(lam, cols)
    max_levels, pool_levels = check_levels(max_levels, pool_levels)
    specs = classify_columns(draws.covariates, cols, max_levels=max_levels, pool_levels=pool_levels, summary="additive")
    X, info = _features(draws.covariates, specs, keep)
    wk = draws.mean_weights[keep]
    # The structure (knots, GCV's smoothing choice) is fitted to the standardized posterior mean: GCV's
    # choice does not change under a + b * target (the intercept is unpenalized), and its sums of
    # squares would lose every digit to a large common offset (1e9 + small effects) or underflow
    # on a tiny scale. The draws are projected as they are.
    target = draws.posterior_mean[keep]
    n_kept = target.size
    target = target - np.average(target, weights=wk)
    spread = float(np.sqrt(np.average(target * target, weights=wk)))
    if spread > 0 and np.isfinite(spread):
        target = target / spread

    # The terms are compiled (knots from the data) once; the model matrix and penalties come from pygam.
    gam = _pygam_model(X, info, n_splines, {c: 1.0 for c in cols} if lam is None else lam)
    fit_rows = _compile_rows(X, COMPILE_UNITS)
    # pygam prints "did not converge" and divides by zero on a constant target (no heterogeneity);
    # that case is reported by fit_r2, and the frozen smoother below never relies on pygam's iterations.
    with warnings.catch_warnings(), quiet_stdout():  # this thread only: a cell's prints meanwhile stay
        warnings.simplefilter("ignore", RuntimeWarning)
        gam.fit(X[fit_rows], target[fit_rows], weights=wk[fit_rows])  # compiles the terms, sets pygam's state
    sw = np.sqrt(wk)
    P1 = penalty_matrix(gam)
    p = P1.shape[0]
    if n_kept <= projection.CHUNK_UNITS:
        design = model_matrix(gam, X)
        Q, R = np.linalg.qr(sw[:, None] * design.toarray())
        z_target = Q.T @ (sw * target)
        mapping = {"qr": (Q, R)}
    else:
        # kept for fitted values: rebuilds the features from the covariates when asked (not kept beside them)
        design = ChunkedDesign(_FeatureRows(gam, draws.covariates, specs, keep), n_kept, p)
        bsum = np.zeros(p)

        def design_rows(a, b):  # each piece built once: mapped, and its weighted column sums taken
            B = model_matrix(gam, X[a:b])
            bsum[:] += np.asarray(B.T @ wk[a:b]).ravel()
            return B

        R, Hk = weighted_map(design_rows, sw, p)
        z_target = sum(Hk[a:a + projection.CHUNK_UNITS].T.astype(np.float64) @ (wk * target)[a:a + projection.CHUNK_UNITS]
                       for a in range(0, n_kept, projection.CHUNK_UNITS))
        mapping = {"map_": (R, Hk)}
    if lam is None:
        # pygam's gridsearch criterion, computed from one QR instead of one pygam fit per candidate.
        best = _gcv_search(R, z_target, float(wk @ (target * target)), P1, n_kept)
        lam_used = {c: best for c in cols}
        penalty = best * P1
        source = "GCV grid search (pygam's default grid and criterion, one lam for all terms)"
    else:
        lam_used = {it["spec"].name: float(gam.lam[j][0]) for j, it in enumerate(info)}
        penalty = P1
        source = "given"
    penalty = penalty + _PYGAM_RIDGE * np.eye(p)
    proj = FrozenProjection(draws, None, keep, penalty=penalty, intercept=p - 1, **mapping)
    del mapping
    if not isinstance(design, ChunkedDesign):
        bsum = np.asarray(design.T @ wk).ravel()
    bbar = bsum / wk.sum()
    C, C_missing = {}, {}
    for j, item in enumerate(info):
        name = item["spec"].name
        idx = gam.terms.get_coef_indices(j)
        if item["spec"].kind == "numeric":
            grid = _grid(item.pop("observed"), grid_size)  # n values: not kept
            values = grid
        else:
            grid = np.arange(len(item["labels"]), dtype=np.float64)
            values = np.array(item["labels"], dtype=object)
        Xg = np.repeat(X[:1], grid.size, axis=0)
        Xg[:, j] = grid
        rows = np.tile(bbar, (grid.size, 1))
        rows[:, idx] = model_matrix(gam, Xg, term=j).toarray()
        ind = item.get("indicator")
        if ind is not None:
            # indicator terms follow the covariate terms in the order of their feature columns,
            # so the feature index of an indicator is also its term index
            ind_idx = gam.terms.get_coef_indices(ind)
            rows[:, ind_idx] = 0.0
            miss_row = bbar.copy()
            Xm = X[:1].copy()
            Xm[:, j] = item["fill"]
            miss_row[idx] = model_matrix(gam, Xm, term=j).toarray()[0]
            miss_row[ind_idx] = 1.0
            C_missing[name] = miss_row
        C[name] = (values, rows)

    settings = {
        "columns": cols,
        "max_levels": max_levels,
        "pool_levels": pool_levels,
        "n_splines": n_splines,
        "lam": dict(lam_used),
        "lam_source": source,
        "criterion": "GCV" if lam is None else None,
        "grid_size": grid_size,
        "n_draws": draws.n_draws,
        "n_units": draws.n_units,
        "n_units_used": int(keep.sum()),
        "n_units_compiled": int(fit_rows.size),
        "weights": "posterior-mean weight per unit (per-draw weights enter the numerator only)"
        if draws.has_draw_weights else draws.weights_description,
        "complier_weighted": draws.is_complier_weighted,
        "structure_from": draws.label,
    }

    def finish():
        coef, r2 = proj.finish(draws)
        return AdditiveSummary(draws, coef, r2, info, C, C_missing, design, keep, bbar, lam_used, settings)

    return SummaryPlan(proj.reducers(draws), finish, "additive")
