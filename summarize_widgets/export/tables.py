"""Paper-ready tables, provenance files and atomic file writes.

Every summary's ``.table()`` / ``.contrasts()`` / ``.curves()`` returns a DataFrame of
raw numbers. :func:`summarize_widgets.export.layout.table_layout` decides, per type of
table, which columns a reader sees and how each cell is typed (text, rule, count,
number, interval); the renderers here only add markup: LaTeX (booktabs), Markdown,
HTML. CSV keeps every column at full precision.

Why hand-written renderers and not ``DataFrame.to_latex`` / ``Styler``: pandas' LaTeX
and captioned-HTML output needs jinja2, which is not one of our declared dependencies;
our cells mix escaped text with math (rules such as ``age $\\leq$ 40``), the table
needs a notes block under the tabular (intervals, weak-uptake marker, provenance)
that Styler does not offer, and ``DataFrame.to_markdown`` needs ``tabulate``, which is
not installed. CSV goes through pandas, whose float formatting is already exact.
"""
from __future__ import annotations

import html
import inspect
import json
import re
from collections.abc import Mapping
from pathlib import Path

import numpy as np
import pandas as pd

from ..core.files import refuse_existing, write_atomic
from .provenance import hash_array, hash_file, jsonable, provenance, provenance_lines
from .provenance import provenance as _make_provenance  # export_tables' `provenance` argument shadows the name
from .layout import (WEAK_MARK, escape_latex, format_cell, rule_to_latex, rule_to_text, table_type,
                            table_layout)
from ..core.validate import SummaryError, check_int

__all__ = [
    "write_atomic",
    "refuse_existing",
    "escape_latex",
    "rule_to_latex",
    "rule_to_text",
    "to_latex",
    "to_markdown",
    "to_csv",
    "to_html",
    "curve_points",
    "provenance",
    "provenance_lines",
    "hash_array",
    "hash_file",
    "write_provenance",
    "summary_tables",
    "export_tables",
    "FORMATS",
]

FORMATS = ("tex", "md", "csv", "html")


# ----------------------------------------------------------------------------- writes
# ----------------------------------------------------------------------------- renderers
_LABEL_RE = re.compile(r"^[A-Za-z0-9:._\-]+$")


def to_latex(df, *, caption=None, label=None, digits: int | None = None, provenance=None, table=None,
             width: str = r"\linewidth", landscape: bool = False, size: str = "footnotesize",
             rules: str = "auto") -> str:
    r"""A booktabs LaTeX table that fits the text width (needs ``\usepackage{booktabs,tabularx}``;
    ``landscape=True`` also needs ``\usepackage{rotating}``).

    Parameters
    ----------
    df : DataFrame
        A summary table: ``TreeSummary.table()``, ``.contrasts()``, ``.fit_r2_by_depth()``,
        ``GroupSummary.table()``, ``LinearSummary.table()``, or additive curves (pick grid
        points first with :func:`curve_points`).
    caption : str, optional
        Escaped for LaTeX.
    label : str, optional
        ``\label`` key: letters, digits and ``: . _ -`` only.
    digits : int, optional
        Decimals for every non-integer number. Default: chosen once per column from the size of
        its numbers and their Monte Carlo error (:mod:`summarize_widgets.core.numbers`).
    provenance : dict, optional
        From :func:`provenance`: written as ``%`` comment lines above the table (the printed
        notes stay free of it; the full record goes in ``provenance.json``).
    table : {"subgroups", "contrasts", "linear", "curves", "fit_r2"}, optional
        Detected from the columns when omitted.
    width : str, default ``"\linewidth"``
        Width of the table, any LaTeX length (``"0.8\linewidth"`` for a narrower one). The
        rule (or term) column takes the room left and wraps, breaking between conditions.
    landscape : bool, default False
        Set the table on its own rotated page (``sidewaystable``), where the width is the
        page's height: for very long rules or many columns.
    size : str, default "footnotesize"
        Font size command for the table body (``"small"``, ``"scriptsize"``, ...).
    rules : {"auto", "column", "rows"}, default "auto"
        Where subgroup rules go: a wrapping column ("column"), or a full-width line under each
        subgroup's numbers ("rows": for tables with many number columns, such as complier-weighted
        ones). "auto" picks "rows" when more than five number columns would squeeze the rules.

    Returns
    -------
    str
        A ``table`` (or ``sidewaystable``) float holding the ``tabularx`` and its notes.
    """
    lay, digits = table_layout(df, table, digits)
    if label is not None and not _LABEL_RE.match(str(label)):
        raise SummaryError(f"`label` must use only letters, digits and ': . _ -' (a LaTeX \\label key); got {label!r}.")
    if not isinstance(width, str) or not re.fullmatch(r"[0-9.]*\s*\\?[A-Za-z]+|[0-9.]+\s*(pt|cm|mm|in|em)", width.strip()):
        raise SummaryError(f"`width` must be a LaTeX length such as '\\linewidth', '0.8\\linewidth' or '12cm'; got {width!r}.")
    if size not in _SIZES:
        raise SummaryError(f"`size` must be one of {list(_SIZES)}; got {size!r}.")
    env = "sidewaystable" if landscape else "table"
    lines = []
    if provenance is not None:
        lines += ["% " + line for line in provenance_lines(provenance, full=True)]
    lines.append("% Needs \\usepackage{booktabs,tabularx}" + ("" if not landscape else " and \\usepackage{rotating}") + ".")
    lines += [rf"\begin{{{env}}}[htbp]", r"\centering", "\\" + size, r"\setlength{\tabcolsep}{4pt}"]
    if caption is not None:
        lines.append(r"\caption{" + escape_latex(caption) + "}")
    if label is not None:
        lines.append(r"\label{" + str(label) + "}")
    cols = [h[2] for h in lay.headers]
    if "X" not in cols:  # the widest text column wraps; numbers never do
        text_cols = [k for k, c in enumerate(cols) if c == "l"
                     and max((len(str(row[k][1])) for row in lay.rows), default=0) > 16]
        if text_cols:
            cols[text_cols[-1] if len(text_cols) == 1 else text_cols[0]] = "X"
    if rules not in ("auto", "column", "rows"):
        raise SummaryError(f"`rules` must be 'auto', 'column' or 'rows'; got {rules!r}.")
    wrap = cols.index("X") if "X" in cols else None
    # Many number columns leave a rule column too narrow to read: the rule then gets its own
    # full-width line under its subgroup's numbers.
    as_rows = wrap is not None and lay.rows and lay.rows[0][wrap][0] in ("rule", "text") and (
        rules == "rows" or (rules == "auto" and len(cols) - 2 > _MAX_NUMBER_COLUMNS * _width_factor(width, landscape)))
    if as_rows:
        keep = [k for k in range(len(cols)) if k != wrap]
        spec = "@{\\extracolsep{\\fill}}" + "".join(cols[k] if cols[k] != "X" else "l" for k in keep)
        lines.append(r"\begin{tabular*}{" + width.strip() + "}{" + spec + "@{}}")
        heads = [_latex_header(lay.headers[k][1], cols[k]) for k in keep]
        lines += [r"\toprule", " & ".join(heads) + r" \\",
                  r"\multicolumn{" + str(len(keep)) + r"}{@{}l@{}}{\hspace{1.5em}" + lay.headers[wrap][1] + r"} \\",
                  r"\midrule"]
        for row in lay.rows:
            cells = [_latex_cell(row[k], digits) for k in keep]
            if cells[0].startswith("["):
                cells[0] = "{}" + cells[0]
            lines.append(" & ".join(cells) + r" \\*")
            lines.append(r"\multicolumn{" + str(len(keep)) + r"}{@{}l@{}}{\hspace{1.5em}\parbox[t]{\dimexpr "
                         + width.strip() + r"-1.5em\relax}{\raggedright " + _latex_cell(row[wrap], digits)
                         + r"\strut}} \\[2pt]")
        lines += [r"\bottomrule", r"\end{tabular*}"]
    else:
        spec = "".join(r">{\raggedright\arraybackslash}X" if c == "X" else c for c in cols)
        if "X" in cols:
            lines.append(r"\begin{tabularx}{" + width.strip() + "}{@{}" + spec + "@{}}")
        else:
            lines.append(r"\begin{tabular}{@{}" + spec + "@{}}")
        lines += [r"\toprule", " & ".join(_latex_header(h[1], c) for h, c in zip(lay.headers, cols)) + r" \\",
                  r"\midrule"]
        for row in lay.rows:
            cells = [_latex_cell(c, digits) for c in row]
            if cells[0].startswith("["):
                cells[0] = "{}" + cells[0]  # a row opening with "[" would be read as the optional argument of "\\"
            lines.append(" & ".join(cells) + r" \\")
        lines += [r"\bottomrule", r"\end{tabularx}" if "X" in cols else r"\end{tabular}"]
    notes = list(lay.notes)
    if notes:
        lines.append(r"\par\smallskip")
        lines.append(r"\parbox{" + width.strip() + r"}{\raggedright\scriptsize " + r"\par ".join(_latex_note(n) for n in notes)
                     + r"\par}")
    lines.append(rf"\end{{{env}}}")
    return "\n".join(lines) + "\n"


_MAX_NUMBER_COLUMNS = 5


def _width_factor(width: str, landscape: bool) -> float:
    """How wide the table is relative to a portrait text width (``0.7\\linewidth`` -> 0.7; landscape ~1.4)."""
    m = re.fullmatch(r"\s*([0-9.]*)\s*\\(?:linewidth|textwidth|columnwidth)\s*", width)
    factor = float(m.group(1)) if m and m.group(1) else 1.0
    return factor * (1.4 if landscape else 1.0)
_SIZES = ("normalsize", "small", "footnotesize", "scriptsize", "tiny")


def _latex_header(text: str, align: str) -> str:
    """A header cell; a number column's header of several words goes on two lines (a nested tabular,
    so no package beyond booktabs is needed). Math (``$...$``) is never split."""
    words = re.findall(r"(?:\$[^$]*\$|\S)+", text)
    if align == "X" or len(words) < 2:
        return text
    half = max(1, (len(words) + 1) // 2)
    a, b = " ".join(words[:half]), " ".join(words[half:])
    col = "c" if align == "c" else "r" if align == "r" else "l"
    return r"\begin{tabular}[b]{@{}" + col + "@{}}" + a + r"\\" + b + r"\end{tabular}"


_BREAK = "\ue000"  # a private-use character marking where a long word may break
_LONG_RUN = re.compile(r"[^\s]{13,}")


def _breakable(text: str) -> str:
    """Mark break points inside words of 13+ characters: after ``_ / . ( ) - ,`` and at least
    every 10 characters, so a long covariate name cannot run out of its column."""
    def mark(m):
        out, since = [], 0
        for ch in m.group(0):
            out.append(ch)
            since += 1
            if ch in "_/.()-," or since >= 10:
                out.append(_BREAK)
                since = 0
        return "".join(out).rstrip(_BREAK)
    return _LONG_RUN.sub(mark, str(text).replace(_BREAK, ""))


def _latex_cell(cell, digits) -> str:
    if cell[0] in ("rule", "text"):
        cell = (cell[0], _breakable(cell[1]), *cell[2:])
    # a break there only where nothing else fits
    return format_cell(cell, digits, "tex").replace(_BREAK, r"\penalty5000{}")


def _latex_note(note: str) -> str:
    # Our notes use two non-ASCII signs; typeset them in math so pdflatex needs no extra packages.
    return (escape_latex(note).replace(WEAK_MARK, r"$^{\dagger}$").replace("R\u00b2", "$R^2$")
            .replace("\u2212", "$-$"))


_MD_SPECIAL = re.compile(r"([\\`*_\[\]<>|#~&$])")


def _md_text(s: str) -> str:
    # CommonMark lets any ASCII punctuation be backslash-escaped; these are the ones that change a table cell.
    return _MD_SPECIAL.sub(r"\\\1", " ".join(str(s).split()))


def _md_code(s: str) -> str:
    """A code span (rules read like code and keep < > & literal); "|" escaped for the table parser."""
    s = " ".join(str(s).split()).replace("|", r"\|")
    fence = "`" * (max((len(m) for m in re.findall(r"`+", s)), default=0) + 1)
    pad = " " if s.startswith("`") or s.endswith("`") else ""
    return f"{fence}{pad}{s}{pad}{fence}" if s else ""


def to_markdown(df, *, caption=None, digits: int | None = None, provenance=None, table=None) -> str:
    """A pipe table (GitHub / pandoc Markdown) with the caption above and notes below.

    Parameters are those of :func:`to_latex`; rules are written as code spans, other text backslash-escaped.
    """
    lay, digits = table_layout(df, table, digits)
    align = {"l": ":---", "X": ":---", "r": "---:", "c": ":---:"}
    out = []
    if caption is not None:
        out += [f"**{_md_text(caption)}**", ""]
    out.append("| " + " | ".join(_md_text(h[0]) for h in lay.headers) + " |")
    out.append("| " + " | ".join(align[h[2]] for h in lay.headers) + " |")
    for row in lay.rows:
        # Numbers and intervals are ours (digits, signs, brackets) and need no escaping; text from the data does.
        cells = [_md_code(rule_to_text(c[1])) if c[0] == "rule"
                 else _md_text(c[1]) if c[0] == "text" else format_cell(c, digits, "text") for c in row]
        out.append("| " + " | ".join(cells) + " |")
    notes = list(lay.notes)
    if provenance is not None:  # in a comment, not in the printed notes (the record is in provenance.json)
        out = [f"<!-- {html.escape(line).replace('--', '- -')} -->" for line in provenance_lines(provenance, full=True)] + out
    if notes:
        out.append("")
        out += [f"{_md_text(n)}  " for n in notes]
    return "\n".join(out).rstrip() + "\n"


def to_csv(df, **to_csv_kwargs) -> str:
    """Every column at full precision (Python's shortest round-trip float repr), no index.

    ``pd.read_csv(path)`` reads the numbers back exactly (pandas >= 3; older pandas needs
    ``float_precision="round_trip"``). CSV has no comment
    syntax every reader accepts, so provenance lives in ``provenance.json`` beside the file.
    """
    if not isinstance(df, pd.DataFrame):
        raise SummaryError(f"`df` must be a pandas DataFrame; got {type(df).__name__}.")
    return df.to_csv(index=False, lineterminator="\n", **to_csv_kwargs)


def to_html(df, *, caption=None, digits: int | None = None, provenance=None, table=None, css_class: str = "sw-table",
            omit_notes=()) -> str:
    """An HTML ``<table class="sw-table">`` with ``<caption>``, header, body and a notes footer; all text escaped.

    Parameters are those of :func:`to_latex`; ``css_class`` names the table's class; notes in
    ``omit_notes`` are left out (the report states notes shared by several tables once).
    """
    lay, digits = table_layout(df, table, digits)
    esc = html.escape
    align = {"l": "sw-l", "X": "sw-l", "r": "sw-r", "c": "sw-c"}
    out = [f'<table class="{esc(css_class)}">']
    if caption is not None:
        out.append(f"<caption>{esc(str(caption))}</caption>")
    out.append("<thead><tr>" + "".join(f'<th scope="col" class="{align[h[2]]}">{esc(h[0])}</th>' for h in lay.headers)
               + "</tr></thead>")
    out.append("<tbody>")
    for row in lay.rows:
        tds = []
        for c, h in zip(row, lay.headers):
            cls = align[h[2]] + (" sw-rule" if c[0] == "rule" else "")
            tds.append(f'<td class="{cls}">{esc(format_cell(c, digits, "text"))}</td>')
        out.append("<tr>" + "".join(tds) + "</tr>")
    out.append("</tbody>")
    notes = [n for n in lay.notes if n not in set(omit_notes)]
    if provenance is not None:
        out.insert(0, "\n".join(f"<!-- {html.escape(line).replace('--', '- -')} -->"
                                 for line in provenance_lines(provenance, full=True)))
    if notes:
        out.append(f'<tfoot><tr><td colspan="{len(lay.headers)}">'
                   + "".join(f'<p class="sw-note">{esc(n)}</p>' for n in notes) + "</td></tr></tfoot>")
    out.append("</table>")
    return "\n".join(out) + "\n"


def curve_points(curves, points=None, *, n_points: int = 5) -> pd.DataFrame:
    """Pick rows of an additive ``.curves()`` table at chosen grid values, for a paper table.

    Parameters
    ----------
    curves : DataFrame
        From ``AdditiveSummary.curves()``.
    points : dict of str -> sequence, optional
        Per covariate, the values wanted; each picks the nearest grid value (numeric) or the
        matching category. Covariates not named are left out. Default: every covariate, with
        ``n_points`` evenly spaced grid values for numeric ones and every category.
    n_points : int, default 5
        Grid values per numeric covariate when ``points`` is None.

    Returns
    -------
    DataFrame
        The selected rows (same columns and attrs as ``curves``).
    """
    table_type(curves, "curves")
    n_points = check_int(n_points, "n_points", low=1)
    known = list(dict.fromkeys(curves["covariate"]))
    if points is not None:
        if not isinstance(points, Mapping):
            raise SummaryError(f"`points` must be a dict of covariate -> values; got {type(points).__name__}.")
        unknown = [c for c in points if c not in known]
        if unknown:
            raise SummaryError(f"`points` names covariates not in the curves: {unknown}. Available: {known}.")
    keep = []
    for cov in (known if points is None else list(points)):
        sub = curves[curves["covariate"] == cov]
        numeric = sub["covariate_type"].iloc[0] == "numeric" if "covariate_type" in sub.columns else pd.api.types.is_numeric_dtype(sub["x"])
        if points is None:
            idx = (sub.index[np.unique(np.linspace(0, len(sub) - 1, min(n_points, len(sub))).round().astype(int))]
                   if numeric else sub.index)
        elif numeric:
            xs = pd.to_numeric(sub["x"]).to_numpy(dtype=float)
            idx = list(dict.fromkeys(sub.index[int(np.argmin(np.abs(xs - float(v))))] for v in points[cov]))
        else:
            want = [str(v) for v in points[cov]]
            have = [str(v) for v in sub["x"]]
            missing = [v for v in want if v not in have]
            if missing:
                raise SummaryError(f"`points[{cov!r}]` names categories not on the curve: {missing}. Available: {have}.")
            idx = [sub.index[have.index(v)] for v in want]
        keep.extend(idx)
    out = curves.loc[keep].reset_index(drop=True)
    out.attrs.update(curves.attrs)
    return out


def write_provenance(prov: Mapping, path, *, overwrite: bool = False) -> Path:
    """Write a provenance record as indented JSON (a folder means ``<folder>/provenance.json``)."""
    path = Path(path)
    if path.is_dir():
        path = path / "provenance.json"
    return write_atomic(path, json.dumps(jsonable(prov), indent=2) + "\n", overwrite=overwrite)


# ----------------------------------------------------------------------------- batch export
def _call(method, level, interval):
    """Call a table method with the level/interval arguments its signature accepts."""
    params = inspect.signature(method).parameters
    kw = {k: v for k, v in (("level", level), ("interval", interval)) if k in params}
    return method(**kw)


def summary_tables(*, tree=None, groups=None, linear=None, additive=None, level=0.95, interval="equal-tailed",
                   contrasts: bool = True, points=None, evidence=None) -> dict[str, tuple[pd.DataFrame, str]]:
    """Name -> (table, caption) for every summary given, in report order (used by export and the report).

    ``evidence`` (an :class:`~summarize_widgets.summaries.evidence_set.EvidenceSet`) adds its tables last.
    """
    out: dict[str, tuple[pd.DataFrame, str]] = {}
    if tree is not None:
        d = getattr(tree, "depth", None)
        tag = f"_depth{d}" if d is not None else ""
        lab = getattr(tree, "label", "effect")
        out[f"subgroups{tag}"] = (_call(tree.table, level, interval), f"Subgroups of the {lab} (tree depth {d})")
        if hasattr(tree, "fit_r2_by_depth"):
            out["fit_r2_by_depth"] = (_call(tree.fit_r2_by_depth, level, interval), "Summary R\u00b2 by tree depth")
        pairs = _call(tree.contrasts, level, interval) if contrasts else None
        if pairs is not None and len(pairs):  # a single subgroup has no pairs: no empty table
            out[f"contrasts{tag}"] = (pairs, f"Differences between subgroups (tree depth {d})")
    if groups is not None:
        out["groups"] = (_call(groups.table, level, interval), f"Pre-specified groups: {getattr(groups, 'label', 'effect')}")
        pairs = _call(groups.contrasts, level, interval) if contrasts and hasattr(groups, "contrasts") else None
        if pairs is not None and len(pairs):
            out["groups_contrasts"] = (pairs, "Differences between pre-specified groups")
    if linear is not None:
        out["linear"] = (_call(linear.table, level, interval), "Best linear approximation of the effects")
    if additive is not None:
        curves = _call(additive.curves, level, interval)
        out["trends"] = (curve_points(curves, points), "Additive summary at selected covariate values")
    if evidence is not None:
        out.update(evidence.tables(level, interval))
    return out


def export_tables(out_dir, *, tree=None, groups=None, linear=None, additive=None, level: float = 0.95,
                  interval: str = "equal-tailed", contrasts: bool = True, points=None, formats=FORMATS,
                  digits: int | None = None, provenance=None, overwrite: bool = False, evidence=None) -> dict[str, Path]:
    """Write every summary's table in each format, plus ``provenance.json``.

    Parameters
    ----------
    out_dir : str or Path
        Folder (created if missing).
    tree, groups, linear, additive : summary results, optional
        ``TreeSummary`` (exported at its current depth, with its contrasts and R² by depth),
        ``GroupSummary``, ``LinearSummary``, ``AdditiveSummary``.
    level, interval : float, str
        Passed to each ``.table()`` / ``.contrasts()`` / ``.curves()`` that accepts them.
    contrasts : bool, default True
        Also export pairwise subgroup differences.
    points : dict, optional
        Grid values for the additive table (see :func:`curve_points`).
    formats : sequence of {"tex", "md", "csv", "html"}
    digits : int, default 2
    provenance : dict, optional
        From :func:`provenance` (pass the same record to :func:`summarize_widgets.report.write_report`
        so the report and the tables agree); built from the results and settings when omitted.
    overwrite : bool, default False
        Without it, nothing is written if any target file exists.
    evidence : EvidenceSet, optional
        From :func:`summarize_widgets.summaries.evidence_set.gather_evidence`: adds the
        heterogeneity, size-path and (when computed) stability tables.

    Returns
    -------
    dict of str -> Path
        ``"<table>.<ext>"`` -> written path, and ``"provenance.json"``.
    """
    formats = tuple([formats] if isinstance(formats, str) else formats)
    bad = [f for f in formats if f not in FORMATS]
    if bad or not formats:
        raise SummaryError(f"`formats` must be a non-empty subset of {list(FORMATS)}; got {list(formats)}.")
    results = {k: v for k, v in (("tree", tree), ("groups", groups), ("linear", linear), ("additive", additive)) if v is not None}
    if not results:
        raise SummaryError("export_tables needs at least one of `tree`, `groups`, `linear`, `additive`.")
    tables = summary_tables(tree=tree, groups=groups, linear=linear, additive=additive, level=level,
                            interval=interval, contrasts=contrasts, points=points, evidence=evidence)
    prov = provenance if provenance is not None else _make_provenance(
        results, settings={"level": level, "interval": interval, "digits": digits})
    out_dir = Path(out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    files: dict[str, str] = {}
    for name, (df, caption) in tables.items():
        for fmt in formats:
            if fmt == "tex":
                text = to_latex(df, caption=caption, label=f"tab:{name}", digits=digits, provenance=prov)
            elif fmt == "md":
                text = to_markdown(df, caption=caption, digits=digits, provenance=prov)
            elif fmt == "html":
                text = to_html(df, caption=caption, digits=digits, provenance=prov)
            else:
                text = to_csv(df)
            files[f"{name}.{fmt}"] = text
    files["provenance.json"] = json.dumps(jsonable(prov), indent=2) + "\n"
    refuse_existing([out_dir / f for f in files], overwrite=overwrite)  # all first: a refused export writes nothing
    return {f: write_atomic(out_dir / f, text, overwrite=overwrite) for f, text in files.items()}
