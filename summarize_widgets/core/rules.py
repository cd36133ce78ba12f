"""Readable rules for tree splits: one formatting core for every renderer."""
from __future__ import annotations

import numpy as np

__all__ = ["nice_threshold", "Condition", "combine"]


def _fmt(x: float) -> str:
    if float(x).is_integer() and abs(x) < 1e15:
        return str(int(x))
    return np.format_float_positional(x, precision=12, unique=True, trim="-")


def nice_threshold(threshold: float, left_max: float, right_min: float) -> str:
    """The shortest decimal t with ``left_max <= t < right_min`` (so ``x <= t`` keeps the fitted partition).

    Falls back to the fitted threshold when the side extremes are unknown.
    """
    if not (np.isfinite(left_max) and np.isfinite(right_min)):
        return _fmt(threshold)
    for digits in range(1, 17):
        for cand in (float(f"{left_max:.{digits}g}"), float(f"{threshold:.{digits}g}")):
            if left_max <= cand < right_min:
                return _fmt(cand)
    return _fmt(threshold)


class Condition:
    """One edge condition: numeric (``<=`` / ``>``) or categorical (a set of labels)."""

    def __init__(self, column: str, *, op: str | None = None, value: str | None = None, numeric_value: float | None = None,
                 labels: tuple | None = None, with_missing: bool = False):
        self.column = column
        self.op = op
        self.value = value
        self.numeric_value = numeric_value
        self.labels = labels
        self.with_missing = with_missing

    def text(self) -> str:
        if self.labels is not None:
            if len(self.labels) == 1:
                return f"{self.column} = {self.labels[0]}"
            return f"{self.column} in {{{', '.join(self.labels)}}}"
        core = f"{self.column} {self.op} {self.value}"
        return f"({core} or missing)" if self.with_missing else core


def combine(conditions: list[Condition]) -> str:
    """Join a path's conditions with " & ", merging bounds on the same numeric column
    (``age > 30 & age <= 50`` reads ``30 < age <= 50``) and keeping the last (narrowest)
    set of a categorical column."""
    if not conditions:
        return "all units"
    order: list[str] = []
    state: dict[str, dict] = {}
    for c in conditions:
        if c.column not in state:
            order.append(c.column)
            state[c.column] = {"lo": None, "hi": None, "labels": None, "missing": None}
        st = state[c.column]
        if c.labels is not None:
            st["labels"] = c
            continue
        if c.op == ">":
            if st["lo"] is None or c.numeric_value > st["lo"].numeric_value:
                st["lo"] = c
        else:
            if st["hi"] is None or c.numeric_value < st["hi"].numeric_value:
                st["hi"] = c
        # missing values follow every edge only if every edge on the path takes them
        st["missing"] = c.with_missing if st["missing"] is None else (st["missing"] and c.with_missing)
    parts = []
    for col in order:
        st = state[col]
        if st["labels"] is not None:
            parts.append(st["labels"].text())
            continue
        lo, hi = st["lo"], st["hi"]
        if lo is not None and hi is not None:
            core = f"{lo.value} < {col} <= {hi.value}"
        elif lo is not None:
            core = f"{col} > {lo.value}"
        else:
            core = f"{col} <= {hi.value}"
        parts.append(f"({core} or missing)" if st["missing"] else core)
    return " & ".join(parts)
