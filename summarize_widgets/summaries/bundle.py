"""The main job in one call: every summary of one set of draws (the one orchestrator).

The command line, the report folder and the explorer all build their summaries here.
"""
from __future__ import annotations

from dataclasses import dataclass, field

from ..core.validate import SummaryError, check_int
from .additive import summarize_additive
from .groups import summarize_groups
from .linear import summarize_linear
from .tree import summarize_tree

__all__ = ["SummaryBundle", "summarize_all", "DEFAULT_DEPTH", "STAGES"]

#: Depth of the reported subgroups, shared by the command line, the report and the explorer.
DEFAULT_DEPTH = 3
#: The summaries :func:`summarize_all` computes, in order (names used by progress callbacks and ``errors``).
STAGES = ("tree", "groups", "linear", "additive")

@dataclass
class SummaryBundle:
    """The summaries of one set of draws (any but the tree may be None), and the files written from them.

    Attributes
    ----------
    errors : dict
        Summary name ("linear", "additive") -> message, for an extra that could not be computed
        when :func:`summarize_all` was asked to record such failures instead of raising.
    """

    draws: object
    tree: object
    additive: object = None
    linear: object = None
    groups: object = None
    files: list = field(default_factory=list)
    notes: list = field(default_factory=list)
    errors: dict = field(default_factory=dict)

    @property
    def results(self) -> dict:
        return {k: v for k, v in (("tree", self.tree), ("additive", self.additive), ("linear", self.linear),
                                  ("groups", self.groups)) if v is not None}


def summarize_all(draws, *, depth: int = DEFAULT_DEPTH, max_depth: int | None = None, min_size=None, columns=None,
                  groups=None, additive: bool = True, linear: bool = True, additive_options=None,
                  extras: str = "raise", progress=None) -> SummaryBundle:
    """Every summary of one set of draws: the tree (at ``depth``, grown to ``max_depth``), optional
    groups, the linear and the additive summary. The one orchestrator: the command line, the
    report folder and the explorer all call it.

    Parameters
    ----------
    draws : EffectDraws
    depth : int, default :data:`DEFAULT_DEPTH`
        Depth of the reported subgroups.
    max_depth : int, optional
        Depth the tree is grown to (default ``max(depth, 4)``), so summary R^2 is shown for every depth.
    min_size, columns
        Passed to :func:`summarize_tree` (``columns`` also to the additive and linear summaries).
    groups : mapping label -> query (:mod:`summarize_widgets.core.query`), optional
        Pre-specified groups (:func:`summarize_groups`).
    additive, linear : bool, default True
        Whether to compute these summaries.
    additive_options : mapping, optional
        Keyword arguments for :func:`summarize_additive` (``n_splines``, ``lam``, ``grid_size``).
    extras : {"raise", "record"}, default "raise"
        What a failure of the linear or additive summary does: raise, or leave it None and record
        the message in ``bundle.errors`` (the explorer shows it in that summary's tab). The tree
        and the groups always raise.
    progress : callable(stage, stage_index, n_stages, done_blocks, total_blocks), optional
        Called after each block of each pass; ``stage`` is one of :data:`STAGES`.
    """
    depth = check_int(depth, "depth", low=1, high=8)
    max_depth = max(depth, 4) if max_depth is None else check_int(max_depth, "max_depth", low=depth, high=8)
    if extras not in ("raise", "record"):
        raise SummaryError(f"`extras` must be 'raise' or 'record'; got {extras!r}.")
    wanted = [name for name, on in zip(STAGES, (True, bool(groups), linear, additive)) if on]

    def tick(stage):
        if progress is None:
            return None
        k = wanted.index(stage)
        return lambda done, total: progress(stage, k, len(wanted), done, total)

    tree = summarize_tree(draws, max_depth=max_depth, min_size=min_size, columns=columns, progress=tick("tree"))
    bundle = SummaryBundle(draws=draws, tree=tree.at_depth(depth),
                           notes=list(draws.notes))  # what construction decided (an id column matched or excluded)
    if groups:
        bundle.groups = summarize_groups(draws, groups, progress=tick("groups"))
    extra_summaries = {"linear": lambda: summarize_linear(draws, columns=columns, progress=tick("linear")),
                       "additive": lambda: summarize_additive(draws, columns=columns, progress=tick("additive"),
                                                              **dict(additive_options or {}))}
    for name, make in extra_summaries.items():
        if name not in wanted:
            continue
        try:
            setattr(bundle, name, make())
        except SummaryError as exc:
            if extras == "raise":
                raise
            bundle.errors[name] = str(exc)
    return bundle
