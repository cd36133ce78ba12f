"""The evidence a referee asks for, gathered in one call for the report, the exports, the CLI and the explorer.

:func:`gather_evidence` runs the heterogeneity evidence (for the tree, and for the
pre-specified groups when given), the summary-size paths (tree by depth, linear
terms along a path) and, only when asked (``stability_fits > 0``), the structure
stability check, whose one CART fit per sampled draw is the only costly part.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import pandas as pd

from ..core.validate import SummaryError, check_int, check_interval, check_level
from .evidence import HeterogeneityEvidence, heterogeneity_evidence, unit_sd_draws
from .precision import PrecisionCheck, precision_check
from .size_path import DEFAULT_TOLERANCE, SizePath, linear_size_path, tree_size_path
from .stability import StabilityCheck, structure_stability

__all__ = ["EvidenceSet", "gather_evidence", "DEFAULT_STABILITY_FITS"]

#: Draw-trees fitted by the stability check when it is requested without a number.
DEFAULT_STABILITY_FITS = 200


@dataclass
class EvidenceSet:
    """Every piece of evidence computed for one set of summaries (any piece may be None).

    Attributes
    ----------
    heterogeneity : HeterogeneityEvidence
        For the tree at its current depth.
    group_heterogeneity : HeterogeneityEvidence or None
        For the pre-specified groups.
    tree_path, linear_path : SizePath or None
    stability : StabilityCheck or None
        Present only when requested.
    precision : PrecisionCheck or None
        Monte Carlo precision (ESS, R-hat) of every table of the summaries and of the evidence itself.
    """

    heterogeneity: HeterogeneityEvidence
    group_heterogeneity: HeterogeneityEvidence | None = None
    tree_path: SizePath | None = None
    linear_path: SizePath | None = None
    stability: StabilityCheck | None = None
    precision: PrecisionCheck | None = None
    level: float = 0.95
    interval: str = "equal-tailed"
    settings: dict = field(default_factory=dict)

    @property
    def messages(self) -> list[tuple[str, str]]:
        """(heading, plain-language verdict) for every piece present, in report order."""
        out = [("Heterogeneity (tree subgroups)", self.heterogeneity.message)]
        if self.group_heterogeneity is not None:
            out.append(("Heterogeneity (pre-specified groups)", self.group_heterogeneity.message))
        if self.stability is not None:
            out.append(("Structure stability", self.stability.message))
        if self.tree_path is not None:
            out.append(("Tree size", self.tree_path.message))
        if self.linear_path is not None:
            out.append(("Linear summary size", self.linear_path.message))
        if self.precision is not None:
            out.append(("Monte Carlo precision", self.precision.message))
        return out

    def tables(self, level: float | None = None, interval: str | None = None) -> dict[str, tuple[pd.DataFrame, str]]:
        """Name -> (table, caption), in report order (used by the exports and the report)."""
        level = check_level(self.level if level is None else level)
        interval = check_interval(self.interval if interval is None else interval)
        lab = self.heterogeneity.label
        out = {"heterogeneity": (self.heterogeneity.table(level, interval),
                                 f"Spread of the {lab}: posterior of the sd across units and subgroups")}
        if self.group_heterogeneity is not None:
            out["heterogeneity_groups"] = (self.group_heterogeneity.table(level, interval),
                                           "Spread of the effects across pre-specified groups")
        if self.stability is not None:
            out["stability"] = (self.stability.table(),
                                f"Splits of trees refitted to {len(self.stability.rows)} single posterior draws")
            out["stability_agreement"] = (self.stability.agreement(level, interval),
                                          "Agreement of the draw-trees' subgroups with the summary tree")
        if self.tree_path is not None:
            out["size_path_tree"] = (self.tree_path.table(level, interval), "Summary R\u00b2 by number of subgroups")
        if self.linear_path is not None:
            out["size_path_linear"] = (self.linear_path.table(level, interval),
                                       "Summary R\u00b2 of nested linear summaries")
        if self.precision is not None:
            out["precision"] = (self.precision.table(), "Monte Carlo precision of every table (ESS, R-hat)")
        return out


def gather_evidence(draws, tree, *, linear=None, groups=None, stability_fits: int = 0, threshold=None,
                    tolerance: float = DEFAULT_TOLERANCE, order: str = "lars", level: float = 0.95,
                    interval: str = "equal-tailed", seed: int = 0, progress=None) -> EvidenceSet:
    """Heterogeneity evidence, size paths and (on request) structure stability.

    Parameters
    ----------
    draws : EffectDraws
    tree : TreeSummary
        At the reported depth.
    linear : LinearSummary, optional
        Adds its size path.
    groups : GroupSummary, optional
        Adds the heterogeneity across the pre-specified groups (needs two groups or more).
    stability_fits : int, default 0
        Draws to refit the tree to (0: skip the check; it costs one CART fit per draw).
    threshold : float, optional
        ``c`` in ``P(largest - smallest subgroup effect > c)`` (default: the rule of thumb of
        :func:`heterogeneity_evidence`).
    tolerance : float, default 0.05
        R^2 tolerance of the size paths.
    order : {"lars", "forward"}, default "lars"
        Term order of the linear size path.
    level, interval
        Credible level and interval kind of the messages and tables.
    seed : int, default 0
        Seed of the stability check's draw sample.
    progress : callable(done, total), optional
        Passed to the pass over the draws and to the stability fits.
    """
    level = check_level(level)
    interval = check_interval(interval)
    stability_fits = check_int(stability_fits, "stability_fits", low=0)
    if stability_fits == 1:
        raise SummaryError("`stability_fits` must be 0 (skip the check) or at least 2.")
    usd = unit_sd_draws(draws, progress=progress)
    het = heterogeneity_evidence(draws, tree, threshold=threshold, level=level, interval=interval, unit_sd=usd)
    ghet = None
    if groups is not None and groups.group_draws.shape[1] > 2:
        ghet = heterogeneity_evidence(draws, groups, threshold=het.threshold if threshold is None else threshold,
                                      level=level, interval=interval, unit_sd=usd)
    tpath = tree_size_path(tree, tolerance=tolerance) if tree.max_depth > 1 else None
    lpath = linear_size_path(draws, linear, order=order, tolerance=tolerance) if linear is not None else None
    stab = structure_stability(tree, n_fits=stability_fits, seed=seed, level=level, progress=progress) \
        if stability_fits else None
    checked = {"subgroups": tree.table(level=level, interval=interval), "heterogeneity": het.table(level, interval)}
    if linear is not None:
        checked["linear"] = linear.table(level=level, interval=interval)
    if groups is not None:
        checked["groups"] = groups.table(level=level, interval=interval)
    if tpath is not None:
        checked["tree size"] = tpath.table(level, interval)
    prec = precision_check(checked)
    settings = {"summary": "evidence", "threshold": het.threshold, "threshold_rule": het.threshold_rule,
                "tolerance": tolerance, "order": order, "stability_fits": stability_fits, "seed": seed}
    return EvidenceSet(heterogeneity=het, group_heterogeneity=ghet, tree_path=tpath, linear_path=lpath,
                       stability=stab, precision=prec, level=level, interval=interval, settings=settings)
