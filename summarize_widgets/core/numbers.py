"""One number formatter for every output a reader sees (terminal, widget, tables, figures, report).

Digits are chosen once per column, never per cell, from two things:

- the size of the numbers: the largest ``|mean|`` (or posterior sd, when larger) of the column
  gets :data:`SIGNIFICANT` significant digits;
- their Monte Carlo error: no digit finer than the largest Monte Carlo standard error (MCSE)
  of the column, i.e. the last printed digit's place value is at least the MCSE (a rule of
  thumb, common practice after Vehtari, Gelman, Simpson, Carpenter & Buerkner 2021, who use
  the MCSE to decide how many digits of a posterior summary to report).

Both inputs are level-free (means, sds and the MCSE of the mean do not depend on the credible
level), so a subgroup reads the same at 80% and at 95%. Interval endpoints use the mean's
decimals, or fewer where the endpoints' own MCSE asks for fewer.

Probabilities print with 2 decimals (3 near 0 and 1) and as ``<0.001`` / ``>0.999`` at the
ends; shares as percentages; counts with thousands separators; missing values as ``NA``.
"""
from __future__ import annotations

import math

import numpy as np

__all__ = ["SIGNIFICANT", "MINUS", "MISSING_TEXT", "decimals_for", "effect_decimals", "fixed", "probability",
           "percent", "count", "interval", "shortest"]

#: Significant digits of the largest number of a column (before the Monte Carlo limit).
SIGNIFICANT = 3
#: The true minus sign used in screen text.
MINUS = "\u2212"
#: How a missing number reads.
MISSING_TEXT = "NA"
_MAX_DECIMALS = 10


def _finite_abs(values) -> np.ndarray:
    v = np.abs(np.asarray(values, dtype=np.float64).ravel())
    return v[np.isfinite(v)]


def decimals_for(values, errors=None, *, sig: int = SIGNIFICANT) -> int:
    """Decimals for a whole column.

    Parameters
    ----------
    values : array-like of float
        Numbers that set the size (for an effect column: its means and sds).
    errors : array-like of float, optional
        Monte Carlo standard errors; the last digit's place value is kept at or above the largest.
    sig : int, default 3
        Significant digits of the largest ``|value|``.

    Returns
    -------
    int
        Between 0 and 10.
    """
    v = _finite_abs(values)
    size = sig - 1 if v.size == 0 or v.max() == 0 else sig - 1 - math.floor(math.log10(v.max()))
    d = max(0, size)
    if errors is not None:
        e = _finite_abs(errors)
        e = e[e > 0]
        if e.size:
            d = min(d, max(0, math.floor(-math.log10(e.max()))))
    return int(min(d, _MAX_DECIMALS))


def effect_decimals(df, value: str = "mean") -> tuple[int, int]:
    """Decimals of an effect column and of its interval, from a summary table's own columns.

    The size comes from ``value`` and ``sd`` (when present), the Monte Carlo limit from
    ``mcse_mean``; the interval takes those decimals or fewer, as its endpoints' MCSE
    (``mcse_lower``, ``mcse_upper``) allows. Tables without MCSE columns are limited by size only.

    Returns
    -------
    (int, int)
        Decimals of the value column and of the interval column.
    """
    size = [df[value].to_numpy(dtype=float)]
    if "sd" in df.columns:
        size.append(df["sd"].to_numpy(dtype=float))
    err = df["mcse_mean"].to_numpy(dtype=float) if "mcse_mean" in df.columns else None
    d = decimals_for(np.concatenate(size), err)
    ends = [df[c].to_numpy(dtype=float) for c in ("mcse_lower", "mcse_upper") if c in df.columns]
    di = min(d, decimals_for(np.concatenate(size), np.concatenate(ends))) if ends else d
    return d, di


def _missing(x) -> bool:
    try:
        return x is None or not math.isfinite(float(x))
    except (TypeError, ValueError):
        return True


def fixed(x, decimals: int, *, minus: str = MINUS, grouping: bool = True) -> str:
    """``x`` with ``decimals`` decimals, a true minus sign, thousands separators; no ``-0.0``."""
    if _missing(x):
        return MISSING_TEXT
    x = float(x)
    text = f"{abs(x):,.{int(decimals)}f}" if grouping else f"{abs(x):.{int(decimals)}f}"
    if float(text.replace(",", "")) == 0.0 or x >= 0:
        return text
    return minus + text


def interval(lower, upper, decimals: int, *, minus: str = MINUS) -> str:
    """``[lower, upper]`` with shared decimals."""
    return f"[{fixed(lower, decimals, minus=minus)}, {fixed(upper, decimals, minus=minus)}]"


def probability(p, *, n_draws: int | None = None) -> str:
    """A posterior probability: 2 decimals, 3 within 0.01 of 0 or 1, ``<0.001`` / ``>0.999`` at the ends.

    With ``n_draws`` below 1,000 the ends are ``<1/n_draws`` rounded up (one draw's worth),
    so 0 of 200 draws reads ``<0.005``, never ``0``.
    """
    if _missing(p):
        return MISSING_TEXT
    p = float(p)
    floor = 0.001 if not n_draws or n_draws >= 1000 else float(shortest_up(1.0 / n_draws))
    if p < floor:
        return f"<{shortest(floor)}"
    if p > 1 - floor:
        return f">{shortest(1 - floor)}"
    return f"{p:.3f}" if (p < 0.01 or p > 0.99) else f"{p:.2f}"


def shortest_up(x: float) -> float:
    """The number with one significant digit at or above ``x`` (0.0042 -> 0.005)."""
    mag = 10.0 ** math.floor(math.log10(x))
    return math.ceil(round(x / mag, 9)) * mag


def shortest(x, precision: int | None = 12) -> str:
    """The shortest decimal that reads back as ``x`` (``0.1``, ``40``, ``37.83``); very small or very
    large magnitudes in scientific notation (``4.1e-10``, ``2.5e+18``) rather than a row of zeros.

    ``precision`` caps the decimals of the positional form; None keeps every digit needed to read
    back exactly (rule thresholds, which must select exactly the same units)."""
    if _missing(x):
        return MISSING_TEXT
    x = float(x)
    if x.is_integer() and abs(x) < 1e15:
        return str(int(x))
    if x != 0 and not 1e-4 <= abs(x) < 1e15:
        return np.format_float_scientific(x, unique=True, trim="-")
    return np.format_float_positional(x, precision=precision, unique=True, trim="-")


def percent(share, decimals: int = 1, *, minus: str = MINUS) -> str:
    """A share (0..1) as a percentage with ``decimals`` decimals; a small non-zero share reads ``<0.1%``."""
    if _missing(share):
        return MISSING_TEXT
    s = float(share) * 100
    smallest = 10.0 ** -decimals
    if 0 < s < smallest / 2:
        return f"<{fixed(smallest, decimals)}%"
    return fixed(s, decimals, minus=minus) + "%"


def count(n) -> str:
    """A count with thousands separators."""
    if _missing(n):
        return MISSING_TEXT
    return f"{int(round(float(n))):,}"
