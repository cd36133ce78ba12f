"""Summaries: structures fitted to the posterior mean, every draw projected onto them.

Each summary returns a plain result object (see :mod:`summarize_widgets.summaries.base`);
:func:`summarize_all` builds all of them for the command line, the report and the explorer.
"""
from .additive import AdditiveSummary, plan_additive, summarize_additive
from .bundle import SummaryBundle, summarize_all, summarize_draws
from .compare import Comparison, compare_posteriors, side_by_side
from .groups import GroupSummary, plan_groups, summarize_groups
from .linear import LinearSummary, plan_linear, summarize_linear
from .projection import SummaryPlan, project
from .targeting import TargetingResult, value_of_targeting
from .uptake import UptakeDrivers, uptake_drivers
from .tree import TreeSummary, plan_tree, summarize_tree

__all__ = ["summarize_tree", "TreeSummary", "summarize_groups", "GroupSummary", "summarize_linear",
           "LinearSummary", "summarize_additive", "AdditiveSummary", "summarize_all", "summarize_draws", "SummaryBundle",
           "compare_posteriors", "Comparison", "side_by_side", "plan_tree", "plan_groups", "plan_linear",
           "plan_additive", "SummaryPlan", "project", "value_of_targeting", "TargetingResult", "uptake_drivers", "UptakeDrivers"]
