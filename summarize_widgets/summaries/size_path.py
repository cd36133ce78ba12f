"""How small can the summary be? Summary R^2 against the size of nested summaries.

Linear summary (after the decoupling of shrinkage and selection, Hahn & Carvalho
2015, JASA): order the terms once, on the posterior mean, by a path (scikit-learn's
``lars_path_gram``, least-angle regression on the p x p Gram matrix, Efron et al. 2004; or greedy forward
selection), then project every draw onto each nested set ``{intercept, first k
terms}`` and report the posterior of the summary R^2 for each ``k``.

No pass over the draws is needed. With the weights ``wbar`` of the linear summary
and its design reordered as ``sqrt(wbar) B P = Q R`` (thin QR, intercept first),
every draw's projection onto the full span is ``B gamma_s``; its coordinates in the
orthonormal basis ``Q`` are ``z_s = R P' gamma_s``, and the projection onto the
first ``k + 1`` columns keeps the first ``k + 1`` coordinates. (Computed with the
non-intercept columns centred and scaled, whose ``R`` is the Cholesky factor of their
small Gram matrix: the same spans, no QR of the n x p design.) So the explained sum
of squares of the nested fit is ``SSR_k,s = sum_{j=1..k} z_sj^2`` (coordinate 0 is
the intercept) and, with the full fit's summary R^2 ``R2_s = SSR_p,s / SST_s``,
``R2_k,s = R2_s * SSR_k,s / SSR_p,s``: exactly the R^2 of refitting each nested
model to each draw (docs/method.md section 2).

Tree: the truncations of the summary tree are nested by construction; the size is
the number of subgroups at each depth (:meth:`TreeSummary.fit_r2_draws_by_depth`).

The smallest summary "within tolerance" is the first size whose R^2 shortfall
``R2_full,s - R2_k,s`` (per draw, >= 0) has posterior mean at most ``tolerance``
(default 0.05, i.e. five points of R^2: a rule of thumb of ours).
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..core.design import classify_columns, linear_design
from ..core.stats import summary_columns
from ..core.validate import SummaryError, check_interval, check_level

__all__ = ["SizePath", "linear_size_path", "tree_size_path", "term_order", "DEFAULT_TOLERANCE"]

#: Default largest acceptable posterior mean shortfall of summary R^2 (rule of thumb).
DEFAULT_TOLERANCE = 0.05


@dataclass(frozen=True)
class SizePath:
    """Posterior of summary R^2 for nested summaries of growing size.

    Attributes
    ----------
    sizes : ndarray of int, shape (n_steps,)
        Number of terms (linear, intercept not counted) or of subgroups (tree) at each step.
    steps : list of str
        What each step adds: the term entering (linear) or ``"depth d"`` (tree).
    r2_draws : ndarray, shape (n_draws, n_steps)
        Summary R^2 per draw and step (NaN for draws without heterogeneity).
    chosen : int
        Index of the smallest step within ``tolerance`` of the full summary.
    tolerance : float
    kind : {"linear", "tree"}
    order : str
        How the steps were ordered ("lars", "forward", "depth").
    message : str
    """

    sizes: np.ndarray
    steps: list
    r2_draws: np.ndarray
    chosen: int
    tolerance: float
    kind: str
    order: str
    message: str
    label: str = "effect"
    n_chains: int = 1
    settings: dict = field(default_factory=dict)

    def table(self, level: float = 0.95, interval: str = "equal-tailed") -> pd.DataFrame:
        """One row per step: ``step``, ``size``, ``added``, ``mean``, ``sd``, ``lower``, ``upper`` (summary R^2),
        ``shortfall`` (posterior mean of the full summary's R^2 minus this one's), ``prob_within``
        (posterior probability that the shortfall is at most ``tolerance``), ``chosen``, then the Monte
        Carlo error columns of the R^2 (:mod:`summarize_widgets.core.stats`)."""
        level = check_level(level)
        interval = check_interval(interval)
        ok = ~np.isnan(self.r2_draws).any(axis=1)
        r2 = self.r2_draws[ok]
        # Draws without heterogeneity (no R^2) are left out; the rest are treated as one chain (as for R^2 by depth).
        stats = summary_columns(r2, level=level, interval=interval, n_chains=1 if not ok.all() else self.n_chains)
        stats.pop("prob_positive")
        short = r2[:, -1:] - r2
        out = pd.DataFrame({
            "step": np.arange(len(self.steps)),
            "size": self.sizes,
            "added": self.steps,
            **{k: stats.pop(k) for k in ("mean", "sd", "lower", "upper")},
            "shortfall": short.mean(axis=0),
            "prob_within": (short <= self.tolerance).mean(axis=0),
            "chosen": np.arange(len(self.steps)) == self.chosen,
            **stats,
        })
        out.attrs.update({"level": level, "interval": interval, "label": self.label, "summary": f"size_path_{self.kind}",
                          "tolerance": self.tolerance, "order": self.order, "message": self.message})
        return out


def _check_tolerance(tolerance) -> float:
    try:
        t = float(tolerance)
    except (TypeError, ValueError):
        raise SummaryError(f"`tolerance` must be a number between 0 and 1 (a share of R^2); got {tolerance!r}.") from None
    if not (0.0 <= t < 1.0):
        raise SummaryError(f"`tolerance` must be between 0 and 1 (a share of R^2); got {tolerance!r}.")
    return t


def _choose(r2: np.ndarray, tolerance: float) -> int:
    ok = ~np.isnan(r2).any(axis=1)
    if not ok.any():
        raise SummaryError("Summary R^2 is undefined in every draw (no heterogeneity): there is no size path to report.")
    short = (r2[ok, -1:] - r2[ok]).mean(axis=0)
    return int(np.flatnonzero(short <= tolerance + 1e-12)[0])


def _weighted_gram(B: np.ndarray, target: np.ndarray, weights: np.ndarray):
    """Gram matrix of the weighted, centred non-intercept columns of ``B`` scaled to unit weighted length,
    their inner products with the centred target, and the scales (one n x p product, O(n p^2))."""
    W = weights.sum()
    X = B[:, 1:]
    mean = (weights @ X) / W
    # Centred explicitly (not from raw moments, which cancel badly for columns with a large offset).
    Xc = X - mean
    XtW = (Xc * weights[:, None]).T
    G = XtW @ Xc
    c = XtW @ (target - (weights @ target) / W)
    scale = np.sqrt(np.clip(np.diag(G), 0.0, None))
    safe = np.where(scale > 0, scale, 1.0)
    G = G / np.outer(safe, safe)
    c = c / safe
    return G, c, scale, mean


def _order_from_gram(G: np.ndarray, c: np.ndarray, order: str, n_samples: int) -> list[int]:
    """Order of entry (0-based) of the columns whose Gram matrix is ``G`` and correlations with the target ``c``."""
    p = G.shape[0]
    entered: list[int] = []
    if order == "lars" and p:
        from sklearn.linear_model import lars_path_gram

        _, active, _ = lars_path_gram(Xy=c.copy(), Gram=G.copy(), n_samples=n_samples, method="lar")
        entered = [int(j) for j in active]
    # Forward selection (also completes a lars path that stopped early): after the entered columns are
    # swept out, the residual Gram and correlations are Schur complements, and the gain of column j is
    # a_jy^2 / a_jj (the rise in explained sum of squares), all in O(p^2) per step.
    A = np.zeros((p + 1, p + 1))
    A[:p, :p], A[:p, p], A[p, :p] = G, c, c
    tiny = 1e-12 * max(float(np.max(np.diag(G))) if p else 1.0, 1e-300)

    def sweep(k):
        piv = A[k, k]
        if piv > tiny:
            A[:] = A - np.outer(A[:, k], A[k, :]) / piv
        A[k, :] = 0.0
        A[:, k] = 0.0

    for j in entered:
        sweep(j)
    rest = [j for j in range(p) if j not in entered]
    while rest:
        d = np.array([A[j, j] for j in rest])
        num = np.array([A[j, p] for j in rest]) ** 2
        gain = np.where(d > tiny, num / np.where(d > tiny, d, 1.0), -1.0)
        j = rest[int(np.argmax(gain))]
        entered.append(j)
        rest.remove(j)
        sweep(j)
    return entered


def term_order(B: np.ndarray, target: np.ndarray, weights: np.ndarray, *, order: str = "lars") -> list[int]:
    """Order of entry of the non-intercept columns of ``B`` (column 0 is the intercept) for ``target``.

    Parameters
    ----------
    B : ndarray, shape (n, p)
    target, weights : ndarray, shape (n,)
    order : {"lars", "forward"}
        "lars": least-angle regression (scikit-learn ``lars_path_gram``, ``method="lar"``, Efron et al.
        2004) on the weighted, centred and unit-length-scaled columns (so a covariate's units do not
        matter); terms that never enter follow in forward-selection order. "forward": greedy forward
        selection, each step adding the term that raises the weighted R^2 most.
        Both work on the p x p Gram matrix: one O(n p^2) product, then no more work in n.

    Returns
    -------
    list of int
        Column indices 1..p-1 in order of entry.
    """
    if order not in ("lars", "forward"):
        raise SummaryError(f"`order` must be 'lars' or 'forward'; got {order!r}.")
    G, c, _, _ = _weighted_gram(np.asarray(B, dtype=np.float64), np.asarray(target, dtype=np.float64),
                                np.asarray(weights, dtype=np.float64))
    return [j + 1 for j in _order_from_gram(G, c, order, B.shape[0])]


def linear_size_path(draws, linear, *, order: str = "lars", tolerance: float = DEFAULT_TOLERANCE) -> SizePath:
    """Posterior of summary R^2 for the nested linear summaries along a path of terms.

    Parameters
    ----------
    draws : EffectDraws
        The draws ``linear`` was built from (its design is rebuilt from their covariates).
    linear : LinearSummary
    order : {"lars", "forward"}, default "lars"
        How the terms are ordered on the posterior mean (see :func:`term_order`).
    tolerance : float, default 0.05
        Largest acceptable posterior mean shortfall of R^2 against the full summary.

    Returns
    -------
    SizePath
        Step 0 is the intercept alone (R^2 = 0); the last step is the full linear summary.
    """
    from ..core.draws import EffectDraws
    from .linear import LinearSummary

    if not isinstance(draws, EffectDraws):
        raise SummaryError(f"`draws` must be an EffectDraws; got {type(draws).__name__}.")
    if not isinstance(linear, LinearSummary):
        raise SummaryError(f"`linear` must be a LinearSummary (from summarize_linear); got {type(linear).__name__}.")
    tolerance = _check_tolerance(tolerance)
    keep = draws.mean_weights > 0
    w = draws.mean_weights[keep]
    design = linear.design_matrix
    if linear.draws is draws and isinstance(design, np.ndarray) and np.array_equal(linear.kept_units, keep):
        # The summary's own design (no rebuild); float32 designs are widened for the Gram products.
        terms, Bk = list(linear.terms), np.asarray(design, dtype=np.float64)
    else:
        specs = classify_columns(draws.covariates, linear.columns, max_levels=linear.settings.get("max_levels"),
                                 pool_levels=linear.settings.get("pool_levels"), summary="linear")
        B, terms, _ = linear_design(draws.covariates, specs)
        if list(terms) != list(linear.terms) or linear.coef_draws.shape[0] != draws.n_draws:
            raise SummaryError("`linear` was built from other draws or covariates than `draws`; pass the draws it summarizes.")
        Bk = B[keep]
    if order not in ("lars", "forward"):
        raise SummaryError(f"`order` must be 'lars' or 'forward'; got {order!r}.")
    G, c, scale_all, _ = _weighted_gram(Bk, draws.posterior_mean[keep], w)
    path = [j + 1 for j in _order_from_gram(G, c, order, Bk.shape[0])]
    perm = [0, *path]
    # The intercept is in every nested set, so centring the other columns (weighted) changes no span and
    # leaves their coefficients as they are; scaled to unit weighted length, their Gram matrix is well
    # conditioned and its Cholesky factor is the R of their QR (one O(n p^2) product, no n x p QR).
    idx = np.array(path) - 1
    cols = np.array(path)
    scale = scale_all[idx]
    R = np.linalg.cholesky(G[np.ix_(idx, idx)]).T
    z = (linear.coef_draws[:, cols] * scale) @ R.T  # coordinates of each draw's projection beyond the intercept
    ssr = np.cumsum(z ** 2, axis=1)
    r2_full = np.asarray(linear.fit_r2, dtype=np.float64)  # raises when no draw has heterogeneity
    with np.errstate(divide="ignore", invalid="ignore"):
        frac = np.where(ssr[:, -1:] > 0, ssr / np.where(ssr[:, -1:] > 0, ssr[:, -1:], 1.0), 0.0)
    r2 = np.column_stack([np.where(np.isnan(r2_full), np.nan, 0.0), r2_full[:, None] * frac])
    r2[:, -1] = r2_full
    chosen = _choose(r2, tolerance)
    names = ["(intercept only)", *[terms[j] for j in path]]
    sizes = np.arange(len(perm))
    msg = _message("linear", r2, chosen, tolerance, f"{chosen} of {len(path)} terms", names[1:chosen + 1])
    settings = {"summary": "size_path_linear", "order": order, "tolerance": tolerance, "terms": names}
    return SizePath(sizes=sizes, steps=names, r2_draws=r2, chosen=chosen, tolerance=tolerance, kind="linear",
                    order=order, message=msg, label=draws.label, n_chains=draws.n_chains,
                    settings=settings)


def tree_size_path(tree, *, tolerance: float = DEFAULT_TOLERANCE) -> SizePath:
    """Posterior of summary R^2 for the tree's truncations at depths 1..max_depth (nested by construction).

    Parameters
    ----------
    tree : TreeSummary
    tolerance : float, default 0.05
        Largest acceptable posterior mean shortfall of R^2 against the deepest tree.
    """
    from .tree import TreeSummary

    if not isinstance(tree, TreeSummary):
        raise SummaryError(f"`tree` must be a TreeSummary (from summarize_tree); got {type(tree).__name__}.")
    tolerance = _check_tolerance(tolerance)
    by_depth = tree.fit_r2_draws_by_depth()
    depths = sorted(by_depth)
    r2 = np.column_stack([by_depth[d] for d in depths])
    sizes = np.array([len(tree.at_depth(d).leaf_ids) for d in depths])
    chosen = _choose(r2, tolerance)
    steps = [f"depth {d}" for d in depths]
    msg = _message("tree", r2, chosen, tolerance, f"depth {depths[chosen]} ({sizes[chosen]} subgroups)", [])
    settings = {"summary": "size_path_tree", "order": "depth", "tolerance": tolerance}
    return SizePath(sizes=sizes, steps=steps, r2_draws=r2, chosen=chosen, tolerance=tolerance, kind="tree",
                    order="depth", message=msg, label=tree.label,
                    n_chains=tree.draws.n_chains, settings=settings)


def _message(kind, r2, chosen, tolerance, what, terms) -> str:
    ok = ~np.isnan(r2).any(axis=1)
    full, pick = r2[ok, -1].mean(), r2[ok, chosen].mean()
    largest = "full linear summary" if kind == "linear" else "deepest tree"
    listed = f" ({', '.join(terms)})" if terms else ""
    return (f"Smallest {kind} summary within {tolerance:.2g} of the {largest}'s summary R\u00b2: {what}{listed}, "
            f"R\u00b2 {pick:.2f} against {full:.2f} (posterior means). The summaries describe the model's posterior, "
            "not a true model.")
