"""Decision figures: the gain of offering subgroups best first against the share of units offered."""
from __future__ import annotations

import html

import plotly.graph_objects as go

from ..core.validate import SummaryError
from .palette import ACCENT, FONT, GRID, INK, PALETTE, rgba

__all__ = ["plot_targeting_curve"]


def plot_targeting_curve(result, *, level: float = 0.95, interval: str = "equal-tailed", scale: str = "per unit",
                         cross_fitted: bool = True) -> go.Figure:
    """Gain against share offered (subgroups offered best first by posterior mean), with posterior bands.

    Parameters
    ----------
    result : TargetingResult
        From :func:`~summarize_widgets.summaries.targeting.value_of_targeting`.
    level, interval, scale
        As for :meth:`TargetingResult.curve`.
    cross_fitted : bool, default True
        Also draw the cross-fitted curve (dashed) beside the in-sample one.

    Returns
    -------
    plotly.graph_objects.Figure
        The in-sample curve with its pointwise interval (darker band) and simultaneous band (lighter), the
        rule's point marked; the caution in the caption.
    """
    from ..summaries.targeting import TargetingResult

    if not isinstance(result, TargetingResult):
        raise SummaryError(f"`result` must be a TargetingResult (value_of_targeting(...)); got {type(result).__name__}.")
    cur = result.curve(level=level, interval=interval, scale=scale)
    fig = go.Figure()
    colours = {"in-sample": PALETTE[0], "cross-fitted": PALETTE[1]}
    pct = f"{level:.0%}"
    for est in ("in-sample", "cross-fitted") if cross_fitted else ("in-sample",):
        d = cur[cur["estimate"] == est]
        x = d["share_offered"].to_numpy()
        c = colours[est]
        if est == "in-sample":
            for lo, hi, alpha, name in (("lower_joint", "upper_joint", 0.12, f"{pct} simultaneous band"),
                                        ("lower", "upper", 0.28, f"{pct} pointwise interval")):
                fig.add_trace(go.Scatter(x=list(x) + list(x[::-1]), y=list(d[hi]) + list(d[lo][::-1]), fill="toself", mode="lines",
                                         fillcolor=rgba(c, alpha), line=dict(width=0), hoverinfo="skip", name=name))
        else:
            fig.add_trace(go.Scatter(x=x, y=d["lower"], mode="lines", line=dict(color=c, width=1, dash="dot"),
                                     name=f"cross-fitted {pct} interval", hoverinfo="skip"))
            fig.add_trace(go.Scatter(x=x, y=d["upper"], mode="lines", line=dict(color=c, width=1, dash="dot"),
                                     showlegend=False, hoverinfo="skip"))
        hover = [html.escape(str(o)) or "none" for o in d["offered"]]
        fig.add_trace(go.Scatter(x=x, y=d["mean"], mode="lines+markers", name=f"{est} (posterior mean)",
                                 line=dict(color=c, width=2.5, dash="solid" if est == "in-sample" else "dash"),
                                 marker=dict(size=6), customdata=hover,
                                 hovertemplate="share offered %{x:.0%}<br>gain %{y:.3g}<br>offered: %{customdata}<extra></extra>"))
    tab = result.table(level=level, interval=interval)
    row = tab[(tab["estimate"] == "in-sample") & (tab["comparison"] == "rule vs offer to none") & (tab["scale"] == scale)].iloc[0]
    fig.add_trace(go.Scatter(x=[row["share_offered"]], y=[row["mean"]], mode="markers", name=f"rule: P(benefit) >= {result.min_prob:g}",
                             marker=dict(color=ACCENT, size=12, symbol="diamond", line=dict(color=INK, width=1))))
    unit = f"<br>({html.escape(result.draws.unit)})" if result.draws.unit else ""
    what = "per unit" if scale == "per unit" else "total"
    fig.update_layout(
        template="none", font=dict(family=FONT, size=13, color=INK), paper_bgcolor="white", plot_bgcolor="white",
        title=dict(text=f"Gain from offering subgroups best first: {html.escape(result.label)}", x=0.01, font=dict(size=16)),
        xaxis=dict(title="share of units offered", tickformat=".0%", range=[0, 1.02], gridcolor=GRID),
        yaxis=dict(title=f"gain {what}{unit}", gridcolor=GRID, zeroline=True, zerolinecolor=INK),
        legend=dict(orientation="h", y=-0.22, x=0), margin=dict(l=90, r=30, t=60, b=150), height=520,
        annotations=[dict(text=html.escape("Subgroups chosen from the posterior; exploratory. Decisions about people "
                                           "follow your field's standards."), xref="paper", yref="paper", x=0, y=-0.42,
                          showarrow=False, xanchor="left", font=dict(size=11, color=INK))],
    )
    return fig
