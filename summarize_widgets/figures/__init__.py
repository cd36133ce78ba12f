"""Figures: a summary result in, a plotly figure out; static SVG/PDF/PNG export."""
from .palette import (ACCENT, BAND, DIVERGING, EFFECT_PALETTE, GRID, INK, MUTED, PALETTE, effect_color,
                      effect_colorscale)
from .plots import plot_coefficients, plot_contrasts, plot_fit_by_depth, plot_subgroups, plot_curves
from .decisions import plot_targeting_curve
from .static import BrowserNotFoundError, find_browser, save_figure, save_figures

__all__ = [
    "PALETTE", "DIVERGING", "EFFECT_PALETTE", "INK", "ACCENT", "MUTED", "GRID", "BAND",
    "effect_color", "effect_colorscale",
    "plot_subgroups", "plot_fit_by_depth", "plot_curves", "plot_coefficients", "plot_contrasts", "plot_targeting_curve",
    "save_figure", "save_figures", "find_browser", "BrowserNotFoundError",
]
