"""Summaries: structures fitted to the posterior mean, every draw projected onto them.

Each summary returns a plain result object (see :mod:`summarize_widgets.summaries.base`);
:func:`summarize_all` builds all of them for the command line, the report and the explorer.
"""
from .additive import AdditiveSummary, summarize_additive
from .bundle import SummaryBundle, summarize_all
from .compare import Comparison, compare_posteriors, side_by_side
from .groups import GroupSummary, summarize_groups
from .linear import LinearSummary, summarize_linear
from .tree import TreeSummary, summarize_tree

__all__ = ["summarize_tree", "TreeSummary", "summarize_groups", "GroupSummary", "summarize_linear",
           "LinearSummary", "summarize_additive", "AdditiveSummary", "summarize_all", "SummaryBundle",
           "compare_posteriors", "Comparison", "side_by_side"]
