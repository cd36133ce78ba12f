"""Readable rules for tree splits: one formatting core for every renderer."""
from __future__ import annotations

import numpy as np

from .design import MISSING
from .numbers import shortest

__all__ = ["nice_threshold", "Condition", "combine", "SHOWN_LEVELS"]

#: Category labels a rule lists before abbreviating ("street in {a, b, c, d, e and 9,990 more}");
#: the full sets stay on the result (:meth:`TreeSummary.rule_levels`).
SHOWN_LEVELS = 5


def _fmt(x: float) -> str:
    return shortest(x, precision=None)


def nice_threshold(threshold: float, left_max: float, right_min: float, dtype=np.float64) -> str:
    """The shortest decimal t with ``left_max <= t < right_min`` (so ``x <= t`` keeps the fitted partition).

    ``dtype`` is the covariate's own floating type: the comparison is made as the data would
    make it, so a float32 column whose largest left value is ``float32(37.83)`` gets the
    threshold ``37.83``, not the float64 leftover ``37.830002``. Falls back to the fitted
    threshold when the side extremes are unknown.
    """
    if not (np.isfinite(left_max) and np.isfinite(right_min)):
        return _fmt(threshold)
    dt = np.dtype(dtype) if np.dtype(dtype).kind == "f" else np.dtype(np.float64)
    lo, hi = dt.type(left_max), dt.type(right_min)

    def keeps(cand: float) -> bool:
        c = dt.type(cand)
        return bool(lo <= c < hi)

    for digits in range(1, 18):
        # fewest significant digits first; the rounded-up left maximum is the smallest such decimal
        for cand in (float(f"{float(lo):.{digits}g}"), float(f"{threshold:.{digits}g}"), _round_up(float(lo), digits)):
            if keeps(cand):
                return _fmt(float(np.format_float_positional(dt.type(cand), unique=True, trim="-"))
                            if dt != np.float64 else cand)
    return _fmt(threshold)


def _round_up(x: float, digits: int) -> float:
    """``x`` rounded up to ``digits`` significant digits."""
    if x == 0 or not np.isfinite(x):
        return x
    mag = int(np.floor(np.log10(abs(x)))) - digits + 1
    scale = 10.0 ** mag
    return float(f"{np.ceil(x / scale) * scale:.{digits}g}")


class Condition:
    """One edge condition.

    ``op`` is ``"<="`` / ``">"`` (numeric, ``value`` the printed threshold), ``"="`` (one value
    of a 0/1 column, read ``marr = 0``), ``"missing"`` (``age is missing``), ``"observed"``
    (``age is not missing``), or None with ``labels`` (a set of categories; the label
    :data:`~summarize_widgets.core.design.MISSING` reads as "missing"). ``with_missing``:
    units whose value is missing take this edge too (``age > 50 or missing``).
    """

    def __init__(self, column: str, *, op: str | None = None, value: str | None = None, numeric_value: float | None = None,
                 labels: tuple | None = None, with_missing: bool = False):
        self.column = column
        self.op = op
        self.value = value
        self.numeric_value = numeric_value
        self.labels = labels
        self.with_missing = with_missing

    def text(self, full: bool = False) -> str:
        """The condition alone (the edge label); ``full`` lists every category of a long set."""
        return _render(self.column, _State().add(self), full=full, alone=True)


class _State:
    """What a path says about one column: bounds, a value set, and whether missing values pass."""

    def __init__(self):
        self.lo = self.hi = self.labels = None
        self.missing = None  # None: not restricted; True: missing values pass; False: they do not
        self.only_missing = False

    def add(self, c: Condition) -> "_State":
        if c.op == "missing":
            self.only_missing = True
            return self
        if c.op == "observed":
            self.missing = False
            return self
        if c.labels is not None:  # a set of categories (missing ones are a category): keep the narrowest, the last
            self.labels = c
            return self
        if c.op == "=":
            self.labels = c
        elif c.op == ">":
            if self.lo is None or c.numeric_value > self.lo.numeric_value:
                self.lo = c
        elif self.hi is None or c.numeric_value < self.hi.numeric_value:
            self.hi = c
        # missing values follow the path only if every edge on it takes them
        self.missing = c.with_missing if self.missing is None else (self.missing and c.with_missing)
        return self


def _label_set(col: str, labels: tuple, full: bool) -> tuple[str, bool]:
    """``col = a`` / ``col in {a, b}`` (abbreviated past :data:`SHOWN_LEVELS`) and whether MISSING is in the set."""
    missing = MISSING in labels
    shown = [str(x) for x in labels if x != MISSING]
    if not shown:
        return "", missing
    if len(shown) == 1:
        return f"{col} = {shown[0]}", missing
    if not full and len(shown) > SHOWN_LEVELS + 1:
        rest = len(shown) - SHOWN_LEVELS
        return f"{col} in {{{', '.join(shown[:SHOWN_LEVELS])} and {rest:,} more}}", missing
    return f"{col} in {{{', '.join(shown)}}}", missing


def _render(col: str, st: _State, *, full: bool, alone: bool) -> str:
    if st.only_missing:
        return f"{col} is missing"
    if st.labels is not None and st.labels.labels is not None:
        core, missing = _label_set(col, st.labels.labels, full)
        if not core:
            return f"{col} is missing"
    elif st.labels is not None:  # one value of a 0/1 column
        core, missing = f"{col} = {st.labels.value}", bool(st.missing)
    else:
        lo, hi = st.lo, st.hi
        if lo is not None and hi is not None:
            core = f"{lo.value} < {col} <= {hi.value}"
        elif lo is not None:
            core = f"{col} > {lo.value}"
        elif hi is not None:
            core = f"{col} <= {hi.value}"
        else:
            return f"{col} is not missing" if st.missing is False else ""
        missing = bool(st.missing)
    if not missing:
        return core
    return f"{core} or missing" if alone else f"({core} or missing)"


def combine(conditions: list[Condition], full: bool = False) -> str:
    """Join a path's conditions with " & ", merging bounds on the same numeric column
    (``age > 30 & age <= 50`` reads ``30 < age <= 50``), keeping the last (narrowest) set of a
    categorical column, and reading missing values as their own condition (``age is missing``,
    ``age > 50 or missing``; parenthesized beside other columns). ``full`` lists every category
    of a long set (by default sets past :data:`SHOWN_LEVELS` labels are abbreviated)."""
    if not conditions:
        return "all units"
    state: dict = {}
    for c in conditions:
        state.setdefault(c.column, _State()).add(c)
    alone = [p for p in (_render(col, st, full=full, alone=True) for col, st in state.items()) if p]
    if len(alone) <= 1:
        return alone[0] if alone else "all units"
    return " & ".join(p for p in (_render(col, st, full=full, alone=False) for col, st in state.items()) if p)


# Operators are recognized only between spaces, so a name such as "R&D" stays text.
RULE_OPERATORS = {
    "<=": (r"$\leq$", "\u2264"), ">=": (r"$\geq$", "\u2265"), "<": ("$<$", "<"), ">": ("$>$", ">"),
    "=": ("$=$", "="), "==": ("$=$", "="), "!=": (r"$\neq$", "\u2260"),
    "&": ("and", "and"), "and": ("and", "and"), "|": ("or", "or"), "or": ("or", "or"),
    "in": (r"$\in$", "\u2208"), "not in": (r"$\notin$", "\u2209"),
}
_CLOSING = {"{": "}", "[": "]"}


def lex_rule(rule: str) -> list[tuple[str, str]]:
    """Split a rule into ("op", op), ("set", "{inner}"), ("str", '"x"'), ("name", "x"), ("text", s), ("sp", " ")."""
    out: list[tuple[str, str]] = []
    i, n = 0, len(rule)
    while i < n:
        ch = rule[i]
        if ch.isspace():
            out.append(("sp", " "))
            while i < n and rule[i].isspace():
                i += 1
            continue
        if ch in "\"'`":
            j = rule.find(ch, i + 1)
            j = n - 1 if j < 0 else j
            out.append(("name" if ch == "`" else "str", rule[i:j + 1]))
            i = j + 1
            continue
        if ch in _CLOSING:
            depth, j = 0, i
            while j < n:
                if rule[j] == ch:
                    depth += 1
                elif rule[j] == _CLOSING[ch]:
                    depth -= 1
                    if depth == 0:
                        break
                j += 1
            out.append(("set", rule[i:j + 1]))
            i = j + 1
            continue
        j = i
        while j < n and not rule[j].isspace() and rule[j] not in "\"'`{[":
            j += 1
        out.append(("text", rule[i:j]))
        i = j
    # A text token that is an operator, standing between spaces (or at an end), is an operator.
    for k, (kind, tok) in enumerate(out):
        spaced = (k == 0 or out[k - 1][0] == "sp") and (k == len(out) - 1 or out[k + 1][0] == "sp")
        if kind == "text" and spaced and tok in RULE_OPERATORS:
            out[k] = ("op", tok)
    merged: list[tuple[str, str]] = []
    for kind, tok in out:  # "not in" is one operator
        if kind == "op" and tok == "in" and len(merged) >= 2 and merged[-2] == ("text", "not") and merged[-1][0] == "sp":
            merged[-2:] = [("op", "not in")]
        else:
            merged.append((kind, tok))
    return merged


def rule_text(rule) -> str:
    """A rule as every screen output prints it (tables in HTML and Markdown, terminal, figures, widget).

    Unicode comparison signs, conditions joined with "and", set membership as "∈": ``age <= 40 &
    region in {east, west}`` reads ``age ≤ 40 and region ∈ {east, west}``. Not escaped.
    """
    parts = []
    for kind, tok in lex_rule(str(rule)):
        if kind == "op":
            parts.append(RULE_OPERATORS[tok][1])
        elif kind == "name" and len(tok) >= 2 and tok[-1] == "`":
            parts.append(tok[1:-1])
        else:
            parts.append(tok)
    return "".join(parts).strip()
