"""Small validators shared by every public entry point.

Every message has one shape: which argument, what it must be, what it got.
"""
from __future__ import annotations

from collections.abc import Iterable, Sequence
from numbers import Integral, Real

import numpy as np
import pandas as pd

__all__ = ["check_levels", "SummaryError", "format_names", "check_int", "check_level", "INTERVAL_TYPES", "check_interval",
           "check_columns", "check_covariates", "describe_nonfinite"]


class SummaryError(ValueError):
    """Raised for input that cannot be summarized (a ValueError, so callers can catch either)."""


def format_names(names: Iterable[object], limit: int = 12) -> str:
    names = [str(n) for n in names]
    shown = ", ".join(repr(n) for n in names[:limit])
    if len(names) > limit:
        shown += f", ... ({len(names) - limit} more)"
    return shown


def check_int(value, name: str, *, low: int | None = None, high: int | None = None) -> int:
    """Return ``value`` as int, or raise naming ``name`` and the allowed range."""
    if isinstance(value, bool) or not isinstance(value, Integral):
        raise SummaryError(f"`{name}` must be an integer; got {value!r} ({type(value).__name__}).")
    value = int(value)
    if low is not None and value < low:
        rng = f"between {low} and {high}" if high is not None else f">= {low}"
        raise SummaryError(f"`{name}` must be {rng}; got {value}.")
    if high is not None and value > high:
        rng = f"between {low} and {high}" if low is not None else f"<= {high}"
        raise SummaryError(f"`{name}` must be {rng}; got {value}.")
    return value


def check_level(level) -> float:
    """A credible level strictly between 0 and 1."""
    if isinstance(level, bool) or not isinstance(level, Real) or not 0.0 < float(level) < 1.0:
        raise SummaryError(f"`level` must be a number strictly between 0 and 1 (for example 0.95); got {level!r}.")
    return float(level)


INTERVAL_TYPES = ("equal-tailed", "highest-density")


def check_interval(interval) -> str:
    if interval not in INTERVAL_TYPES:
        raise SummaryError(f"`interval` must be one of {format_names(INTERVAL_TYPES)}; got {interval!r}.")
    return interval


def check_levels(max_levels, pool_levels) -> tuple[int, int | None]:
    """Check ``max_levels`` (at least 2) and ``pool_levels`` (None, or 1 to ``max_levels``)."""
    max_levels = check_int(max_levels, "max_levels", low=2, high=10**9)
    if pool_levels is not None:
        pool_levels = check_int(pool_levels, "pool_levels", low=1, high=max_levels)
    return max_levels, pool_levels


def check_columns(columns, available: Sequence[str], name: str = "columns") -> list[str]:
    """Resolve a column selection against the covariate table; unknown names are listed."""
    available = list(available)
    if columns is None:
        return available
    if isinstance(columns, str) or not hasattr(columns, "__iter__"):
        columns = [columns]
    # covariate names are read as text (an integer column name 3 is "3"), so `columns=[3]` names it too
    columns = [c if c in available or not isinstance(c, (int, np.integer)) or str(c) not in available else str(c)
               for c in columns]
    if not columns:
        raise SummaryError(f"`{name}` must name at least one covariate; got an empty list.")
    missing = [c for c in columns if c not in available]
    if missing:
        raise SummaryError(
            f"`{name}` names covariates that are not in the covariate table: {format_names(missing)}. "
            f"Available: {format_names(available)}."
        )
    if len(set(columns)) != len(columns):
        dup = sorted({str(c) for c in columns if columns.count(c) > 1})
        raise SummaryError(f"`{name}` lists some covariates more than once: {format_names(dup)}.")
    return columns


def check_covariates(covariates, n_units: int | None = None, name: str = "covariates") -> pd.DataFrame:
    """A DataFrame with unique string-able column names and (optionally) ``n_units`` rows."""
    if not isinstance(covariates, pd.DataFrame):
        raise SummaryError(
            f"`{name}` must be a pandas DataFrame with one row per unit; got {type(covariates).__name__}."
        )
    cols = [str(c) for c in covariates.columns]
    blank = [k for k, c in enumerate(cols) if not c.strip()]
    if blank:
        raise SummaryError(
            f"`{name}` has a column with an empty or blank name (position {blank[0]} of {len(cols)}); rules and tables "
            "would show no name. Rename it, e.g. covariates.rename(columns={'': 'my_name'})."
        )
    dup = sorted({c for c in cols if cols.count(c) > 1})
    if dup:
        raise SummaryError(f"`{name}` has duplicated column names: {format_names(dup)}. Rename them so each is unique.")
    if covariates.shape[1] == 0:
        raise SummaryError(f"`{name}` has no columns; summaries need at least one covariate.")
    if n_units is not None and covariates.shape[0] != n_units:
        raise SummaryError(
            f"`{name}` has {covariates.shape[0]} rows but the draws have {n_units} units; "
            "they must have one covariate row per unit, in the same order."
        )
    out = covariates.reset_index(drop=True)
    out.columns = cols
    return out


def describe_nonfinite(mask_rows: np.ndarray, mask_cols: np.ndarray, count: int, name: str) -> str:
    """Message for NaN/inf draws: how many, in how many draws and units."""
    return (
        f"`{name}` contains {count} NaN or infinite value{'s' if count != 1 else ''} "
        f"in {int(mask_rows.sum())} draw{'s' if mask_rows.sum() != 1 else ''} and "
        f"{int(mask_cols.sum())} unit{'s' if mask_cols.sum() != 1 else ''} "
        f"(first draw {int(np.flatnonzero(mask_rows)[0])}, first unit {int(np.flatnonzero(mask_cols)[0])}). "
        "Drop or repair those draws before summarizing."
    )
