"""Decision tables (value of targeting, uptake drivers) as CSV, Markdown, LaTeX and HTML, and their report section.

Self-contained: the tables come from :class:`~summarize_widgets.summaries.targeting.TargetingResult` and
:class:`~summarize_widgets.summaries.uptake.UptakeDrivers`; every rendering carries the note and the caution,
and user text (labels, rules) is escaped for HTML and LaTeX.
"""
from __future__ import annotations

import html
from pathlib import Path

import numpy as np
import pandas as pd

from ..core.files import refuse_existing, write_atomic
from ..core.validate import SummaryError
from .layout import escape_latex

__all__ = ["decision_tables", "write_decision_tables", "decisions_section_html", "DECISION_FORMATS"]

#: File formats :func:`write_decision_tables` writes.
DECISION_FORMATS = ("csv", "md", "tex", "html")

_SHOW = {
    "targeting_gain": ["estimate", "comparison", "scale", "share_offered", "n_subgroups_offered", "mean", "lower", "upper",
                       "prob_positive"],
    "targeting_subgroups": ["label", "rule", "n_units", "share", "gain_per_offer", "lower", "upper", "prob_benefit", "rank",
                            "offered", "share_offered_cross_fitted"],
    "targeting_curve": ["estimate", "step", "share_offered", "mean", "lower", "upper", "lower_joint", "upper_joint"],
    "uptake_drivers": ["label", "rule", "n_units", "uptake", "uptake_lower", "uptake_upper", "itt", "itt_lower",
                       "itt_upper", "complier_effect", "complier_lower", "complier_upper", "from_uptake",
                       "from_complier_effect"],
}


def decision_tables(targeting=None, uptake=None, *, level: float = 0.95) -> dict:
    """Name -> (DataFrame, caption) of the decision tables that apply."""
    if targeting is None and uptake is None:
        raise SummaryError("Pass `targeting` (value_of_targeting(...)) and/or `uptake` (uptake_drivers(...)).")
    out = {}
    pct = f"{level:.0%}"
    if targeting is not None:
        out["targeting_gain"] = (targeting.table(level=level),
                                 f"Gain of the rule against offering to none and to all ({pct} credible intervals)")
        out["targeting_subgroups"] = (targeting.subgroups(level=level), "Subgroups: gain per offer and the rule")
        out["targeting_curve"] = (targeting.curve(level=level), "Gain per unit when subgroups are offered best first")
    if uptake is not None:
        out["uptake_drivers"] = (uptake.table(level=level),
                                 "Uptake share, intention-to-treat and complier effect of each subgroup")
    return out


def _cell(v, digits: int) -> str:
    if isinstance(v, (bool, np.bool_)):
        return "yes" if v else ""
    if isinstance(v, (float, np.floating)):
        return "NA" if not np.isfinite(v) else f"{v:.{digits}f}"
    return str(v)


def _shown(name: str, df: pd.DataFrame) -> pd.DataFrame:
    return df[[c for c in _SHOW[name] if c in df.columns]]


def _notes(df) -> list[str]:
    return [str(df.attrs[k]) for k in ("note", "caution") if df.attrs.get(k)]


def _markdown(name, df, caption, digits) -> str:
    d = _shown(name, df)
    esc = lambda s: str(s).replace("|", "\\|").replace("\n", " ")  # noqa: E731
    lines = [f"**{esc(caption)}**", "", "| " + " | ".join(d.columns) + " |", "|" + "---|" * len(d.columns)]
    lines += ["| " + " | ".join(esc(_cell(v, digits)) for v in row) + " |" for row in d.itertuples(index=False)]
    return "\n".join(lines + [""] + [f"_{esc(n)}_" for n in _notes(df)]) + "\n"


def _latex(name, df, caption, digits) -> str:
    d = _shown(name, df)
    head = " & ".join(escape_latex(c.replace("_", " ")) for c in d.columns) + r" \\"
    body = [" & ".join(escape_latex(_cell(v, digits)) for v in row) + r" \\" for row in d.itertuples(index=False)]
    notes = " ".join(escape_latex(n) for n in _notes(df))
    return "\n".join([r"\begin{table}[ht]", r"\centering", r"\footnotesize", f"\\caption{{{escape_latex(caption)}}}",
                      r"\begin{tabular}{" + "l" * len(d.columns) + "}", r"\hline", head, r"\hline", *body, r"\hline",
                      r"\end{tabular}", f"\\par\\smallskip\\parbox{{\\linewidth}}{{\\scriptsize {notes}}}",
                      r"\end{table}"]) + "\n"


def _html(name, df, caption, digits) -> str:
    d = _shown(name, df)
    head = "".join(f"<th>{html.escape(c.replace('_', ' '))}</th>" for c in d.columns)
    rows = "".join("<tr>" + "".join(f"<td>{html.escape(_cell(v, digits))}</td>" for v in row) + "</tr>"
                   for row in d.itertuples(index=False))
    notes = "".join(f'<p class="sw-note">{html.escape(n)}</p>' for n in _notes(df))
    return (f'<table class="sw-table"><caption>{html.escape(caption)}</caption><thead><tr>{head}</tr></thead>'
            f"<tbody>{rows}</tbody></table>{notes}")


def write_decision_tables(out_dir, targeting=None, uptake=None, *, level: float = 0.95, digits: int = 2,
                          formats=DECISION_FORMATS, overwrite: bool = False) -> list[Path]:
    """Write every decision table in ``formats`` (csv, md, tex, html) into ``out_dir``; returns the paths.

    Existing files are refused unless ``overwrite`` (checked before anything is written).
    """
    bad = [f for f in formats if f not in DECISION_FORMATS]
    if bad:
        raise SummaryError(f"`formats` must be among {list(DECISION_FORMATS)}; got {bad}.")
    tables = decision_tables(targeting, uptake, level=level)
    out_dir = Path(out_dir)
    targets = [out_dir / f"{name}.{fmt}" for name in tables for fmt in formats]
    refuse_existing(targets, overwrite=overwrite)
    out_dir.mkdir(parents=True, exist_ok=True)
    render = {"csv": lambda n, df, c: df.to_csv(index=False), "md": lambda n, df, c: _markdown(n, df, c, digits),
              "tex": lambda n, df, c: _latex(n, df, c, digits), "html": lambda n, df, c: _html(n, df, c, digits)}
    written = []
    for name, (df, caption) in tables.items():
        for fmt in formats:
            written.append(write_atomic(out_dir / f"{name}.{fmt}", render[fmt](name, df, caption), overwrite=overwrite))
    return written


def decisions_section_html(targeting=None, uptake=None, *, level: float = 0.95, digits: int = 2, figure_html=None) -> str:
    """The report's "Decisions" section: headline, the tables, the curve figure (given as HTML), cautions."""
    tables = decision_tables(targeting, uptake, level=level)
    parts = ['<section class="sw-section" id="sw-decisions"><h2>Decisions: value of targeting and uptake</h2>']
    if targeting is not None:
        parts.append(f"<p><strong>{html.escape(targeting.headline(level))}</strong></p>"
                     f'<p class="sw-note">{html.escape(targeting.note)}</p>')
    if figure_html:
        parts.append(f'<div class="sw-figure">{figure_html}</div>')
    for name, (df, caption) in tables.items():
        parts.append('<div class="sw-scroll">' + _html(name, df, caption, digits) + "</div>")
    parts.append("</section>")
    return "".join(parts)
