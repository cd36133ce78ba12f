"""Figures: a summary result in, a plotly figure out; static SVG/PDF/PNG export (from _static_export).

Every ``plot_*`` function is a thin wrapper: it asks the result for its table
(DataFrame of raw numbers, see DEVELOPERS.md) and hands it to a ``_*_figure``
builder that only draws. The builders never touch the draws matrix, so the
widget can redraw from stored tables without a pass over the draws.

Colours are defined once here (``PALETTE``, ``DIVERGING``, ``INK``, ``ACCENT``,
:func:`effect_color`) so the JavaScript tree view and the widget can reuse them.
Every piece of text that comes from the data (covariate names, categories,
rules) is HTML-escaped before it reaches plotly, which renders a subset of HTML
in labels and hover text.
"""
from __future__ import annotations

import html
import textwrap
from collections.abc import Mapping

import numpy as np
import pandas as pd
import plotly.graph_objects as go
from plotly.subplots import make_subplots

from ..core import numbers as N
from ..core.rules import rule_text
from ..core.validate import SummaryError
from ..export.layout import subgroup_texts
from ..summaries.additive import AdditiveSummary
from ..summaries.groups import ALL_UNITS, GroupSummary
from ..summaries.linear import LinearSummary
from ..summaries.tree import TreeSummary

__all__ = [
    "PALETTE", "DIVERGING", "EFFECT_PALETTE", "INK", "ACCENT", "MUTED", "GRID", "BAND",
    "effect_color", "effect_colorscale",
    "plot_subgroups", "plot_fit_by_depth", "plot_curves", "plot_coefficients", "plot_contrasts",
    "save_figure", "save_figures", "find_browser", "BrowserNotFoundError",
]

from .palette import (ACCENT, BAND, DIVERGING, EFFECT_PALETTE, FONT as _FONT, GRID, INK, MUTED,  # noqa: F401
                      PALETTE, benefit_sign, effect_color, effect_colorscale, rgba as _rgba)


# -- text ------------------------------------------------------------------------------------
def _esc(text) -> str:
    """Escape < > & so plotly shows data text literally instead of rendering it as markup."""
    return html.escape(str(text), quote=False)


def _wrap(text, width: int = 40) -> str:
    """Escaped text broken into lines of about ``width`` characters (plotly's <br>).

    Comparison operators are typeset (``<=`` as ≤, ``>=`` as ≥) so rules read as in print.
    """
    text = str(text).replace("<=", "\u2264").replace(">=", "\u2265")
    # Break between the conditions of a rule ("a and b and c") first, so no condition is split
    # across lines unless it is longer than a line by itself.
    lines: list[str] = []
    for part in text.split(" and "):
        if lines and len(lines[-1]) + 5 + len(part) <= width:
            lines[-1] += " and " + part
            continue
        if lines:
            lines[-1] += " and"
        lines += textwrap.wrap(part, width=width, break_long_words=False, break_on_hyphens=False) or [""]
    return "<br>".join(_esc(line) for line in lines)


def _rule(rule, width: int = 40) -> str:
    """A tree rule as the tables print it (core.rules.rule_text: "and", "∈", ≤), escaped and wrapped."""
    return _wrap(rule_text(rule), width)


_SMALL = "<br><span style='font-size:11px;color:#6b6e73'>{}</span>"


def _effect_title(attrs: Mapping, effect_label, what: str) -> str:
    """Axis title of an effect: its label, its unit (``draws.unit``), then ``what`` in parentheses."""
    name = _esc(effect_label or attrs.get("label") or "Effect")
    unit = attrs.get("unit")
    head = f"{name}, {_esc(unit)}" if unit else name
    # plotly never wraps a title: a long one is broken before its parenthesis, so it stays on the page
    return f"{head}<br>({what})" if len(head) + len(what) > 80 else f"{head} ({what})"


def _direction_note(attrs: Mapping) -> str | None:
    """The figure note on which direction is better (``draws.better``) and what the colours mean."""
    better = attrs.get("better")
    if better == "lower":
        return "Lower (more negative) values are better; warm colours mark the better direction."
    if better == "higher" and attrs.get("unit"):
        return "Higher values are better; warm colours mark the better direction."
    return None


def _signed_values(values, attrs: Mapping) -> np.ndarray:
    """Values turned so that "better" is positive (the warm end of the effect scale)."""
    return benefit_sign(attrs.get("better")) * np.asarray(values, dtype=float)


def _padded_range(*arrays, pad: float = 0.04) -> list[float]:
    """Axis range over the finite values (and zero, so the zero line is always in view), padded."""
    vals = np.concatenate([np.ravel(np.asarray(a, dtype=float)) for a in arrays] + [np.zeros(1)])
    vals = vals[np.isfinite(vals)]
    lo, hi = float(vals.min()), float(vals.max())
    span = (hi - lo) or 1.0
    return [lo - pad * span, hi + pad * span]


def _level_text(attrs: Mapping, level: float | None = None) -> str:
    level = attrs.get("level", level)
    kind = attrs.get("interval", "equal-tailed")
    pct = f"{100 * level:g}%" if level is not None else ""
    return f"{pct} {'highest-density' if kind == 'highest-density' else 'credible'} interval".strip()


def _number_texts(d: pd.DataFrame, value: str, prob: str) -> list:
    """``value``, its interval and ``prob`` as every table prints them (core/numbers.py: digits from
    the numbers' size and Monte Carlo error, probabilities with ``<0.001``-style ends), for hovers."""
    dec, di = N.effect_decimals(d, value)
    n = d.attrs.get("n_draws")
    return [[N.fixed(v, dec) for v in d[value]],
            [N.interval(lo, hi, di) for lo, hi in zip(d["lower"], d["upper"])],
            [N.probability(p, n_draws=int(n) if n else None) for p in d[prob]]]


def _require(df, columns, name: str) -> pd.DataFrame:
    if not isinstance(df, pd.DataFrame):
        raise SummaryError(f"`{name}` must be a pandas DataFrame; got {type(df).__name__}.")
    missing = [c for c in columns if c not in df.columns]
    if missing:
        raise SummaryError(
            f"`{name}` lacks the column(s) {', '.join(repr(c) for c in missing)}; "
            f"it has {', '.join(repr(str(c)) for c in df.columns)}."
        )
    if len(df) == 0:
        raise SummaryError(f"`{name}` has no rows; there is nothing to draw.")
    return df


# -- shared drawing pieces -------------------------------------------------------------------
_TOP, _TOP_BARE, _BOTTOM = 70, 30, 64  # px margins: with a title, without one, below the plot


_AXIS = dict(showgrid=True, gridcolor=GRID, zeroline=False, showline=True, linecolor=MUTED, ticks="outside",
             tickcolor=MUTED, automargin=True)
#: The dotted zero line of an effect axis (a shape, cheaper than plotly's add_vline helper).
_ZERO_X = dict(type="line", xref="x", yref="paper", x0=0, x1=0, y0=0, y1=1, line=dict(color=INK, width=1, dash="dot"))


def _layout(*, title=None, title_markup: str | None = None, height=None, legend: bool = False,
            top: int | None = None) -> dict:
    """House layout. ``title`` is plain text (escaped); ``title_markup`` is our own markup."""
    title = title_markup or (_esc(title) if title else None)
    return dict(
        template="none",
        font=dict(family=_FONT, size=13, color=INK),
        title=dict(text=title, x=0.01, xanchor="left", font=dict(size=16)) if title else None,
        paper_bgcolor="white", plot_bgcolor="white",
        margin=dict(l=20, r=30, t=top or (_TOP if title else _TOP_BARE), b=_BOTTOM),
        height=None if height is None else int(round(height)),
        showlegend=legend,
        legend=dict(orientation="h", yref="container", yanchor="top", y=0.99, xanchor="right", x=1.0,
                    traceorder="normal", bgcolor="rgba(0,0,0,0)"),
        hoverlabel=dict(bgcolor="white", bordercolor=INK, font=dict(family=_FONT, color=INK)),
    )


def _kde(values: np.ndarray, grid: np.ndarray, n_bins: int = 512) -> np.ndarray:
    """Gaussian kernel density of ``values`` at ``grid``, Scott's bandwidth (scipy's default).

    The draws are first binned (``n_bins`` equal bins over their range) and the kernel is
    summed over bin centres: O(n_draws + n_bins * n_grid) instead of O(n_draws * n_grid), so
    densities for thousands of draws stay interactive. With the bandwidth several bins wide
    the binning error is far below what a figure shows (tests compare with scipy's exact KDE).
    """
    n = values.size
    h = values.std(ddof=1) * n ** (-1 / 5)  # Scott (1992): sigma * n^(-1/(d+4)), d = 1
    counts, edges = np.histogram(values, bins=n_bins)
    centres = (edges[:-1] + edges[1:]) / 2
    keep = counts > 0
    z = (grid[:, None] - centres[keep][None, :]) / h
    return np.exp(-0.5 * z * z) @ counts[keep] / (n * h * np.sqrt(2 * np.pi))


def _density_outline(values: np.ndarray, centre: float, half_width: float, *, vertical: bool, n_grid: int = 96):
    """Closed violin outline around ``centre`` from a Gaussian KDE of ``values``.

    Returns (x, y) arrays, or None when the values do not vary (a KDE of a constant is
    undefined). The outline spans the range of the values.
    """
    v = np.asarray(values, dtype=float)
    v = v[np.isfinite(v)]
    if v.size < 2 or np.ptp(v) <= 1e-12 * max(1.0, float(np.abs(v).max())):
        return None
    grid = np.linspace(v.min(), v.max(), n_grid)
    dens = _kde(v, grid)
    h = half_width * dens / dens.max()
    along = np.concatenate([grid, grid[::-1], grid[:1]])
    across = np.concatenate([centre + h, centre - h[::-1], [centre + h[0]]])
    return (across, along) if vertical else (along, across)


#: Half-width of a violin as a share of the (smallest) row height or depth spacing.
_VIOLIN_SHARE = 0.4


def _violins(groups, *, vertical: bool, half_width: float, color=INK):
    """One scatter trace holding every violin (NaN-separated polygons, filled)."""
    xs, ys = [], []
    gap = np.array([np.nan])  # NaN breaks the path: each violin is its own filled polygon
    for centre, values in groups:
        outline = _density_outline(values, centre, half_width, vertical=vertical)
        if outline is None:
            continue
        xs += [outline[0], gap]
        ys += [outline[1], gap]
    if not xs:
        return None
    # numpy arrays (not lists) keep plotly's validation and JSON encoding fast
    return go.Scatter(x=np.concatenate(xs), y=np.concatenate(ys), mode="lines", fill="toself", fillcolor=_rgba(color, 0.13),
                      line=dict(color=_rgba(color, 0.45), width=1), hoverinfo="skip", showlegend=False,
                      name="posterior density")


def _interval_rows(df, pos, *, value, color, fill, size, symbol="circle", custom, hover, name):
    """Horizontal points with interval whiskers (lower/upper columns) at y positions ``pos``."""
    if len(df) == 0:
        return None
    x = df[value].to_numpy(float)
    return go.Scatter(
        x=x, y=pos, mode="markers", name=name, showlegend=False,
        marker=dict(size=size, color=fill, symbol=symbol, line=dict(color=color, width=1.5)),
        error_x=dict(type="data", symmetric=False, array=df["upper"].to_numpy(float) - x,
                     arrayminus=x - df["lower"].to_numpy(float), color=color, thickness=2, width=0),
        customdata=custom, hovertemplate=hover,
    )


def _rows(labels) -> tuple[np.ndarray, np.ndarray]:
    """Row centres and heights, in pixels from the bottom: a row is as tall as its label needs."""
    heights = np.array([max(30, 16 * (lab.count("<br>") + 1) + 14) for lab in labels], dtype=float)
    return np.cumsum(heights) - heights / 2, heights


def _row_figure(traces, *, labels, pos, heights, x_title: str, x_range, shapes=(), extra_height: int = 0,
                top: int | None = None, **title) -> go.Figure:
    """A figure with one labelled row per item: tick labels at the row centres, the y axis
    spanning the rows exactly (1 unit = 1 pixel), a zero line; built in one step because
    plotly's incremental update helpers dominate the cost of small figures."""
    has_title = bool(title.get("title") or title.get("title_markup"))
    layout = _layout(height=heights.sum() + (top or (_TOP if has_title else _TOP_BARE)) + _BOTTOM + extra_height,
                     top=top, **title)
    layout["xaxis"] = dict(_AXIS, title=dict(text=x_title), range=x_range)
    layout["yaxis"] = dict(_AXIS, tickmode="array", tickvals=pos, ticktext=labels, range=[0, float(heights.sum())],
                           showgrid=False, ticks="", showline=False)
    layout["shapes"] = [*shapes, _ZERO_X]
    return go.Figure(data=[t for t in traces if t is not None], layout=layout)


# -- subgroup effects ------------------------------------------------------------------------
_SUBGROUP_COLS = ["subgroup", "rule", "n_units", "share", "mean", "lower", "upper", "prob_positive"]


def subgroups_figure(df: pd.DataFrame, *, highlight=None, draws: Mapping | None = None, pinned=(),
                      effect_label: str | None = None, title: str | None = None) -> go.Figure:
    """Horizontal point + interval per subgroup, ordered by posterior mean (largest on top).

    Parameters
    ----------
    df : DataFrame
        The subgroup table (columns ``subgroup, rule, n_units, share, mean, lower, upper,
        prob_positive``; ``attrs`` may hold ``level``, ``interval``, ``label``).
    highlight : subgroup id or list of ids, optional
        Drawn in ``ACCENT`` with a shaded row (several: the subgroups inside a selected
        inner node of the tree).
    draws : mapping subgroup id -> ndarray (n_draws,), optional
        Posterior draws per subgroup, drawn as violins behind the intervals.
    pinned : sequence of subgroup ids
        Rows kept on top in the given order (for example "All units"), drawn as diamonds
        and separated by a dotted line.

    Notes
    -----
    Complier-weighted tables flag subgroups whose complier share may be near zero
    (``weak_uptake``): their ratio is unstable, so the effect axis and the colour range
    are set by the other subgroups; a flagged interval reaching beyond the axis is
    drawn cut at its edge with an arrow, and its numbers are written beside it.
    """
    df = _require(df, _SUBGROUP_COLS, "table")
    ids = df["subgroup"].tolist()
    marked = _as_list(highlight)
    for h in marked:
        if h not in ids:
            raise SummaryError(f"`highlight` {h!r} is not one of the subgroups: {ids}.")
    for p in pinned:
        if p not in ids:
            raise SummaryError(f"`pinned` {p!r} is not one of the subgroups: {ids}.")
    if pinned:
        rest = df[~df["subgroup"].isin(list(pinned))].sort_values("mean", kind="stable")
        top = df.set_index("subgroup").loc[list(pinned)[::-1]].reset_index()
        ordered = pd.concat([rest, top], ignore_index=True)  # bottom to top
    else:  # no concatenation: with text columns it was most of a small figure's cost
        rest = df.sort_values("mean", kind="stable")
        top = df.iloc[:0]
        ordered = rest.reset_index(drop=True)
    n = len(ordered)

    labels = []
    compliers = "uptake_share" in ordered.columns
    has_complier_share = "complier_share" in ordered.columns
    texts = subgroup_texts(ordered)  # the tables' digits, chosen once for the whole table
    for r in ordered.itertuples():
        # Named groups (string ids) show their name, with the query in small print; tree
        # subgroups (node ids) show their rule.
        named = isinstance(r.subgroup, str)
        if named:
            lab = _wrap(r.subgroup, 42)
        else:  # the tree's printed label (S1 .. Sk, as in every table), then its rule
            tag = getattr(r, "label", None)
            lab = (f"<b>{_esc(tag)}</b>: " if tag else "") + _rule(r.rule, 42)
        if r.subgroup in marked:
            lab = f"<span style='color:{ACCENT}'><b>{lab}</b></span>"
        # Complier-weighted tables: `share` is the share of units, `complier_share` that of compliers.
        t = texts.loc[r.Index]
        small = (f"n = {t['n_text']} \u00b7 {t['share_text']} of units \u00b7 {t['complier_share_text']} of compliers"
                 if compliers and has_complier_share else f"n = {t['n_text']} ({t['share_text']})")
        if named and r.subgroup not in pinned and str(r.rule).strip():
            small = f"{_wrap(r.rule, 60)}<br>{small}"
        if bool(getattr(r, "weak_uptake", False)):  # complier-weighted: the ratio's denominator is near 0
            small += f" <span style='color:{PALETTE[5]}'><b>weak uptake: unstable</b></span>"
        labels.append(f"{lab}<br><span style='font-size:11px;color:#6b6e73'>{small}</span>")
    pos, heights = _rows(labels)

    traces, shapes = [], []
    for k in np.flatnonzero(ordered["subgroup"].isin(marked).to_numpy()):
        shapes.append(dict(type="rect", xref="paper", yref="y", x0=0, x1=1, y0=pos[k] - heights[k] / 2,
                           y1=pos[k] + heights[k] / 2, fillcolor=_rgba(ACCENT, 0.10), line_width=0, layer="below"))
    if len(top):
        y = float(heights[:len(rest)].sum())
        shapes.append(dict(type="line", xref="paper", yref="y", x0=0, x1=1, y0=y, y1=y,
                           line=dict(color=MUTED, width=1, dash="dot")))
    if draws is not None:
        missing = [s for s in ids if s not in draws]
        if missing:
            raise SummaryError(f"`draws` has no posterior draws for subgroup(s) {missing}.")
        traces.append(_violins([(pos[i], draws[s]) for i, s in enumerate(ordered["subgroup"])], vertical=False,
                               half_width=_VIOLIN_SHARE * heights.min()))

    level = _level_text(df.attrs)
    steady = ~_weak_mask(ordered)
    basis = ordered[steady] if steady.any() else ordered
    vmax = float(np.nanmax(np.abs(basis["mean"].to_numpy(float)))) if n else 0.0
    turned = _signed_values(ordered["mean"], df.attrs)
    x_range = _padded_range(basis["lower"], basis["upper"],
                            *([draws[s] for s in basis["subgroup"]] if draws is not None else []))
    shown, clip_traces, notes = _clip_to_axis(ordered, "mean", pos, heights, x_range)
    # The numbers as every table prints them (one formatter) follow the numeric columns (and uptake).
    m, i, p, c = (f"%{{customdata[{k}]}}" for k in range(7 + compliers, 11 + compliers))
    hover = (f"<b>%{{customdata[0]}}</b><br>posterior mean {m}<br>{level} {i}<br>P(effect > 0) = {p}"
             "<br>%{customdata[1]:,} units (%{customdata[2]:.1%} of units)")
    if compliers and has_complier_share:
        hover += f"; {c} of all compliers"
    columns = [[_wrap(r, 60) if isinstance(g, str) else _rule(r, 60) for g, r in zip(ordered["subgroup"], ordered["rule"])],
               ordered["n_units"].astype(int),
               ordered["share"].astype(float), ordered["lower"].astype(float),
               ordered["upper"].astype(float), ordered["prob_positive"].astype(float), ordered["mean"].astype(float)]
    if "uptake_share" in ordered.columns:  # complier-weighted draws
        hover += "<br>uptake in this subgroup (its complier share) %{customdata[7]:.1%}"
        columns.append(ordered["uptake_share"].astype(float))
    columns += [texts[name] for name in ("mean_text", "interval_text", "prob_text", "complier_share_text")]
    hover += "<extra></extra>"
    custom = np.column_stack(columns).astype(object)
    is_marked = ordered["subgroup"].isin(marked).to_numpy()
    is_pinned = ordered["subgroup"].isin(list(pinned)).to_numpy()
    groups = {
        "subgroups": ~is_pinned & ~is_marked,
        "pinned": is_pinned & ~is_marked,
        "highlight": is_marked,
    }
    for name, mask in groups.items():
        sub = shown[mask]
        colour = ACCENT if name == "highlight" else INK
        fill = effect_color(turned[mask], vmax) if name != "pinned" else "white"
        traces.append(_interval_rows(sub, pos[mask], value="mean", color=colour, fill=fill,
                                     size=13 if name == "highlight" else 10,
                                     symbol="diamond" if name == "pinned" else "circle",
                                     custom=custom[mask], hover=hover, name=name))
    note = _direction_note(df.attrs)
    x_title = _effect_title(df.attrs, effect_label, f"mean and {level}") + (_SMALL.format(_esc(note)) if note else "")
    fig = _row_figure(
        traces + clip_traces, labels=labels, pos=pos, heights=heights, shapes=shapes, title=title,
        x_title=x_title, x_range=x_range, extra_height=16 * x_title.count("<br>"))
    if notes:
        fig.layout.annotations = list(fig.layout.annotations) + notes
    return fig


def _as_list(highlight) -> list:
    """``highlight`` as a list of subgroup ids (None: none; a string or number is one id)."""
    if highlight is None:
        return []
    if isinstance(highlight, (list, tuple, set, frozenset, np.ndarray, pd.Series, pd.Index)):
        return [h.item() if isinstance(h, np.generic) else h for h in highlight]
    return [highlight.item() if isinstance(highlight, np.generic) else highlight]


def _weak_mask(df: pd.DataFrame) -> np.ndarray:
    """Rows flagged for weak uptake (all False when the table has no such column)."""
    if "weak_uptake" not in df.columns:
        return np.zeros(len(df), bool)
    return df["weak_uptake"].fillna(False).astype(bool).to_numpy()


def _clip_to_axis(d: pd.DataFrame, value: str, pos, heights, x_range):
    """Rows whose interval leaves ``x_range`` drawn cut at its edge: an arrow there, numbers in text.

    Returns the table to draw (``value``, ``lower``, ``upper`` clamped to the axis), a list
    with one trace of edge arrows (empty if nothing is cut) and a list of annotations.
    """
    lo, hi = x_range
    values = d[[value, "lower", "upper"]].to_numpy(float)
    dv, di = N.effect_decimals(d, value)  # the tables' digits (core.numbers), so the note reads as the table
    out = d.copy()
    out[[value, "lower", "upper"]] = np.clip(values, lo, hi)
    arrows_x, arrows_y, symbols, notes = [], [], [], []
    for i, (m, low, up) in enumerate(values):
        if not (low < lo or up > hi or m < lo or m > hi):
            continue
        if low < lo:
            arrows_x.append(lo)
            arrows_y.append(pos[i])
            symbols.append("triangle-left")
        if up > hi:
            arrows_x.append(hi)
            arrows_y.append(pos[i])
            symbols.append("triangle-right")
        right = up > hi and not low < lo or m > hi
        notes.append(dict(
            x=hi if right else lo, y=pos[i] + 0.28 * heights[i], xref="x", yref="y", showarrow=False,
            xanchor="right" if right else "left", yanchor="middle",
            text=f"{N.fixed(m, dv)} {N.interval(low, up, di)}: beyond the axis",
            font=dict(size=11, color=PALETTE[5]), bgcolor="rgba(255,255,255,0.85)"))
    if not arrows_x:
        return out, [], notes
    arrows = go.Scatter(x=arrows_x, y=arrows_y, mode="markers", name="cut at the axis", showlegend=False,
                        marker=dict(symbol=symbols, size=12, color=PALETTE[5], line=dict(color="white", width=1)),
                        hoverinfo="skip")
    return out, [arrows], notes


def plot_subgroups(result, *, level: float = 0.95, interval: str = "equal-tailed", highlight=None,
                   show_draws: bool = False, title: str | None = None) -> go.Figure:
    """Subgroup effects with credible intervals, one row per subgroup, ordered by mean.

    Parameters
    ----------
    result : TreeSummary or GroupSummary
        Anything with ``.table(level=, interval=)`` returning the subgroup table.
    level : float, default 0.95
        Credible level of the intervals.
    interval : {"equal-tailed", "highest-density"}, default "equal-tailed"
    highlight : subgroup id, optional
        The subgroup drawn in the accent colour (a node id for a tree, a label for groups).
    show_draws : bool, default False
        Draw the posterior density of every subgroup behind its interval (a tree's ``.leaf_draws``,
        a group summary's ``.group_draws``).
    title : str, optional

    Returns
    -------
    plotly.graph_objects.Figure
    """

    _check_type(result, (TreeSummary, GroupSummary), "result")
    df = result.table(level=level, interval=interval)
    draws = None
    if show_draws:
        if isinstance(result, TreeSummary):
            mat, ids = np.asarray(result.leaf_draws), _as_ids(result.leaf_ids)
        else:
            mat, ids = np.asarray(result.group_draws), list(result.labels)
        draws = {sid: mat[:, j] for j, sid in enumerate(ids)}
    pinned = [ALL_UNITS] if isinstance(result, GroupSummary) and ALL_UNITS in df["subgroup"].tolist() else []
    if isinstance(highlight, np.generic):
        highlight = highlight.item()
    return subgroups_figure(df, highlight=highlight, draws=draws, pinned=pinned,
                             effect_label=getattr(result, "label", None), title=title)


def _check_type(obj, types, name: str) -> None:
    if not isinstance(obj, types):
        types = types if isinstance(types, tuple) else (types,)
        want = " or ".join(("an " if t.__name__[0] in "AEIOU" else "a ") + t.__name__ for t in types)
        raise SummaryError(f"`{name}` must be {want}; got {type(obj).__name__}.")


def _as_ids(ids) -> list:
    return [i.item() if isinstance(i, np.generic) else i for i in ids]


# -- summary R^2 by depth --------------------------------------------------------------------
_FIT_COLS = ["depth", "n_subgroups", "mean", "lower", "upper"]


def fit_by_depth_figure(summary: pd.DataFrame, draws_by_depth: Mapping | None = None, *,
                         current_depth: int | None = None, title: str | None = None) -> go.Figure:
    """Posterior of summary R^2 at each depth: violin of the draws, mean and credible interval.

    Parameters
    ----------
    summary : DataFrame
        ``fit_r2_by_depth()`` output: ``depth, n_subgroups, mean, lower, upper``.
    draws_by_depth : mapping depth -> ndarray (n_draws,), optional
        Per-draw summary R^2 (NaN draws are ignored), drawn as violins.
    current_depth : int, optional
        The depth in use, drawn in ``ACCENT``.
    """
    summary = _require(summary, _FIT_COLS, "summary").sort_values("depth")
    depths = summary["depth"].astype(int).tolist()
    if current_depth is not None and current_depth not in depths:
        raise SummaryError(f"`current_depth` {current_depth!r} is not one of the depths {depths}.")
    traces = []
    if draws_by_depth is not None:
        missing = [d for d in depths if d not in draws_by_depth]
        if missing:
            raise SummaryError(f"`draws_by_depth` has no draws for depth(s) {missing}.")
        traces.append(_violins([(float(d), draws_by_depth[d]) for d in depths], vertical=True,
                               half_width=_VIOLIN_SHARE * 0.9))
    level = _level_text(summary.attrs)
    x = summary["depth"].to_numpy(float)
    m = summary["mean"].to_numpy(float)
    is_cur = summary["depth"].to_numpy() == current_depth
    colours = [ACCENT if c else INK for c in is_cur]
    custom = summary[["n_subgroups", "lower", "upper"]].to_numpy(float)
    traces.append(go.Scatter(
        x=x, y=m, mode="markers", showlegend=False, name="summary R²",
        marker=dict(size=[13 if c else 10 for c in is_cur], color="white", line=dict(color=colours, width=2)),
        error_y=dict(type="data", symmetric=False, array=summary["upper"].to_numpy(float) - m,
                     arrayminus=m - summary["lower"].to_numpy(float), color=INK, thickness=2.5, width=0),
        customdata=custom,
        hovertemplate=("depth %{x}, %{customdata[0]:.0f} subgroups<br>summary R² mean %{y:.3f}<br>"
                       + level + " [%{customdata[1]:.3f}, %{customdata[2]:.3f}]<extra></extra>"),
    ))
    ticks = [f"<b>{d}</b>" if d == current_depth else str(d) for d in depths]
    ticks = [f"{t}<br><span style='font-size:11px;color:#6b6e73'>{int(k)} subgroups</span>"
             for t, k in zip(ticks, summary["n_subgroups"])]
    lo = min(0.0, float(np.nanmin(summary["lower"])))
    layout = _layout(title=title, height=420)
    layout["xaxis"] = dict(_AXIS, title=dict(text="Tree depth"), tickmode="array", tickvals=x, ticktext=ticks,
                           range=[x.min() - 0.6, x.max() + 0.6], showgrid=False)
    layout["yaxis"] = dict(_AXIS, title=dict(text=f"Summary R² (mean and {level})"), range=[lo - 0.02, 1.02])
    return go.Figure(data=[t for t in traces if t is not None], layout=layout)


def plot_fit_by_depth(tree, *, level: float = 0.95, interval: str = "equal-tailed", show_draws: bool = True,
                      current_depth: int | None = None, title: str | None = None) -> go.Figure:
    """Posterior of summary R^2 at every depth of a summary tree.

    Parameters
    ----------
    tree : TreeSummary
    level : float, default 0.95
    interval : {"equal-tailed", "highest-density"}, default "equal-tailed"
    show_draws : bool, default True
        Draw the posterior density (violin) of each depth's summary R^2.
    current_depth : int, optional
        Depth to highlight; default ``tree.current_depth``.
    title : str, optional

    Returns
    -------
    plotly.graph_objects.Figure
    """

    _check_type(tree, TreeSummary, "tree")
    summary = tree.fit_r2_by_depth(level=level, interval=interval)
    draws = tree.fit_r2_draws_by_depth() if show_draws else None
    if current_depth is None:
        current_depth = getattr(tree, "depth", None)
    return fit_by_depth_figure(summary, draws, current_depth=current_depth, title=title)


# -- additive curves -------------------------------------------------------------------------
_CURVE_COLS = ["covariate", "covariate_type", "x", "mean", "lower", "upper", "lower_joint", "upper_joint"]
# Pointwise band over the simultaneous band: the two alphas stack to a visibly darker core.
_POINTWISE_FILL = _rgba(BAND, 0.30)
_JOINT_FILL = _rgba(BAND, 0.13)
_HOVER_BANDS = "mean %{customdata[0]}<br>pointwise %{customdata[1]}<br>simultaneous %{customdata[2]}<extra></extra>"


def _curve_texts(d: pd.DataFrame) -> np.ndarray:
    """Hover texts of a curve as the tables print numbers (core/numbers.py): the mean, the pointwise
    and the simultaneous band, and x at its shortest decimal (4 significant digits at most)."""
    dec, di = N.effect_decimals(d, "mean")
    xs = [_esc(x) if not isinstance(x, (int, float, np.number)) else N.shortest(float(f"{float(x):.4g}")) for x in d["x"]]
    return np.column_stack([[N.fixed(v, dec) for v in d["mean"]],
                            [N.interval(a, b, di) for a, b in zip(d["lower"], d["upper"])],
                            [N.interval(a, b, di) for a, b in zip(d["lower_joint"], d["upper_joint"])],
                            xs]).astype(object)


def _add_curve(fig, d: pd.DataFrame, *, row_col):
    """Numeric covariate: simultaneous band (lighter), pointwise band, mean line."""
    d = d.assign(x=d["x"].astype(float)).sort_values("x")
    x = d["x"].to_numpy()
    for lo, hi, fill in (("lower_joint", "upper_joint", _JOINT_FILL), ("lower", "upper", _POINTWISE_FILL)):
        fig.add_trace(go.Scatter(x=x, y=d[lo], mode="lines", line=dict(width=0), hoverinfo="skip",
                                 showlegend=False), **row_col)
        fig.add_trace(go.Scatter(x=x, y=d[hi], mode="lines", line=dict(width=0), fill="tonexty",
                                 fillcolor=fill, hoverinfo="skip", showlegend=False), **row_col)
    fig.add_trace(go.Scatter(
        x=x, y=d["mean"], mode="lines", line=dict(color=BAND, width=2.5), name="posterior mean",
        showlegend=False, customdata=_curve_texts(d),
        hovertemplate="x = %{customdata[3]}<br>" + _HOVER_BANDS,
    ), **row_col)


def _add_categories(fig, d: pd.DataFrame, *, row_col):
    """Categorical covariate: a point per category, wide light bar (simultaneous), narrow darker bar (pointwise)."""
    cats = [_esc(c) for c in d["x"]]
    m = d["mean"].to_numpy(float)
    for lo, hi, colour, thick in (("lower_joint", "upper_joint", _rgba(BAND, 0.22), 10),
                                  ("lower", "upper", _rgba(BAND, 0.55), 4)):
        fig.add_trace(go.Scatter(
            x=cats, y=m, mode="markers", showlegend=False, hoverinfo="skip", marker=dict(size=1, opacity=0),
            error_y=dict(type="data", symmetric=False, array=d[hi].to_numpy(float) - m,
                         arrayminus=m - d[lo].to_numpy(float), color=colour, thickness=thick, width=0),
        ), **row_col)
    fig.add_trace(go.Scatter(
        x=cats, y=m, mode="markers", showlegend=False, name="posterior mean",
        marker=dict(size=10, color="white", line=dict(color=BAND, width=2.5)),
        customdata=_curve_texts(d),
        hovertemplate="%{x}<br>" + _HOVER_BANDS,
    ), **row_col)
    fig.update_xaxes(type="category", **row_col)


def _band_legend(fig, level: str):
    """Legend-only entries shared by curves and category bars (one legend for every panel)."""
    for name, colour, width in (("posterior mean", BAND, 2.5), (f"pointwise {level}", _rgba(BAND, 0.42), 10),
                                (f"simultaneous {level}", _rgba(BAND, 0.16), 10)):
        fig.add_trace(go.Scatter(x=[None], y=[None], mode="lines", line=dict(color=colour, width=width),
                                 name=name, hoverinfo="skip"))


def curves_figure(curves: pd.DataFrame, *, covariate=None, n_cols: int = 3, effect_label: str | None = None,
                   title: str | None = None) -> go.Figure:
    """Additive curves: one panel per covariate (shared effect axis), or one covariate alone.

    Parameters
    ----------
    curves : DataFrame
        ``curves()`` output: ``covariate, kind, x, mean, lower, upper, lower_joint, upper_joint``.
    covariate : str or list of str, optional
        Which covariate(s) to draw (default: all, in table order).
    n_cols : int, default 3
        Panels per row for small multiples.
    """
    curves = _require(curves, _CURVE_COLS, "curves")
    available = list(dict.fromkeys(curves["covariate"].tolist()))
    chosen = available if covariate is None else ([covariate] if isinstance(covariate, str) else list(covariate))
    unknown = [c for c in chosen if c not in available]
    if unknown or not chosen:
        raise SummaryError(f"`covariate` names {', '.join(repr(c) for c in unknown) or 'nothing'}; "
                           f"available: {', '.join(repr(c) for c in available)}.")
    if isinstance(n_cols, bool) or not isinstance(n_cols, (int, np.integer)) or n_cols < 1:
        raise SummaryError(f"`n_cols` must be an integer >= 1; got {n_cols!r}.")
    k = len(chosen)
    cols = min(int(n_cols), k)
    rows = -(-k // cols)
    panel, gap = (250 if k > 1 else 380), 70  # px per row of panels, px between rows (room for titles)
    plot_height = rows * panel + (rows - 1) * gap
    level = f"{100 * curves.attrs['level']:g}%" if "level" in curves.attrs else ""
    fig = make_subplots(rows=rows, cols=cols, shared_yaxes="all", horizontal_spacing=0.06 if cols > 1 else 0.0,
                        vertical_spacing=gap / plot_height if rows > 1 else 0.0,
                        subplot_titles=[_esc(c) for c in chosen] if k > 1 else None)
    for j, name in enumerate(chosen):
        d = curves[curves["covariate"] == name]
        row_col = dict(row=j // cols + 1, col=j % cols + 1)
        kinds = set(d["covariate_type"])
        if kinds - {"numeric", "categorical"} or len(kinds) != 1:
            raise SummaryError(f"`curves` column 'covariate_type' for covariate {name!r} must be one of "
                               f"'numeric' or 'categorical'; got {sorted(map(str, kinds))}.")
        add = _add_curve if kinds == {"numeric"} else _add_categories
        add(fig, d, row_col=row_col)
        fig.add_hline(y=0, line=dict(color=INK, width=1, dash="dot"), **row_col)
        if k == 1:
            fig.update_xaxes(title_text=_esc(name), **row_col)
    _band_legend(fig, level)
    label = _esc(effect_label or curves.attrs.get("label") or "Effect")
    if curves.attrs.get("unit"):
        label += f"<br>{_esc(curves.attrs['unit'])}"
    top = 90 if title else 60  # room for the legend above the panel titles
    fig.update_layout(**_layout(title=title, height=plot_height + top + _BOTTOM, legend=True, top=top))
    fig.update_xaxes(**_AXIS)
    fig.update_yaxes(**_AXIS)
    fig.update_annotations(font=dict(size=13, color=INK))
    for r in range(1, rows + 1):
        fig.update_yaxes(title_text=label if r == (rows + 1) // 2 else None, row=r, col=1)
    return fig


def plot_curves(additive, *, covariate=None, level: float = 0.95, interval: str = "equal-tailed",
                n_cols: int = 3, title: str | None = None) -> go.Figure:
    """Additive-summary curves with pointwise and simultaneous credible bands.

    Parameters
    ----------
    additive : AdditiveSummary
    covariate : str or list of str, optional
        One covariate (one panel) or several; default: every covariate as small multiples.
    level : float, default 0.95
    interval : {"equal-tailed", "highest-density"}, default "equal-tailed"
        Kind of the pointwise intervals.
    n_cols : int, default 3
        Panels per row.
    title : str, optional

    Returns
    -------
    plotly.graph_objects.Figure
        Numeric covariates: mean line, pointwise band, lighter simultaneous band.
        Categorical covariates: a point per category with both intervals.
    """

    _check_type(additive, AdditiveSummary, "additive")
    curves = additive.curves(level=level, interval=interval)
    if "level" not in curves.attrs:
        curves.attrs["level"] = level
    return curves_figure(curves, covariate=covariate, n_cols=n_cols,
                          effect_label=getattr(additive, "label", None), title=title)


# -- linear coefficients ---------------------------------------------------------------------
_COEF_COLS = ["term", "mean", "lower", "upper", "prob_positive"]
_INTERCEPT_NAMES = {"intercept", "(intercept)", "const"}


def _per_unit(table: pd.DataFrame, per) -> pd.DataFrame:
    """Coefficients of the terms in ``per`` multiplied by the given amounts (effect per that many units).

    Multiplying every draw by a positive constant multiplies its mean and quantiles by the same
    constant, so rescaling the table is exact; P(coefficient > 0) is unchanged.
    """
    if per is None:
        return table.assign(shown=table["term"].astype(str))
    if not isinstance(per, Mapping):
        raise SummaryError(f"`per` must be a mapping of term -> amount, like {{'age': 10}}; got {type(per).__name__}.")
    terms = table["term"].astype(str).tolist()
    unknown = [t for t in per if t not in terms]
    if unknown:
        raise SummaryError(f"`per` names term(s) {', '.join(repr(u) for u in unknown)} that are not in the table; "
                           f"terms: {', '.join(repr(t) for t in terms)}.")
    out = table.copy()
    out["shown"] = terms
    for term, amount in per.items():
        if isinstance(amount, bool) or not isinstance(amount, (int, float, np.integer, np.floating)) \
                or not np.isfinite(amount) or amount <= 0:
            raise SummaryError(f"`per[{term!r}]` must be a positive number; got {amount!r}.")
        rows = out["term"].astype(str) == term
        out.loc[rows, ["mean", "lower", "upper"]] *= float(amount)
        out.loc[rows, "shown"] = f"{term} (per {float(amount):g})"
    return out


def _standardized(table: pd.DataFrame) -> pd.DataFrame:
    """The coefficient table on the standardized scale (LinearSummary's ``std_*`` columns): numeric
    terms per SD of their covariate, switches per switch, the intercept at the covariates' means."""
    missing = [c for c in ("per_sd", "std_mean", "std_lower", "std_upper", "std_prob_positive") if c not in table.columns]
    if missing:
        raise SummaryError(f"`table` lacks the standardized column(s) {', '.join(repr(c) for c in missing)} "
                           "(LinearSummary.table() has them); pass `scale='unit'` to draw the per-unit coefficients.")
    out = table.copy()
    out[["mean", "lower", "upper", "prob_positive"]] = table[["std_mean", "std_lower", "std_upper",
                                                              "std_prob_positive"]].to_numpy(float)
    shown = []
    for term, sd in zip(out["term"].astype(str), out["per_sd"].astype(float)):
        if term.lower() in _INTERCEPT_NAMES:
            shown.append(f"{term} at the means")
        elif np.isfinite(sd):
            shown.append(f"{term} (per SD = {N.shortest(float(f'{sd:.3g}'))})")
        else:
            shown.append(term)
    out["shown"] = shown
    return out


_SCALES = ("sd", "unit")


def coefficients_figure(table: pd.DataFrame, *, intercept: bool = False, per=None, scale: str | None = None,
                         title: str | None = None) -> go.Figure:
    """Linear-summary coefficients: point + interval per term, in table order (first on top).

    ``scale="sd"`` (the default when the table has the standardized columns) draws each numeric
    covariate's coefficient per standard deviation of that covariate, category terms per switch
    from the reference, the intercept as the effect at the covariates' means and reference
    categories: slopes of covariates measured in years, rooms or currency share one readable axis.
    ``scale="unit"`` draws the coefficients per unit of each covariate; ``per`` then maps terms to
    amounts (for example ``{"age": 10}``: effect change per 10 years).
    """
    _require(table, _COEF_COLS, "table")
    if scale is None:
        scale = "unit" if per is not None or "std_mean" not in table.columns else "sd"
    if scale not in _SCALES:
        raise SummaryError(f"`scale` must be 'sd' or 'unit'; got {scale!r}.")
    if scale == "sd" and per is not None:
        raise SummaryError("`per` rescales per-unit coefficients; pass `scale='unit'` with it (the SD scale "
                           "already puts every numeric covariate on one footing).")
    table = _standardized(table) if scale == "sd" else _per_unit(table, per)
    if not intercept:
        table = table[~table["term"].astype(str).str.lower().isin(_INTERCEPT_NAMES)]
        if len(table) == 0:
            raise SummaryError("`table` holds only the intercept; pass `intercept=True` to draw it.")
    d = table.iloc[::-1].reset_index(drop=True)  # first term on top
    labels = [_wrap(t, 36) for t in d["shown"]]
    pos, heights = _rows(labels)
    level = _level_text(table.attrs)
    vmax = float(np.nanmax(np.abs(d["mean"].to_numpy(float))))
    custom = np.column_stack([labels, d["lower"].astype(float), d["upper"].astype(float),
                              d["prob_positive"].astype(float), *_number_texts(d, "mean", "prob_positive")]).astype(object)
    trace = _interval_rows(d, pos, value="mean", color=INK, fill=effect_color(_signed_values(d["mean"], table.attrs), vmax),
                           size=10, custom=custom, name="coefficients",
                           hover=("<b>%{customdata[0]}</b><br>posterior mean %{customdata[4]}<br>" + level +
                          " %{customdata[5]}<br>P(coefficient > 0) = %{customdata[6]}<extra></extra>"))
    unit = table.attrs.get("unit")
    x_title = _effect_title({"unit": unit}, "Coefficient", f"mean and {level}")
    notes = [("numeric covariates per standard deviation (SD, given in each label); categories per switch "
              "from the reference") if scale == "sd" else "per unit of each covariate"]
    reference = table.attrs.get("reference") or {}
    if reference:  # dummies are read against these categories
        notes.append("compared with " + "; ".join(f"{k} = {v}" for k, v in reference.items()))
    direction = _direction_note(table.attrs)
    if direction:
        notes.append(direction)
    for note in notes:
        x_title += _SMALL.format(_wrap(note, 110))
    return _row_figure([trace], labels=labels, pos=pos, heights=heights, title=title, x_title=x_title,
                       x_range=_padded_range(d["lower"], d["upper"]),
                       extra_height=16 * x_title.count("<br>"))


def plot_coefficients(linear, *, level: float = 0.95, interval: str = "equal-tailed", intercept: bool = False,
                      scale: str = "sd", per=None, title: str | None = None) -> go.Figure:
    """Linear-summary coefficients with credible intervals.

    Parameters
    ----------
    linear : LinearSummary
    level : float, default 0.95
    interval : {"equal-tailed", "highest-density"}, default "equal-tailed"
    intercept : bool, default False
        Also draw the intercept (on the SD scale: the effect at the covariates' means and
        reference categories).
    scale : {"sd", "unit"}, default "sd"
        "sd": each numeric covariate's coefficient per standard deviation of that covariate
        (weighted as in the fit; the label says how large one SD is); "unit": per unit.
    per : mapping of term -> float, optional
        With ``scale="unit"``: draw these coefficients per that many units of their covariate,
        e.g. ``{"baseline_bill": 100, "head_age": 10}``.
    title : str, optional

    Returns
    -------
    plotly.graph_objects.Figure
    """

    _check_type(linear, LinearSummary, "linear")
    if per is not None and scale == "sd":
        scale = "unit"  # `per` names amounts of raw units
    return coefficients_figure(linear.table(level=level, interval=interval), intercept=intercept, per=per,
                                scale=scale, title=title)


# -- contrasts -------------------------------------------------------------------------------
_CONTRAST_COLS = ["subgroup_a", "subgroup_b", "rule_a", "rule_b", "difference", "lower", "upper", "prob_a_greater"]


def _oriented_contrasts(df: pd.DataFrame, subgroup) -> pd.DataFrame:
    """Rows comparing ``subgroup`` with each other one, flipped so ``subgroup`` is always A."""
    as_a = df[df["subgroup_a"] == subgroup]
    as_b = df[df["subgroup_b"] == subgroup]
    flipped = pd.DataFrame({
        "subgroup_a": as_b["subgroup_b"], "subgroup_b": as_b["subgroup_a"],
        "rule_a": as_b["rule_b"], "rule_b": as_b["rule_a"],
        "difference": -as_b["difference"], "lower": -as_b["upper"], "upper": -as_b["lower"],
        "prob_a_greater": 1.0 - as_b["prob_a_greater"],
    })
    cols = list(_CONTRAST_COLS)
    if {"label_a", "label_b"} <= set(df.columns):  # printed labels (S1 .. Sk) travel with their rules
        flipped["label_a"], flipped["label_b"] = as_b["label_b"], as_b["label_a"]
        cols += ["label_a", "label_b"]
    return pd.concat([as_a[cols], flipped[cols]], ignore_index=True)


def contrasts_figure(df: pd.DataFrame, subgroup, *, weak=(), title: str | None = None) -> go.Figure:
    """Difference between ``subgroup`` and each other subgroup, with interval and P(A > B).

    Parameters
    ----------
    df : DataFrame
        ``contrasts()`` output (all pairs, or only pairs involving ``subgroup``).
    subgroup : subgroup id
        The subgroup compared with the others (A in "A minus B").
    weak : collection of subgroup ids, default ()
        Subgroups flagged for weak uptake (complier-weighted draws): marked in their labels;
        when A is not one of them, the axis is set by the other contrasts and a flagged
        contrast's interval is drawn cut at its edge with its numbers written beside it.
    """
    df = _require(df, _CONTRAST_COLS, "contrasts")
    ids = list(dict.fromkeys(df["subgroup_a"].tolist() + df["subgroup_b"].tolist()))
    if subgroup not in ids:
        raise SummaryError(f"`subgroup` {subgroup!r} is not one of the subgroups in the contrasts: {ids}.")
    d = _oriented_contrasts(df, subgroup).sort_values("difference", kind="stable").reset_index(drop=True)
    # "P(A > B) = 1 - P(B > A)" ignores ties, which have probability zero for continuous draws.
    # named groups (string ids) are shown by name, tree subgroups by their rule
    named = isinstance(subgroup, str)
    def shown(label, rule):
        return (f"{label}: " if label else "") + rule_text(rule)

    if named:
        name_a = subgroup
    else:
        name_a = shown(d["label_a"].iloc[0] if "label_a" in d.columns else None, d["rule_a"].iloc[0])
    names_b = [b if isinstance(b, str) else shown(lb, r) for b, lb, r in
               zip(d["subgroup_b"], d["label_b"] if "label_b" in d.columns else [None] * len(d), d["rule_b"])]
    weak = set(_as_list(list(weak)))
    flag = f"<br><span style='font-size:11px;color:{PALETTE[5]}'><b>\u2020 weak uptake: unstable</b></span>"
    flagged = np.array([b in weak for b in d["subgroup_b"]], bool)
    labels = [_wrap(r, 42) + (flag if f else "") for r, f in zip(names_b, flagged)]
    pos, heights = _rows(labels)
    level = _level_text(df.attrs)
    steady = ~flagged if subgroup not in weak and (~flagged).any() else np.ones(len(d), bool)
    vmax = float(np.nanmax(np.abs(d.loc[steady, "difference"].to_numpy(float))))
    x_range = _padded_range(d.loc[steady, "lower"], d.loc[steady, "upper"])
    shown, clip_traces, notes = _clip_to_axis(d, "difference", pos, heights, x_range)
    custom = np.column_stack([[_wrap(r, 60) if isinstance(b, str) else _rule(r, 60) for b, r in zip(d["subgroup_b"], d["rule_b"])],
                              d["lower"].astype(float),
                              d["upper"].astype(float), d["prob_a_greater"].astype(float),
                              d["difference"].astype(float), *_number_texts(d, "difference", "prob_a_greater")]).astype(object)
    trace = _interval_rows(shown, pos, value="difference", color=INK,
                           fill=effect_color(_signed_values(d["difference"], df.attrs), vmax), size=10, custom=custom,
                           name="contrasts", hover=("minus <b>%{customdata[0]}</b><br>difference %{customdata[5]}<br>"
                          + level + " %{customdata[6]}<br>P(A > B) = %{customdata[7]}<extra></extra>"))
    head = f"A: <span style='color:{ACCENT}'><b>{_wrap(name_a, 70)}</b></span>"
    if subgroup in weak:
        head += f" <span style='font-size:12px;color:{PALETTE[5]}'><b>\u2020 weak uptake: unstable</b></span>"
    top = 90 + 16 * head.count("<br>") if not title else None
    fig = _row_figure([trace] + clip_traces, labels=labels, pos=pos, heights=heights, top=top, title=title,
                      title_markup=None if title else f"{head}<br>minus each other subgroup B",
                      x_title=_contrast_title(df.attrs, level), x_range=x_range,
                      extra_height=16 * _contrast_title(df.attrs, level).count("<br>"))
    if notes:
        fig.layout.annotations = list(fig.layout.annotations) + notes
    return fig


def _contrast_title(attrs: Mapping, level: str) -> str:
    unit = attrs.get("unit")
    title = _effect_title({"unit": unit}, "Difference in effect, A minus B", f"mean and {level}")
    note = _direction_note(attrs)
    return title + (_SMALL.format(_esc(note)) if note else "")


def plot_contrasts(result, subgroup, *, level: float = 0.95, interval: str = "equal-tailed",
                   title: str | None = None) -> go.Figure:
    """One subgroup against each other subgroup: posterior difference, interval, P(A > B) on hover.

    Parameters
    ----------
    result : TreeSummary or GroupSummary
        Anything with ``.contrasts(level=, interval=)``.
    subgroup : subgroup id
        Subgroup A (a node id for a tree, a label for groups).
    level : float, default 0.95
    interval : {"equal-tailed", "highest-density"}, default "equal-tailed"
    title : str, optional (default names subgroup A's rule)

    Returns
    -------
    plotly.graph_objects.Figure
    """

    _check_type(result, (TreeSummary, GroupSummary), "result")
    if isinstance(subgroup, np.generic):
        subgroup = subgroup.item()
    return contrasts_figure(result.contrasts(level=level, interval=interval), subgroup, title=title)


# Static export lives in its own module; its public names are part of this one.
from .static import BrowserNotFoundError, find_browser, save_figure, save_figures  # noqa: E402,F401
