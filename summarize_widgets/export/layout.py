"""One layout for every table format: escaping, rule typesetting, typed cells.

Every summary table (``.table()``, ``.contrasts()``, ``.curves()``, ``.fit_r2_by_depth()``) is
turned into one :class:`_Layout`: which columns a reader sees, each cell typed as text,
rule, count, number or interval, and plain-text notes. The renderers in
:mod:`summarize_widgets.export` only decide markup, so LaTeX, Markdown and HTML cannot drift apart.
"""
from __future__ import annotations

import math

import numpy as np
import pandas as pd

from ..core import numbers as N
from ..core.rules import RULE_OPERATORS as _OPS, lex_rule as _lex_rule, rule_text
from ..core.validate import SummaryError, check_int

__all__ = ["escape_latex", "rule_to_latex", "rule_to_text", "WEAK_MARK", "table_layout", "table_type", "TABLE_COLUMNS", "format_cell",
           "subgroup_decimals", "subgroup_texts", "SHARE_DECIMALS"]

WEAK_MARK = "\u2020"  # dagger: the weak-uptake footnote symbol

# -- escaping and rules ---------------------------------------------------------------
_LATEX_ESCAPES = {
    "\\": r"\textbackslash{}", "&": r"\&", "%": r"\%", "$": r"\$", "#": r"\#", "_": r"\_",
    "{": r"\{", "}": r"\}", "~": r"\textasciitilde{}", "^": r"\textasciicircum{}",
    # In LaTeX's default OT1 encoding < > | print as other glyphs; these commands work in any encoding.
    "<": r"\textless{}", ">": r"\textgreater{}", "|": r"\textbar{}",
    "\n": " ", "\r": " ", "\t": " ",
}
_LATEX_TABLE = str.maketrans(_LATEX_ESCAPES)


def escape_latex(text) -> str:
    """Escape LaTeX specials ``& % $ # _ { } ~ ^ \\`` (and ``< > |``) in plain text; newlines become spaces."""
    return "".join(ch for ch in str(text).translate(_LATEX_TABLE) if ch >= " ")


def rule_to_latex(rule) -> str:
    r"""Typeset a subgroup rule: ``&`` reads "and", comparisons in math, set braces escaped, text escaped.

    ``age <= 40 & region in {east, west}`` becomes ``age $\leq$ 40 and region $\in$ \{east, west\}``.
    Operators count only between spaces, so a covariate named ``R&D`` stays text (escaped ``R\&D``).
    """
    parts = []
    toks = _lex_rule(str(rule))
    for k, (kind, tok) in enumerate(toks):
        if kind == "sp":
            # A line may break between conditions (around "and"/"or"), never inside one.
            near = [toks[j] for j in (k - 1, k + 1) if 0 <= j < len(toks)]
            joins = any(t[0] == "op" and t[1] not in ("&", "and", "|", "or") for t in near)
            parts.append("~" if joins else " ")
            continue
        if kind == "op":
            parts.append(_OPS[tok][0])
        elif kind == "str" and len(tok) >= 2 and tok[-1] == tok[0]:
            parts.append("``" + escape_latex(tok[1:-1]) + "''")  # typographic quotes work in every font encoding
        elif kind == "name" and len(tok) >= 2 and tok[-1] == "`":
            parts.append(escape_latex(tok[1:-1]))
        else:
            parts.append(escape_latex(tok))
    return "".join(parts)


#: Screen formats (HTML, Markdown, terminal, figures) print rules with the one core formatter.
rule_to_text = rule_text


# -- layout ----------------------------------------------------------------------------
class _Layout:
    """Headers (plain, LaTeX, align), typed rows and plain-text notes shared by every renderer."""

    def __init__(self, headers, rows, notes):
        self.headers = headers
        self.rows = rows
        self.notes = notes


#: The columns each table type needs (what the exporters lay out).
TABLE_COLUMNS = {
    "subgroups": ["subgroup", "rule", "n_units", "share", "mean", "lower", "upper", "prob_positive"],
    "contrasts": ["subgroup_a", "subgroup_b", "rule_a", "rule_b", "difference", "lower", "upper", "prob_a_greater"],
    "linear": ["term", "mean", "lower", "upper", "prob_positive"],
    "curves": ["covariate", "x", "mean", "lower", "upper", "lower_joint", "upper_joint"],
    "fit_r2": ["depth", "n_subgroups", "mean", "lower", "upper"],
    "evidence": ["quantity", "mean", "lower", "upper", "prob_above"],
    "size_path": ["step", "size", "added", "mean", "lower", "upper", "shortfall", "prob_within", "chosen"],
    "stability": ["covariate", "first_split", "in_summary"],
    "precision": ["summary", "rows", "flagged", "min_ess_bulk", "min_ess_tail", "max_rhat"],
}


def table_type(df, table=None):
    """The table type of ``df`` ("subgroups", "contrasts", "linear", "curves", "fit_r2"): ``table`` checked, or guessed from the columns."""
    if not isinstance(df, pd.DataFrame):
        raise SummaryError(f"`df` must be a pandas DataFrame from a summary's .table()/.contrasts()/.curves(); got {type(df).__name__}.")
    if table is not None:
        if table not in TABLE_COLUMNS:
            raise SummaryError(f"`table` must be one of {sorted(TABLE_COLUMNS)}; got {table!r}.")
        missing = [c for c in TABLE_COLUMNS[table] if c not in df.columns]
        if missing:
            raise SummaryError(f"`df` lacks the columns a {table!r} table needs: {missing}; it has {list(df.columns)}.")
        return table
    for name in ("precision", "size_path", "stability", "evidence", "contrasts", "curves", "fit_r2", "subgroups", "linear"):
        if all(c in df.columns for c in TABLE_COLUMNS[name]):
            return name
    raise SummaryError(
        "`df` is not a summary table: expected the columns of one of "
        + "; ".join(f"{k} ({', '.join(v)})" for k, v in TABLE_COLUMNS.items())
        + f". Got {list(df.columns)}."
    )


def _level_text(df) -> str:
    level = df.attrs.get("level")
    return f"{100 * float(level):g}% interval" if level is not None else "Credible interval"


def _interval_note(df, what: str) -> str:
    level, interval = df.attrs.get("level"), df.attrs.get("interval", "equal-tailed")
    lev = f"{100 * float(level):g}% " if level is not None else ""
    return f"Intervals: {lev}{interval} posterior credible intervals of {what}, written [lower, upper]."


def _unit_note(df) -> str | None:
    """What the effects are measured in and which direction is good (``draws.unit`` / ``draws.better``)."""
    unit, better = df.attrs.get("unit"), df.attrs.get("better")
    parts = []
    if unit:
        parts.append(f"Effects are in {unit}")
    if better == "lower":
        parts.append("lower (more negative) values are better")
    elif better == "higher" and unit:
        parts.append("higher values are better")
    if not parts:
        return None
    text = "; ".join(parts)
    return text[0].upper() + text[1:] + "."


def _better_text(df) -> str:
    return "lower values are better" if df.attrs.get("better") == "lower" else "higher values are better"


def _subgroup_label_cell(r, by_id: bool):
    if by_id:
        return ("text", getattr(r, "label", None) or str(r.subgroup))
    return ("text", r.subgroup)


def _effect_cells(df, value="mean", lower="lower", upper="upper"):
    """Per-column decimals of an effect and its interval (see :mod:`summarize_widgets.core.numbers`)."""
    d, di = N.effect_decimals(df, value)
    return d, di


#: Decimals of a percentage share in every output (tables, report, tree view).
SHARE_DECIMALS = 1


def subgroup_decimals(df) -> tuple[int, int]:
    """Decimals of the mean and of the interval of a subgroup table, or of ``TreeSummary.nodes()``.

    One choice per column (:func:`summarize_widgets.core.numbers.effect_decimals`) made from the
    subgroups themselves: for ``nodes()`` only its leaves (``is_leaf``), which are the rows of the
    subgroup table at that depth, so a subgroup prints the same digits in the tree as in the table.
    """
    if "is_leaf" in df.columns:
        leaves = df[df["is_leaf"].astype(bool)]
        df = leaves if len(leaves) else df
    return N.effect_decimals(df)


def subgroup_texts(df, *, minus: str = N.MINUS) -> pd.DataFrame:
    """The screen text of each subgroup's numbers, exactly as the tables print them.

    ``df`` is a subgroup table (``.table()``) or ``TreeSummary.nodes()``. Returns one row per row
    of ``df`` (same index) with ``n_text``, ``share_text`` (share of units), ``complier_share_text``
    (complier-weighted only, else ""), ``mean_text``, ``interval_text`` and ``prob_text`` (when
    ``df`` has ``prob_positive``): the tree views, the report's tree diagram and every table format
    read their numbers from here or from the same :mod:`~summarize_widgets.core.numbers` calls.
    """
    d, di = subgroup_decimals(df)
    nd = _n_draws(df)
    out = pd.DataFrame(index=df.index)
    out["n_text"] = [N.count(v) for v in df["n_units"]]
    out["share_text"] = [N.percent(v, SHARE_DECIMALS, minus=minus) for v in df["share"]]
    comp = df["complier_share"] if "complier_share" in df.columns else [None] * len(df)
    out["complier_share_text"] = ["" if v is None else N.percent(v, SHARE_DECIMALS, minus=minus) for v in comp]
    out["mean_text"] = [N.fixed(v, d, minus=minus) for v in df["mean"]]
    out["interval_text"] = [N.interval(lo, hi, di, minus=minus) for lo, hi in zip(df["lower"], df["upper"])]
    if "prob_positive" in df.columns:
        out["prob_text"] = [N.probability(p, n_draws=nd) for p in df["prob_positive"]]
    return out


def _n_draws(df):
    n = df.attrs.get("n_draws")
    return int(n) if n else None


#: Complier-weighted tables: what each effect is (stated in every output's notes).
COMPLIER_NOTE = ("Complier-weighted: each subgroup's effect is the ratio of sums over its units, in every draw: "
                 "the summed effect of the offer on the outcome divided by the summed effect of the offer on "
                 "uptake (the subgroup's complier average effect, LATE). Share of compliers: the subgroup's share "
                 "of the summed uptake effect; uptake: the share of its own units who take up the offer.")


def _layout(df: pd.DataFrame, table: str) -> _Layout:
    iv = _level_text(df)
    notes: list[str] = []
    rows = []
    nd = _n_draws(df)
    if table == "subgroups":
        by_id = pd.api.types.is_integer_dtype(df["subgroup"])
        weak = df["weak_uptake"].astype(bool).to_numpy() if "weak_uptake" in df.columns else np.zeros(len(df), bool)
        complier = "complier_share" in df.columns
        uptake = "uptake_share" in df.columns
        d, di = subgroup_decimals(df)
        headers = ([("Subgroup", "Subgroup", "l"), ("Rule", "Rule", "X")] if by_id
                   else [("Group", "Group", "l"), ("Definition", "Definition", "X")])
        headers += [("n", "$n$", "r"), ("Share of units", "Share of units", "r")]
        if complier:
            headers.append(("Share of compliers", "Share of compliers", "r"))
        headers += [("Mean", "Mean", "r"), (iv, escape_latex(iv), "c"), ("P(>0)", "$P(>0)$", "r")]
        if uptake:
            headers.append((f"Uptake ({iv})", escape_latex(f"Uptake ({iv})"), "c"))
        for r, w in zip(df.itertuples(index=False), weak):
            row = [_subgroup_label_cell(r, by_id), ("rule", r.rule) if by_id else ("text", r.rule), ("int", r.n_units),
                   ("pct", r.share)]
            if complier:
                row.append(("pct", r.complier_share))
            row += [("est", r.mean, d, bool(w)), ("ci", (r.lower, r.upper), di), ("prob", r.prob_positive, nd)]
            if uptake:
                row.append(("uptake", (r.uptake_share, getattr(r, "uptake_lower", np.nan),
                                       getattr(r, "uptake_upper", np.nan)), bool(w)))
            rows.append(row)
        notes.append(_interval_note(df, "each subgroup's average effect") + " P(>0): posterior probability that it is positive.")
        if complier or uptake:
            notes.append(COMPLIER_NOTE)
        if weak.any():
            floor = df.attrs.get("uptake_floor")
            below = f" below {floor:g}" if floor is not None else " near zero"
            notes.append(f"{WEAK_MARK} Weak uptake: the interval of this subgroup's uptake share reaches{below}, "
                         "so its ratio (LATE) estimate is unstable.")
    elif table == "contrasts":
        by_id = pd.api.types.is_integer_dtype(df["subgroup_a"])
        has_labels = "label_a" in df.columns
        if by_id and has_labels:
            a, b, cell = "label_a", "label_b", "text"
        elif by_id:
            a, b, cell = "rule_a", "rule_b", "rule"
        else:
            a, b, cell = "subgroup_a", "subgroup_b", "text"  # group labels are names, not rules
        d, di = _effect_cells(df, "difference")
        headers = [("Subgroup A", "Subgroup A", "l"), ("Subgroup B", "Subgroup B", "l"),
                   ("Difference A \u2212 B", "Difference $A - B$", "r"), (iv, escape_latex(iv), "c"),
                   ("P(A > B)", "$P(A > B)$", "r")]
        for r in df.itertuples(index=False):
            rows.append([(cell, getattr(r, a)), (cell, getattr(r, b)), ("est", r.difference, d),
                         ("ci", (r.lower, r.upper), di), ("prob", r.prob_a_greater, nd)])
        notes.append(_interval_note(df, "each difference, computed draw by draw")
                     + " P(A > B): posterior probability that A's effect exceeds B's.")
        if by_id and has_labels:
            notes.append("Subgroups are labelled as in the subgroup table.")
        best = df.attrs.get("best_label")
        if best is not None:
            side = "lowest" if df.attrs.get("better") == "lower" else "highest"
            notes.append(f"Largest benefit: {best} (the {side} posterior mean; {_better_text(df)}).")
    elif table == "linear":
        std = "std_mean" in df.columns
        headers = [("Term", "Term", "X"), ("Per unit", "Per unit", "r"), (iv, escape_latex(iv), "c")]
        if std:
            per = "Per SD" if df.attrs.get("standardized", "sd") == "sd" else "Per IQR"
            headers += [(per, per, "r"), (f"{per} ({iv})", escape_latex(f"{per} ({iv})"), "c")]
        headers.append(("P(>0)", "$P(>0)$", "r"))
        for k, r in enumerate(df.itertuples(index=False)):
            # each term is its own quantity (per unit of its own covariate): decimals per row
            d, di = _effect_cells(df.iloc[[k]])
            row = [("text", r.term), ("est", r.mean, d), ("ci", (r.lower, r.upper), di)]
            if std:
                ds, dsi = N.effect_decimals(pd.DataFrame({"mean": [r.std_mean], "sd": [r.std_sd],
                                                          "mcse_mean": [getattr(r, "std_mcse_mean", np.nan)]}))
                row += [("est", r.std_mean, ds), ("ci", (r.std_lower, r.std_upper), min(ds, dsi))]
            row.append(("prob", r.prob_positive, nd))
            rows.append(row)
        notes.append(_interval_note(df, "the coefficients of the best linear approximation")
                     + " P(>0): posterior probability that a coefficient (per unit) is positive.")
        if std:
            notes.append("Per SD: the coefficient times the covariate's standard deviation (weighted as in the "
                         "fit); category terms are per switch from the reference category; the intercept in "
                         "that column is the effect at the covariates' means and reference categories.")
        reference = df.attrs.get("reference")
        if reference:
            notes.append("Reference categories: " + "; ".join(f"{k} = {v}" for k, v in dict(reference).items()) + ".")
    elif table == "curves":
        headers = [("Covariate", "Covariate", "l"), ("Value", "Value", "r"), ("Mean", "Mean", "r"),
                   (f"{iv} (pointwise)", escape_latex(f"{iv} (pointwise)"), "c"),
                   (f"{iv} (simultaneous)", escape_latex(f"{iv} (simultaneous)"), "c")]
        d, di = _effect_cells(df)
        previous = None
        for r in df.itertuples(index=False):
            # Name each covariate once, on the first of its rows, as a paper table would.
            name = ("text", "" if r.covariate == previous else r.covariate)
            previous = r.covariate
            x = ("value", r.x) if isinstance(r.x, (int, float, np.number)) and not isinstance(r.x, bool) else ("text", r.x)
            rows.append([name, x, ("est", r.mean, d), ("ci", (r.lower, r.upper), di),
                         ("ci", (r.lower_joint, r.upper_joint), di)])
        notes.append(_interval_note(df, "the additive summary's effect at each value")
                     + " Simultaneous intervals cover a covariate's whole curve jointly.")
    elif table in ("evidence", "size_path", "stability", "precision"):
        headers, rows, notes = _evidence_layout(df, table, iv)
    else:  # fit_r2
        headers = [("Depth", "Depth", "r"), ("Subgroups", "Subgroups", "r"), ("Summary R\u00b2", "Summary $R^2$", "r"),
                   (iv, escape_latex(iv), "c")]
        d, di = _effect_cells(df)
        for r in df.itertuples(index=False):
            rows.append([("int", r.depth), ("int", r.n_subgroups), ("est", r.mean, d), ("ci", (r.lower, r.upper), di)])
        notes.append(_interval_note(df, "the summary R\u00b2, the share of each draw's heterogeneity the tree captures"))
    if table in ("subgroups", "contrasts", "linear", "curves"):
        unit = _unit_note(df)
        if unit:
            notes.append(unit)
    if table != "fit_r2" and any(c in df.columns for c in ("mcse_mean",)):
        notes.append("Digits: each column shows no digit finer than its largest Monte Carlo standard error.")
    return _Layout(headers, rows, notes)


def _evidence_layout(df: pd.DataFrame, kind: str, iv: str):
    """Headers, rows and notes of the evidence tables (heterogeneity, size paths, stability)."""
    rows, notes = [], []
    if kind == "evidence":
        c = df.attrs.get("threshold")
        ptxt = f"P(> {c:.3g})" if c is not None else "P(> c)"
        headers = [("Quantity", "Quantity", "l"), ("Mean", "Mean", "r"), (iv, escape_latex(iv), "c"),
                   (ptxt, escape_latex(ptxt), "r")]
        d, di = _effect_cells(df)
        for r in df.itertuples(index=False):
            rows.append([("text", r.quantity), ("est", r.mean, d), ("ci", (r.lower, r.upper), di),
                         ("prob", r.prob_above, _n_draws(df))])
        notes.append(_interval_note(df, "each quantity") + f" {ptxt}: posterior probability that it exceeds the threshold.")
        if df.attrs.get("threshold_rule"):
            notes.append(f"Threshold: {df.attrs['threshold_rule']}.")
    elif kind == "size_path":
        tree = str(df.attrs.get("summary", "")).endswith("tree")
        size = ("Subgroups", "Subgroups", "r") if tree else ("Terms", "Terms", "r")
        tol = df.attrs.get("tolerance")
        within = f"P(shortfall ≤ {tol:g})" if tol is not None else "P(within)"
        headers = [size, ("Step", "Step", "l"), ("Summary R²", "Summary $R^2$", "r"), (iv, escape_latex(iv), "c"),
                   ("Shortfall", "Shortfall", "r"), (within, escape_latex(within).replace("≤", "$\\leq$"), "r"),
                   ("Smallest within tolerance", "Smallest within tolerance", "c")]
        d, di = _effect_cells(df)
        for r in df.itertuples(index=False):
            rows.append([("int", r.size), ("text", r.added), ("est", r.mean, d), ("ci", (r.lower, r.upper), di),
                         ("est", r.shortfall, d), ("prob", r.prob_within, _n_draws(df)),
                         ("text", "yes" if r.chosen else "")])
        notes.append(_interval_note(df, "the summary R² of each nested summary")
                     + " Shortfall: posterior mean of the largest summary's R² minus this one's, draw by draw.")
    elif kind == "precision":
        headers = [("Summary", "Summary", "l"), ("Numbers", "Numbers", "r"), ("Flagged", "Flagged", "r"),
                   ("Smallest ESS (bulk)", "Smallest ESS (bulk)", "r"), ("Smallest ESS (tail)", "Smallest ESS (tail)", "r"),
                   ("Largest R-hat", "Largest $\\hat{R}$", "r")]
        for r in df.itertuples(index=False):
            rhat = ("text", "one chain") if pd.isna(r.max_rhat) else ("text", f"{r.max_rhat:.3f}")
            rows.append([("text", r.summary), ("int", r.rows), ("int", r.flagged),
                         ("int", round(r.min_ess_bulk)) if pd.notna(r.min_ess_bulk) else ("text", "NA"),
                         ("int", round(r.min_ess_tail)) if pd.notna(r.min_ess_tail) else ("text", "NA"), rhat])
        lim = f"ESS {df.attrs.get('ess_min', 400)} and R-hat {df.attrs.get('rhat_max', 1.01)}"
        notes.append(f"Monte Carlo precision of every number in the other tables; flagged: beyond {lim} "
                     "(Vehtari et al. 2021). R-hat needs two chains or more.")
    else:  # stability
        depths = [c for c in df.columns if str(c).startswith("depth_")]
        headers = [("Covariate", "Covariate", "l"), ("First split (depth 1)", "First split (depth 1)", "r")]
        headers += [(f"Depth {c[6:]}", f"Depth {c[6:]}", "r") for c in depths]
        headers.append(("Summary tree splits at depth", "Summary tree splits at depth", "l"))
        for r in df.to_dict("records"):
            cells = [("text", r["covariate"]), ("num", r["first_split"])]
            cells += [("text", "") if pd.isna(r[c]) else ("num", r[c]) for c in depths]
            cells.append(("text", r["in_summary"]))
            rows.append(cells)
        n = df.attrs.get("n_fits")
        notes.append(f"Share of {n if n is not None else 'the'} trees refitted to single posterior draws that split on "
                     "each covariate first, and at each depth.")
    if df.attrs.get("message"):
        notes.append(str(df.attrs["message"]))
    return headers, rows, notes


def _num(x, digits: int, minus: str) -> str:
    if x is None or (isinstance(x, float) and math.isnan(x)) or pd.isna(x):
        return "NA"
    s = f"{float(x):.{digits}f}"
    if float(s) == 0.0:
        s = s.lstrip("-")  # no "-0.00"
    return s.replace("-", minus, 1) if s.startswith("-") else s


def format_cell(cell, digits, fmt: str) -> str:
    """One cell as LaTeX ("tex") or as unescaped screen text ("text").

    Cell kinds: ``text``, ``rule``, ``int``; ``est`` (value, decimals[, weak]) and ``ci``
    ((lower, upper), decimals) carry their column's decimals (:mod:`summarize_widgets.core.numbers`);
    ``prob`` (p[, n_draws]); ``pct`` (a share); ``uptake`` ((share, lower, upper)[, weak]);
    ``value`` (a covariate value, shortest form). ``num`` and ``interval`` (other modules'
    tables) use ``digits`` decimals (2 when ``digits`` is None). An int ``digits`` overrides
    every column's decimals.
    """
    kind, value = cell[0], cell[1]
    minus = "$-$" if fmt == "tex" else N.MINUS
    override = None if digits is None else int(digits)
    dagger = r"$^{\dagger}$" if fmt == "tex" else WEAK_MARK
    pct = r"\%" if fmt == "tex" else "%"
    if kind == "int":
        return "NA" if pd.isna(value) else f"{int(value):,}"
    if kind == "num":
        s = _num(value, 2 if override is None else override, minus)
        if len(cell) > 2 and cell[2]:
            s += dagger
        return s
    if kind == "interval":
        dd = 2 if override is None else override
        return f"[{_num(value[0], dd, minus)}, {_num(value[1], dd, minus)}]"
    if kind == "est":
        s = N.fixed(value, cell[2] if override is None else override, minus=minus)
        if len(cell) > 3 and cell[3]:
            s += dagger
        return s
    if kind == "ci":
        return N.interval(value[0], value[1], cell[2] if override is None else override, minus=minus)
    if kind == "prob":
        s = N.probability(value, n_draws=cell[2] if len(cell) > 2 else None)
        return s.replace("<", r"$<$").replace(">", r"$>$") if fmt == "tex" else s
    if kind == "pct":
        return N.percent(value, SHARE_DECIMALS, minus=minus).replace("%", pct).replace("<", "$<$" if fmt == "tex" else "<")
    if kind == "uptake":
        share, lo, hi = value
        s = (f"{N.percent(share, 0, minus=minus)} [{N.percent(lo, 0, minus=minus)}, {N.percent(hi, 0, minus=minus)}]")
        if len(cell) > 2 and cell[2]:
            s += dagger
        return s.replace("%", pct).replace("<", "$<$" if fmt == "tex" else "<") if fmt == "tex" else s
    if kind == "value":
        s = N.shortest(value)
        return s.replace("-", minus, 1) if s.startswith("-") else s
    if kind == "rule":
        return rule_to_latex(value) if fmt == "tex" else rule_to_text(value)
    return escape_latex(value) if fmt == "tex" else str(value)


def table_layout(df, table=None, digits: int | None = None):
    """Validate a summary table and return (its layout, checked digits: None = chosen per column)."""
    table = table_type(df, table)
    digits = None if digits is None else check_int(digits, "digits", low=0, high=15)
    return _layout(df, table), digits
