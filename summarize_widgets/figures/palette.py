"""The package's colours: one palette for figures, tables and the tree view.

Every pair stays at least 12 CIELAB units apart under simulated protanopia, deuteranopia
and tritanopia (checked in tests/test_figures.py with Machado et al. 2009 matrices).
"""
from __future__ import annotations

import numpy as np

from ..core.validate import SummaryError

__all__ = ["PALETTE", "DIVERGING", "EFFECT_PALETTE", "INK", "ACCENT", "MUTED", "GRID", "BAND", "FONT",
           "effect_color", "effect_colorscale", "effect_palette", "benefit_sign", "rgba"]

# -- colours ---------------------------------------------------------------------------------
# Our own palette. Every pair stays at least 12 CIELAB units apart under simulated protanopia,
# deuteranopia and tritanopia (checked in tests/test_figures.py with Machado et al. 2009 matrices).
#: Qualitative colours for series, as hex strings: harbour blue, amber, rose, ink, sky, bronze.
PALETTE = ["#2E5F8A", "#E39A2D", "#CC5C8A", "#2B2D33", "#8FC1DE", "#7A5C2E"]
#: Default colour of points, lines and text.
INK = "#2B2D33"
#: The selected / highlighted item.
ACCENT = "#CC5C8A"
#: Missing values and de-emphasized marks.
MUTED = "#A7A9AC"
#: Grid lines.
GRID = "#E4E2DD"
#: Fill of credible bands (drawn with transparency).
BAND = "#2E5F8A"
#: Diverging scale for effects, evenly spaced stops from the most negative to the most positive,
#: centred on a warm paper white at zero. Lightness rises monotonically towards zero on both sides.
DIVERGING = ["#1D4E79", "#6F9BC4", "#F3F0EA", "#E2A066", "#9A4A12"]
#: The same scale in the form the JavaScript tree view takes (``TreeView(palette=...)``); its
#: ``divergingColour`` interpolates the stops exactly as :func:`effect_color` does.
EFFECT_PALETTE = {"stops": list(DIVERGING), "missing": MUTED}



def benefit_sign(better) -> float:
    """+1 when higher effects are better (the default), -1 when lower ones are (``draws.better``).

    Every coloured effect is drawn as ``effect_color(benefit_sign(better) * value, vmax)``, so the
    warm end of :data:`DIVERGING` always marks the better direction and the cool end the worse one.
    """
    if better in (None, "higher"):
        return 1.0
    if better == "lower":
        return -1.0
    raise SummaryError(f"`better` must be 'higher' or 'lower'; got {better!r}.")


def effect_palette(better=None) -> dict:
    """:data:`EFFECT_PALETTE` for effects whose better direction is ``better`` (stops reversed for "lower"),
    so the JavaScript tree view colours the same effect as :func:`effect_color` with :func:`benefit_sign`."""
    stops = list(DIVERGING) if benefit_sign(better) > 0 else list(DIVERGING)[::-1]
    return {"stops": stops, "missing": MUTED}


FONT = "Helvetica Neue, Helvetica, Arial, Liberation Sans, DejaVu Sans, sans-serif"


def hex_to_rgb(h: str) -> np.ndarray:
    return np.array([int(h[i:i + 2], 16) for i in (1, 3, 5)], dtype=float)


def rgba(h: str, alpha: float) -> str:
    r, g, b = hex_to_rgb(h).astype(int)
    return f"rgba({r}, {g}, {b}, {alpha})"


_STOPS = np.linspace(0.0, 1.0, len(DIVERGING))
_STOP_RGB = np.array([hex_to_rgb(h) for h in DIVERGING])


def effect_colorscale() -> list[list]:
    """The diverging scale as a plotly colorscale ``[[position, hex], ...]``.

    Use it with ``cmin=-vmax, cmax=vmax`` (or ``cmid=0``) so zero sits on the centre colour.
    """
    return [[float(p), h] for p, h in zip(_STOPS, DIVERGING)]


def effect_color(value, vmax):
    """Colour of an effect on the diverging scale centred at zero.

    Parameters
    ----------
    value : float or array-like of float
        Effect(s). Values beyond ``+-vmax`` take the end colours; NaN takes ``MUTED``.
    vmax : float
        The magnitude mapped to the end colours (for example the largest absolute subgroup
        mean). Must be finite and >= 0; ``vmax = 0`` maps every value to the centre colour.

    Returns
    -------
    str or list of str
        ``"#rrggbb"`` for a scalar ``value``, a list of them for an array.

    Notes
    -----
    Linear interpolation in sRGB between the ``DIVERGING`` stops, rounded half up (plotly
    interpolates its colorscales and the JS tree view its palette the same way, so they agree).
    """
    if isinstance(vmax, bool) or not isinstance(vmax, (int, float, np.integer, np.floating)) \
            or not np.isfinite(vmax) or vmax < 0:
        raise SummaryError(f"`vmax` must be a finite number >= 0; got {vmax!r}.")
    scalar = np.ndim(value) == 0
    try:
        v = np.atleast_1d(np.asarray(value, dtype=float))
    except (TypeError, ValueError):
        raise SummaryError(f"`value` must be a number or an array of numbers; got {value!r}.") from None
    v = v.ravel()
    with np.errstate(invalid="ignore"):
        t = np.full(v.shape, 0.5) if vmax == 0 else 0.5 + 0.5 * np.clip(v / float(vmax), -1.0, 1.0)
    ok = np.isfinite(v)
    rgb = np.floor(np.stack([np.interp(np.where(ok, t, 0.5), _STOPS, _STOP_RGB[:, k]) for k in range(3)], axis=1)
                   + 0.5).astype(int)
    out = [f"#{r:02x}{g:02x}{b:02x}" if good else MUTED for (r, g, b), good in zip(rgb.tolist(), ok)]
    return out[0] if scalar else out
