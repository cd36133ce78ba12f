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

from ..core import numbers as N
from ..core.files import refuse_existing, write_atomic
from ..core.rules import rule_text
from ..core.validate import SummaryError
from .layout import escape_latex, rule_to_latex

__all__ = ["decision_tables", "write_decision_tables", "decisions_section_html", "DECISION_FORMATS"]

#: File formats :func:`write_decision_tables` writes.
DECISION_FORMATS = ("csv", "md", "tex", "html")

# Shown columns of each table: (header, kind, source columns). Kinds: "text", "rule" (the tables' rule
# syntax), "count", "share" (percent), "number" (shortest form), "prob" (posterior probability),
# "flag" (yes / blank), and "est" / "ci" (an estimate and its interval, digits chosen per column family).
_SPEC = {
    "targeting_gain": [("Estimate", "text", ("estimate",)), ("Comparison", "wrap", ("comparison",)),
                       ("Scale", "text", ("scale",)), ("Share offered", "share", ("share_offered",)),
                       ("Subgroups offered", "number", ("n_subgroups_offered",)), ("Gain", "est", ("mean",)),
                       ("{iv}", "ci", ("lower", "upper")), ("P(gain > 0)", "prob", ("prob_positive",))],
    "targeting_subgroups": [("Subgroup", "text", ("label",)), ("Rule", "rule", ("rule",)), ("Units", "count", ("n_units",)),
                            ("Share", "share", ("share",)), ("Gain per offer", "est", ("gain_per_offer",)),
                            ("{iv}", "ci", ("lower", "upper")), ("P(benefit)", "prob", ("prob_benefit",)),
                            ("Rank", "count", ("rank",)), ("Offered", "flag", ("offered",)),
                            ("Offered, cross-fitted", "share", ("share_offered_cross_fitted",))],
    "targeting_curve": [("Estimate", "text", ("estimate",)), ("Step", "count", ("step",)),
                        ("Share offered", "share", ("share_offered",)), ("Gain per unit", "est", ("mean",)),
                        ("{iv}", "ci", ("lower", "upper")), ("Simultaneous band", "ci", ("lower_joint", "upper_joint"))],
    "uptake_drivers": [("Subgroup", "text", ("label",)), ("Rule", "rule", ("rule",)), ("Units", "count", ("n_units",)),
                       ("Uptake", "share", ("uptake",)), ("Uptake {iv}", "share_ci", ("uptake_lower", "uptake_upper")),
                       ("ITT effect", "est", ("itt",)), ("ITT {iv}", "ci", ("itt_lower", "itt_upper")),
                       ("Complier effect", "est", ("complier_effect",)),
                       ("Complier {iv}", "ci", ("complier_lower", "complier_upper")),
                       ("ITT gap from uptake", "est", ("from_uptake",)),
                       ("gap from effect", "est", ("from_complier_effect",))],
}
#: For CSV: the columns kept (every source column of the spec, in order).
_SHOW = {name: [c for _, _, cols in spec for c in cols] for name, spec in _SPEC.items()}


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


def _decimals(df: pd.DataFrame, cols, digits) -> dict:
    """Decimals per row group (the ``scale`` column when present: per unit vs total) for estimate columns."""
    if digits is not None:
        return {None: int(digits)}
    keys = df["scale"] if "scale" in df.columns else pd.Series([None] * len(df), index=df.index)
    out = {}
    for key in pd.unique(keys):
        part = df[keys == key] if key is not None else df
        vals = np.concatenate([pd.to_numeric(part[c], errors="coerce").to_numpy(dtype=float) for c in cols if c in part])
        errs = part["mcse_mean"].to_numpy(dtype=float) if "mcse_mean" in part else None
        out[key] = N.decimals_for(vals, errs)
    return out


def _display(name: str, df: pd.DataFrame, digits=None, *, fmt: str = "text"):
    """(headers, rows of display strings) of a decision table, with the package's one number format.

    ``fmt="tex"``: every cell is LaTeX already (text escaped, rules typeset, minus signs in math)."""
    minus = "$-$" if fmt == "tex" else N.MINUS
    iv = f"{float(df.attrs.get('level', 0.95)):.0%} interval"
    n_draws = df.attrs.get("n_draws")
    spec = [(h.replace("{iv}", iv), k, cols) for h, k, cols in _SPEC[name] if all(c in df.columns for c in cols)]
    est_cols = [c for _, k, cols in spec if k in ("est", "ci") for c in cols]
    dec = _decimals(df, est_cols, digits)
    headers = [h for h, _, _ in spec]
    rows = []
    for _, r in df.iterrows():
        d = dec.get(r["scale"] if "scale" in df.columns and digits is None else None, 2)
        cells = []
        for _, kind, cols in spec:
            v = [r[c] for c in cols]
            if kind == "rule":
                rule = v[0] if isinstance(v[0], str) else str(v[0])
                cells.append(rule_to_latex(rule) if fmt == "tex" else rule_text(rule))
            elif kind == "count":
                cells.append(N.count(v[0]))
            elif kind == "share":
                cells.append(N.percent(v[0], 0, minus=minus))
            elif kind == "share_ci":
                cells.append(f"[{N.percent(v[0], 0, minus=minus)}, {N.percent(v[1], 0, minus=minus)}]")
            elif kind == "number":
                cells.append(N.shortest(v[0], precision=2))
            elif kind == "prob":
                cells.append(N.probability(v[0], n_draws=n_draws))
            elif kind == "flag":
                cells.append("yes" if bool(v[0]) else "")
            elif kind == "est":
                cells.append(N.fixed(v[0], d, minus=minus))
            elif kind == "ci":
                cells.append(N.interval(v[0], v[1], d, minus=minus))
            else:
                text = "" if v[0] is None or (isinstance(v[0], float) and np.isnan(v[0])) else str(v[0])
                cells.append(escape_latex(text) if fmt == "tex" else text)
            if fmt == "tex" and kind in ("share", "share_ci", "prob"):
                cells[-1] = cells[-1].replace("%", r"\%").replace("<", "$<$").replace(">", "$>$")
        rows.append(cells)
    return headers, rows


def _shown(name: str, df: pd.DataFrame) -> pd.DataFrame:
    return df[[c for c in _SHOW[name] if c in df.columns]]


def _notes(df) -> list[str]:
    return [str(df.attrs[k]) for k in ("note", "caution") if df.attrs.get(k)]


def _markdown(name, df, caption, digits) -> str:
    headers, rows = _display(name, df, digits)
    esc = lambda s: str(s).replace("|", "\\|").replace("\n", " ")  # noqa: E731
    lines = [f"**{esc(caption)}**", "", "| " + " | ".join(esc(h) for h in headers) + " |", "|" + "---|" * len(headers)]
    lines += ["| " + " | ".join(esc(c) for c in row) + " |" for row in rows]
    return "\n".join(lines + [""] + [f"_{esc(n)}_" for n in _notes(df)]) + "\n"


def _latex(name, df, caption, digits) -> str:
    headers, rows = _display(name, df, digits, fmt="tex")
    kinds = [k for _, k, cols in _SPEC[name] if all(c in df.columns for c in cols)]
    extra = []
    if name == "uptake_drivers" and "rule" in kinds:  # eleven numeric columns leave a rule no room on a page
        j = kinds.index("rule")
        headers, kinds = headers[:j] + headers[j + 1:], kinds[:j] + kinds[j + 1:]
        rows = [r[:j] + r[j + 1:] for r in rows]
        extra = ["Subgroups S1, S2, ... are those of the subgroup table, with their rules."]
        # Each estimate and its interval share one cell (it may wrap before the interval).
        merged_h, merged_k, keep = [], [], []
        for k, (h, x) in enumerate(zip(headers, kinds)):
            if x in ("ci", "share_ci") and merged_k and merged_k[-1] in ("est", "share"):
                merged_h[-1] = f"{merged_h[-1]} ({h.split(' ', 1)[1] if ' ' in h else h})"
                merged_k[-1] = "wrap"
                keep[-1] = (keep[-1], k)
            else:
                merged_h.append(h)
                merged_k.append(x)
                keep.append(k)
        rows = [[f"{r[k[0]]} {r[k[1]]}" if isinstance(k, tuple) else r[k] for k in keep] for r in rows]
        headers, kinds = merged_h, merged_k
    if "Scale" in headers and "Comparison" in headers:  # the scale joins the comparison: one column fewer on the page
        js, jc = headers.index("Scale"), headers.index("Comparison")
        rows = [[f"{r[jc]}, {r[js]}" if k == jc else c for k, c in enumerate(r) if k != js] for r in rows]
        headers, kinds = [h for k, h in enumerate(headers) if k != js], [x for k, x in enumerate(kinds) if k != js]
    rule_rows = None
    if "rule" in kinds:  # on paper each rule gets a full-width line under its subgroup's numbers
        j = kinds.index("rule")
        rule_rows = [r[j] for r in rows]
        headers, kinds = headers[:j] + headers[j + 1:], kinds[:j] + kinds[j + 1:]
        rows = [r[:j] + r[j + 1:] for r in rows]
    headers = [{"Share offered": "Offered", "Subgroups offered": "Subgroups", "Offered, cross-fitted": "Cross-fitted"}.get(h, h)
               for h in headers]
    # Text wraps; in wide tables intervals may also break after their comma (tabularx shares out the width).
    wide = len(kinds) > 8 and "rule" not in kinds
    wrap = [k in ("rule", "wrap") or (wide and k in ("ci", "share_ci")) for k in kinds]
    cols = "".join("X" if w else ("l" if i == 0 or k == "text" else "r") for i, (w, k) in enumerate(zip(wrap, kinds)))
    env, spec = ("tabularx", cols) if any(wrap) else ("tabular*", "@{\\extracolsep{\\fill}}" + cols)
    head = " & ".join(escape_latex(h) for h in headers) + r" \\"
    body = [" & ".join(row) + r" \\" for row in rows]
    if rule_rows is not None:
        span = f"\\multicolumn{{{len(headers)}}}{{@{{}}p{{\\linewidth}}@{{}}}}"
        body = [b + "\n" + span + "{\\hspace*{1em}" + rule + "} \\\\" + ("[2pt]" if k < len(body) - 1 else "")
                for k, (b, rule) in enumerate(zip(body, rule_rows))]
        extra = extra + ["Each subgroup's rule is printed under its numbers."]
    notes = " ".join(escape_latex(n) for n in extra + _notes(df))
    size = r"\scriptsize" if len(headers) > 6 else r"\footnotesize"  # wide tables: smaller type, so rules keep room
    cols = cols.replace("X", r">{\raggedright\arraybackslash}X")
    spec = spec.replace("X", r">{\raggedright\arraybackslash}X") if any(wrap) else spec
    return "\n".join([r"\begin{table}[ht]", r"\centering", size, f"\\caption{{{escape_latex(caption)}}}",
                      r"\setlength{\tabcolsep}{3pt}" if len(headers) > 8 else r"\setlength{\tabcolsep}{4pt}",
                      f"\\begin{{{env}}}{{\\linewidth}}{{{spec}}}", r"\toprule", head, r"\midrule", *body, r"\bottomrule",
                      f"\\end{{{env}}}", f"\\par\\smallskip\\parbox{{\\linewidth}}{{\\scriptsize {notes}}}",
                      r"\end{table}"]) + "\n"


def _html(name, df, caption, digits, *, notes: bool = True) -> str:
    headers, rows = _display(name, df, digits)
    head = "".join(f"<th>{html.escape(h)}</th>" for h in headers)
    body = "".join("<tr>" + "".join(f"<td>{html.escape(c)}</td>" for c in row) + "</tr>" for row in rows)
    foot = "".join(f'<p class="sw-note">{html.escape(n)}</p>' for n in _notes(df)) if notes else ""
    return (f'<table class="sw-table"><caption>{html.escape(caption)}</caption><thead><tr>{head}</tr></thead>'
            f"<tbody>{body}</tbody></table>{foot}")


def write_decision_tables(out_dir, targeting=None, uptake=None, *, level: float = 0.95, digits: int | None = None,
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
    render = {"csv": lambda n, df, c: _shown(n, df).to_csv(index=False), "md": lambda n, df, c: _markdown(n, df, c, digits),
              "tex": lambda n, df, c: _latex(n, df, c, digits), "html": lambda n, df, c: _html(n, df, c, digits)}
    written = []
    for name, (df, caption) in tables.items():
        for fmt in formats:
            written.append(write_atomic(out_dir / f"{name}.{fmt}", render[fmt](name, df, caption), overwrite=overwrite))
    return written


def decisions_section_html(targeting=None, uptake=None, *, level: float = 0.95, digits: int | None = None, figure_html=None) -> str:
    """The report's "Decisions" section: headline, the tables, the curve figure (given as HTML), cautions."""
    tables = decision_tables(targeting, uptake, level=level)
    parts = ['<section class="sw-section" id="sw-decisions"><h2>Decisions: value of targeting and uptake</h2>']
    if targeting is not None:
        parts.append(f"<p><strong>{html.escape(targeting.headline(level))}</strong></p>"
                     f'<p class="sw-note">{html.escape(targeting.note)}</p>')
    if figure_html:
        parts.append(f'<div class="sw-figure">{figure_html}</div>')
    seen = [] if targeting is None else [targeting.note]
    for name, (df, caption) in tables.items():
        parts.append('<div class="sw-scroll">' + _html(name, df, caption, digits, notes=False) + "</div>")
        for n in _notes(df):  # each note once in the section, however many tables share it
            if n not in seen:
                seen.append(n)
                parts.append(f'<p class="sw-note">{html.escape(n)}</p>')
    parts.append("</section>")
    return "".join(parts)
