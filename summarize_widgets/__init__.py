"""summarize_widgets: subgroups, trends and tables from a posterior of unit-level effects.

Computation (the core) returns plain result objects and DataFrames; figures take
results and return plotly figures; widgets compose both.
"""
from ._version import __version__
from ._validate import SummaryError
from .draws import EffectDraws
from .groups import GroupSummary, summarize_groups
from .tree import TreeSummary, summarize_tree

__all__ = [
    "__version__",
    "SummaryError",
    "EffectDraws",
    "summarize_tree",
    "TreeSummary",
    "summarize_groups",
    "GroupSummary",
]
