"""summarize_widgets: subgroups, trends and tables from a posterior of unit-level effects.

Computation (the core) returns plain result objects and DataFrames; figures take
results and return plotly figures; widgets compose both. Heavy optional layers
(figures, export, widgets, demo) are imported on first use, so ``import
summarize_widgets`` stays light.
"""
from importlib import import_module

from ._version import __version__
from .core.validate import SummaryError
from .summaries.additive import AdditiveSummary, summarize_additive
from .core.draws import EffectDraws
from .summaries.compare import Comparison, compare_posteriors, side_by_side
from .summaries.groups import GroupSummary, summarize_groups
from .io.load import load_draws
from .summaries.linear import LinearSummary, summarize_linear
from .summaries.targeting import TargetingResult, value_of_targeting
from .summaries.tree import TreeSummary, summarize_tree
from .summaries.uptake import UptakeDrivers, uptake_drivers

__all__ = [
    "__version__",
    "SummaryError",
    "EffectDraws",
    "load_draws",
    "summarize_tree",
    "TreeSummary",
    "summarize_additive",
    "AdditiveSummary",
    "summarize_linear",
    "LinearSummary",
    "summarize_groups",
    "GroupSummary",
    "compare_posteriors",
    "Comparison",
    "side_by_side",
    "value_of_targeting",
    "TargetingResult",
    "uptake_drivers",
    "UptakeDrivers",
    "simulate_retrofit_study",
    "summarize_all",
    "summarize_draws",
    "write_summary_folder",
    "Explorer",
    "figures",
    "export",
]

_LAZY = {
    "simulate_retrofit_study": ("datasets", "simulate_retrofit_study"),
    "summarize_all": ("summaries.bundle", "summarize_all"),
    "summarize_draws": ("summaries.bundle", "summarize_draws"),
    "write_summary_folder": ("export.folder", "write_summary_folder"),
    "Explorer": ("widgets", "Explorer"),
    "figures": ("figures", None),
    "export": ("export", None),
}


def __getattr__(name):
    if name in _LAZY:
        module, attr = _LAZY[name]
        mod = import_module(f".{module}", __name__)
        return mod if attr is None else getattr(mod, attr)
    raise AttributeError(f"module 'summarize_widgets' has no attribute {name!r}")


def __dir__():
    return sorted(set(globals()) | set(__all__))
