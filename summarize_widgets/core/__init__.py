"""The core: the draws contract, passes over the draws, covariate encodings, statistics of draws.

Nothing here imports figures, exporters or widgets.
"""
from .draws import DrawBlock, EffectDraws
from .validate import SummaryError

__all__ = ["EffectDraws", "DrawBlock", "SummaryError"]
