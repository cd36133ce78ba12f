"""The main job in one call: every summary of one set of draws (the one orchestrator).

The command line, the report folder and the explorer all build their summaries here.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

from ..core.validate import SummaryError, check_int, check_interval, check_level

__all__ = ["SummaryBundle", "summarize_all"]

@dataclass
class SummaryBundle:
    """The summaries of one set of draws (any may be None), and the files written from them."""

    draws: object
    tree: object
    additive: object = None
    linear: object = None
    groups: object = None
    evidence: object = None  # EvidenceSet, only when asked for (summarize_all(evidence=True))
    files: list = field(default_factory=list)
    notes: list = field(default_factory=list)

    @property
    def results(self) -> dict:
        return {k: v for k, v in (("tree", self.tree), ("additive", self.additive), ("linear", self.linear),
                                  ("groups", self.groups)) if v is not None}


def summarize_all(draws, *, depth: int = 3, max_depth: int | None = None, min_size=None, columns=None,
                  groups=None, additive: bool = True, linear: bool = True, evidence: bool = False,
                  stability_fits: int = 0, threshold=None, tolerance: float = 0.05, level: float = 0.95,
                  interval: str = "equal-tailed", progress=None) -> SummaryBundle:
    """Tree (at ``depth``, grown to ``max_depth``), additive and linear summaries, and optional groups.

    Parameters
    ----------
    draws : EffectDraws
    depth : int, default 3
        Depth of the reported subgroups.
    max_depth : int, optional
        Depth the tree is grown to (default ``max(depth, 4)``), so summary R^2 is shown for every depth.
    min_size, columns
        Passed to :func:`summarize_tree` (``columns`` also to the additive and linear summaries).
    groups : mapping label -> pandas query, optional
        Pre-specified groups (:func:`summarize_groups`).
    evidence : bool, default False
        Also gather the evidence a referee asks for (heterogeneity, size paths;
        :func:`~summarize_widgets.summaries.evidence_set.gather_evidence`) into ``bundle.evidence``.
    stability_fits : int, default 0
        With ``evidence``: draws to refit the tree to for the structure stability check (0 skips it:
        it costs one CART fit per draw).
    threshold, tolerance : float, optional
        With ``evidence``: the difference ``c`` of ``P(range > c)`` (default: a rule of thumb) and the
        summary R^2 tolerance of the size paths.
    level, interval
        With ``evidence``: credible level and interval kind of its verdicts.
    """
    from .additive import summarize_additive
    from .groups import summarize_groups
    from .linear import summarize_linear
    from .tree import summarize_tree

    depth = check_int(depth, "depth", low=1, high=8)
    max_depth = max(depth, 4) if max_depth is None else check_int(max_depth, "max_depth", low=depth, high=8)
    tree = summarize_tree(draws, max_depth=max_depth, min_size=min_size, columns=columns, progress=progress).at_depth(depth)
    bundle = SummaryBundle(
        draws=draws,
        tree=tree,
        additive=summarize_additive(draws, columns=columns) if additive else None,
        linear=summarize_linear(draws, columns=columns) if linear else None,
        groups=summarize_groups(draws, groups) if groups else None,
    )
    if evidence:
        from .evidence_set import gather_evidence

        bundle.evidence = gather_evidence(draws, tree, linear=bundle.linear, groups=bundle.groups,
                                          stability_fits=stability_fits, threshold=threshold, tolerance=tolerance,
                                          level=level, interval=interval)
    return bundle
