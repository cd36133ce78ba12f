"""Readable rules for tree splits: one formatting core for every renderer."""
from __future__ import annotations

import numpy as np

__all__ = ["nice_threshold", "Condition", "combine"]


def _fmt(x: float) -> str:
    if float(x).is_integer() and abs(x) < 1e15:
        return str(int(x))
    return np.format_float_positional(x, precision=12, unique=True, trim="-")


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
    """One edge condition: numeric (``<=`` / ``>``), one value of a 0/1 column (``op="="``,
    read ``marr = 0``) or categorical (a set of labels)."""

    def __init__(self, column: str, *, op: str | None = None, value: str | None = None, numeric_value: float | None = None,
                 labels: tuple | None = None, with_missing: bool = False):
        self.column = column
        self.op = op
        self.value = value
        self.numeric_value = numeric_value
        self.labels = labels
        self.with_missing = with_missing

    def text(self) -> str:
        if self.op == "=":
            core = f"{self.column} = {self.value}"
            return f"({core} or missing)" if self.with_missing else core
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
        if c.labels is not None or c.op == "=":  # a set of categories, or one value of a 0/1 column
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
