"""The Explorer's panels: figures drawn from stored results, updated in place.

Every panel is drawn by a builder of :mod:`summarize_widgets.figures` from a table
the summaries already hold (no pass over the draws). :func:`show_figure` then
moves the new figure into the panel's existing ``FigureWidget`` (traces replaced,
layout replaced) so the front end keeps one widget per panel and the saved widget
state always describes what is on screen.
"""
from __future__ import annotations

import html
from copy import deepcopy

import numpy as np
import pandas as pd
import plotly.graph_objects as go

from ..figures import plots as _fig
from ..figures.palette import rgba
from ..export import to_html

__all__ = [
    "show_figure",
    "set_width",
    "message_figure",
    "subgroups_figure",
    "fit_figure",
    "trends_figure",
    "coefficients_figure",
    "contrasts_figure",
    "table_html",
    "status_html",
    "header_html",
    "estimate_text",
]

MINUS = "\u2212"


def show_figure(widget: go.FigureWidget, fig: go.Figure) -> None:
    """Make ``widget`` show ``fig``, keeping the same widget (and its front-end view).

    Parameters
    ----------
    widget : plotly.graph_objects.FigureWidget
        The panel's widget, already displayed or not.
    fig : plotly.graph_objects.Figure
        The new content.

    Notes
    -----
    Traces are deleted and re-added (the number and kind of traces change with the
    subgroups); layout keys the new figure lacks are removed explicitly, because a
    plotly relayout only touches the keys it names. plotly's widget syncs later
    edits as messages only, so the full data and layout are also written back into
    the widget's state traits: a notebook saved with widget state (nbconvert,
    nbclient ``store_widget_state=True``) then shows the current figure, not the
    first one.
    """
    # JSON-ready values only (plotly's base64 form for numbers, lists for text): a numpy array
    # left in an edit message travels as a binary buffer, and nbclient's saved widget state keeps
    # that buffer's path after the message field is reset to null, which stops the static HTML
    # widget renderer (it cannot put the buffer back) -- seen with object-dtype customdata.
    plain = _plain(fig.to_dict())
    new_layout = plain.get("layout", {})
    stale = set(widget.layout.to_plotly_json()) - set(new_layout) - {"template"}
    with widget.batch_update():
        widget.data = ()
    if stale:
        widget.plotly_relayout({key: None for key in stale})
    widget.layout = new_layout
    widget.add_traces(plain.get("data", []))
    widget._widget_layout = deepcopy(widget._layout_obj._props)
    widget._widget_data = deepcopy(widget._data)


def _plain(obj):
    """``obj`` with numpy arrays and scalars turned into lists and Python numbers."""
    if isinstance(obj, dict):
        return {k: _plain(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_plain(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return _plain(obj.tolist())
    if isinstance(obj, np.generic):
        return obj.item()
    return obj


def set_width(widget: go.FigureWidget, width: int | None) -> None:
    """Give ``widget`` a fixed width in px (None: plotly's default), in the view and in the saved state."""
    widget.layout.width = width
    widget._widget_layout = deepcopy(widget._layout_obj._props)


def message_figure(text: str, *, height: int = 240) -> go.Figure:
    """An empty panel that says ``text`` (plain text, escaped) in its middle."""
    fig = go.Figure()
    fig.add_annotation(text=html.escape(text, quote=False), x=0.5, y=0.5, xref="paper", yref="paper",
                       showarrow=False, font=dict(size=14, color=_fig.INK))
    fig.update_layout(template="none", height=height, paper_bgcolor="white", plot_bgcolor="white",
                      margin=dict(l=20, r=20, t=20, b=20))
    fig.update_xaxes(visible=False)
    fig.update_yaxes(visible=False)
    return fig


def subgroups_figure(tree, table: pd.DataFrame, *, highlight, densities: bool) -> go.Figure:
    """Subgroup effects with intervals at the tree's current depth; ``highlight`` node id(s) or None."""
    draws = None
    if densities:
        mat = tree.leaf_draws
        draws = {int(sid): mat[:, j] for j, sid in enumerate(tree.leaf_ids)}
    return _fig.subgroups_figure(table, highlight=highlight, draws=draws, effect_label=tree.label)


def fit_figure(fit_table: pd.DataFrame, fit_draws: dict, *, current_depth: int) -> go.Figure:
    """Posterior of summary R^2 at every depth, the current one marked."""
    return _fig.fit_by_depth_figure(fit_table, fit_draws, current_depth=current_depth)


def trends_figure(curves: pd.DataFrame, covariate: str, *, label: str) -> go.Figure:
    """One covariate's additive curve with pointwise and simultaneous bands."""
    return _fig.curves_figure(curves, covariate=covariate, effect_label=label)


def coefficients_figure(table: pd.DataFrame) -> go.Figure:
    """Linear-summary coefficients with intervals (intercept left out)."""
    return _fig.coefficients_figure(table)


def contrasts_figure(contrasts: pd.DataFrame, subgroup, *, weak=()) -> go.Figure:
    """The selected subgroup minus each other subgroup; ``weak`` the ids flagged for weak uptake."""
    return _fig.contrasts_figure(contrasts, subgroup, weak=weak)


def table_html(table: pd.DataFrame, *, selected_rows=(), css_scope: str) -> str:
    """The subgroup table as escaped HTML, the selected row shaded.

    Parameters
    ----------
    table : DataFrame
        ``TreeSummary.table()`` output.
    selected_rows : sequence of int, default ()
        0-based rows to shade (the selected subgroup, or those inside a selected inner node).
    css_scope : str
        A class name unique to this widget, so the style applies to its own table only.
    """
    scope = html.escape(css_scope)
    accent = rgba(_fig.ACCENT, 0.14)
    style = [
        f".{scope} table {{border-collapse: collapse; font-size: 13px; margin: 4px 0;}}",
        f".{scope} th, .{scope} td {{padding: 3px 10px; border-bottom: 1px solid {_fig.GRID};}}",
        f".{scope} thead th {{border-bottom: 2px solid {_fig.INK}; text-align: left;}}",
        f".{scope} .sw-r {{text-align: right; font-variant-numeric: tabular-nums;}}",
        f".{scope} .sw-c {{text-align: center; font-variant-numeric: tabular-nums; white-space: nowrap;}}",
        f".{scope} .sw-rule {{max-width: 520px;}}",
        f".{scope} caption {{caption-side: top; text-align: left; font-weight: 600; padding: 4px 0;}}",
        f".{scope} .sw-note {{font-size: 12px; color: #555; margin: 2px 0;}}",
    ]
    for row in selected_rows:
        style.append(f".{scope} tbody tr:nth-child({int(row) + 1}) {{background: {accent}; font-weight: 600;}}")
    body = to_html(table, caption="Subgroups at the chosen depth")
    return f'<div class="{scope}"><style>{" ".join(style)}</style>{body}</div>'


def status_html(text: str, *, tone: str = "info") -> str:
    """One escaped status line; ``tone`` is "info", "busy" or "error"."""
    colours = {"info": "#444444", "busy": _fig.BAND, "error": "#9b1c1c"}
    if tone not in colours:
        raise ValueError(f"`tone` must be one of {sorted(colours)}; got {tone!r}.")
    weight = "600" if tone == "error" else "400"
    role = ' role="alert"' if tone == "error" else ""
    return (f'<div class="swx-status swx-status-{tone}"{role} style="color:{colours[tone]};font-weight:{weight};'
            f'font-size:13px;line-height:1.4">{html.escape(text)}</div>')


def header_html(title: str, detail: str) -> str:
    """The explorer's heading: what the values are (escaped), then a smaller detail line."""
    return (f'<div class="swx-header" style="line-height:1.35;margin-bottom:4px">'
            f'<span style="font-size:15px;font-weight:600;color:{_fig.INK}">{html.escape(title)}</span> '
            f'<span style="font-size:13px;color:#555">{html.escape(detail)}</span></div>')


def _decimals(max_abs: float, digits: int = 3) -> int:
    """Decimals giving the largest magnitude ``digits`` significant digits (js/tree_view.js decimalsFor)."""
    if not np.isfinite(max_abs) or max_abs == 0:
        return digits - 1
    mag = int(np.floor(np.log10(abs(max_abs))))
    decimals = max(0, digits - 1 - mag)
    rounded = abs(float(f"{abs(max_abs):.{decimals}f}"))
    # Rounding can carry into a new digit (9.996 -> 10.0).
    if rounded > 0 and decimals > 0 and int(np.floor(np.log10(rounded))) > mag:
        decimals -= 1
    return min(decimals, 20)


def _fixed(x: float, decimals: int) -> str:
    if x is None or not np.isfinite(x):
        return "n/a"
    text = f"{abs(x):,.{decimals}f}"
    if float(text.replace(",", "")) == 0:
        return text
    return (MINUS if x < 0 else "") + text


def estimate_text(mean: float, lower: float, upper: float, digits: int = 3) -> str:
    """``"mean [lower, upper]"`` with shared decimals and true minus signs, as the tree view prints it."""
    finite = [abs(v) for v in (mean, lower, upper) if v is not None and np.isfinite(v)]
    d = _decimals(max(finite) if finite else 0.0, digits)
    return f"{_fixed(mean, d)} [{_fixed(lower, d)}, {_fixed(upper, d)}]"


def vmax_of(values) -> float:
    """Largest finite |value| (0 when there is none): the colour limit figures use."""
    v = np.abs(np.asarray(values, dtype=float))
    v = v[np.isfinite(v)]
    return float(v.max()) if v.size else 0.0
