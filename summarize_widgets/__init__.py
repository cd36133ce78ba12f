"""summarize_widgets: subgroups, trends and tables from a posterior of unit-level effects."""
from ._version import __version__
from ._validate import SummaryError
from .draws import EffectDraws

__all__ = ["__version__", "SummaryError", "EffectDraws"]
