"""The main job in one call: every summary of one set of draws (the one orchestrator).

The command line, the report folder and the explorer all build their summaries here.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

from ..core.validate import SummaryError, check_int, check_interval, check_level

__all__ = ["SummaryBundle", "summarize_all", "DEFAULT_DEPTH"]

#: Depth of the subgroups reported and shown first, the same in the command line and the explorer.
DEFAULT_DEPTH = 3

@dataclass
class SummaryBundle:
    """The summaries of one set of draws (any may be None), and the files written from them."""

    draws: object
    tree: object
    additive: object = None
    linear: object = None
    groups: object = None
    files: list = field(default_factory=list)
    notes: list = field(default_factory=list)

    @property
    def results(self) -> dict:
        return {k: v for k, v in (("tree", self.tree), ("additive", self.additive), ("linear", self.linear),
                                  ("groups", self.groups)) if v is not None}


def summarize_all(draws, *, depth: int = DEFAULT_DEPTH, max_depth: int | None = None, min_size=None, columns=None,
                  groups=None, additive: bool = True, linear: bool = True, progress=None) -> SummaryBundle:
    """Tree (at ``depth``, grown to ``max_depth``), additive and linear summaries, and optional groups.

    Parameters
    ----------
    draws : EffectDraws
    depth : int, default DEFAULT_DEPTH (3)
        Depth of the reported subgroups.
    max_depth : int, optional
        Depth the tree is grown to (default ``max(depth, 4)``), so summary R^2 is shown for every depth.
    min_size, columns
        Passed to :func:`summarize_tree` (``columns`` also to the additive and linear summaries).
    groups : mapping label -> pandas query, optional
        Pre-specified groups (:func:`summarize_groups`).
    """
    from .additive import summarize_additive
    from .groups import summarize_groups
    from .linear import summarize_linear
    from .tree import summarize_tree

    depth = check_int(depth, "depth", low=1, high=8)
    max_depth = max(depth, 4) if max_depth is None else check_int(max_depth, "max_depth", low=depth, high=8)
    tree = summarize_tree(draws, max_depth=max_depth, min_size=min_size, columns=columns, progress=progress).at_depth(depth)
    return SummaryBundle(
        draws=draws,
        tree=tree,
        additive=summarize_additive(draws, columns=columns) if additive else None,
        linear=summarize_linear(draws, columns=columns) if linear else None,
        groups=summarize_groups(draws, groups) if groups else None,
    )
