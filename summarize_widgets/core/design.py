"""Covariate encoding shared by the summaries.

One place decides what a column is (numeric or categorical), checks that it
can take part in a summary, and encodes it: ordered codes for the tree,
dummy columns for the linear fit, terms for the additive fit.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from .validate import SummaryError

__all__ = ["ColumnSpec", "MISSING", "OTHER", "MAX_LEVELS", "classify_columns", "category_codes", "linear_design"]

#: Label of the category that holds missing values of a categorical covariate.
MISSING = "(missing)"
#: Label of the category that pools rare levels (``pool_levels=``).
OTHER = "(other)"
#: Most levels a categorical covariate may have in the linear and additive summaries by default
#: (one coefficient per level; ``max_levels=`` raises it, ``pool_levels=`` pools the rest).
MAX_LEVELS = 50


@dataclass(frozen=True)
class ColumnSpec:
    """What one covariate is and how it is encoded.

    Attributes
    ----------
    name : str
    kind : {"numeric", "categorical"}
    categories : tuple of str
        Category labels (categorical only), in the table's own order; ``MISSING``
        last when the column has missing values.
    n_missing : int
    pooled : bool
        True when rare levels were pooled into :data:`OTHER` (labels not kept map there).
    """

    name: str
    kind: str
    categories: tuple = field(default=())
    n_missing: int = 0
    pooled: bool = False


def _factorize(series: pd.Series) -> tuple[np.ndarray, list[str]]:
    """Codes into the distinct labels (as strings; booleans read True/False), -1 for missing.

    Vectorized through ``pd.factorize``, so a million-row column costs milliseconds.
    """
    codes, uniques = pd.factorize(series, use_na_sentinel=True)
    return np.asarray(codes, dtype=np.int64), [str(u) for u in uniques]


def classify_columns(covariates: pd.DataFrame, columns: list[str], *, max_levels: int | None = None,
                     pool_levels: int | None = None, summary: str = "") -> list[ColumnSpec]:
    """Classify and check each column; raise naming the column when it cannot be used.

    ``max_levels`` (linear and additive summaries: one coefficient per level) refuses a categorical
    column with more levels, naming it and its count, unless ``pool_levels`` is given: then such a
    column keeps its ``pool_levels`` most common levels and pools the rest into :data:`OTHER`.
    """
    specs = _classify(covariates, columns)
    if max_levels is None:
        return specs
    out = []
    for spec in specs:
        n_levels = len([c for c in spec.categories if c != MISSING])
        if spec.kind != "categorical" or n_levels <= max_levels:
            out.append(spec)
            continue
        if pool_levels is None:
            raise SummaryError(
                f"Covariate {spec.name!r} has {n_levels:,} levels, more than the {summary} summary takes "
                f"(max_levels={max_levels}: one coefficient per level). Drop it from `columns` (the tree summary "
                f"handles it), pass pool_levels=k to keep its k most common levels and pool the rest into "
                f"{OTHER!r}, or raise max_levels."
            )
        counts = covariates[spec.name].astype(str)[covariates[spec.name].notna()].value_counts(sort=True)
        kept = set(counts.index[:pool_levels])
        cats = tuple(c for c in spec.categories if c in kept) + (OTHER,) + ((MISSING,) if spec.n_missing else ())
        out.append(ColumnSpec(spec.name, "categorical", cats, spec.n_missing, pooled=True))
    return out


def _classify(covariates: pd.DataFrame, columns: list[str]) -> list[ColumnSpec]:
    specs = []
    for name in columns:
        s = covariates[name]
        n_missing = int(s.isna().sum())
        if n_missing == len(s):
            raise SummaryError(f"Covariate {name!r} has no observed values (all {len(s)} are missing); drop it from `columns`.")
        if pd.api.types.is_bool_dtype(s) or isinstance(s.dtype, pd.CategoricalDtype) or not pd.api.types.is_numeric_dtype(s):
            if pd.api.types.is_datetime64_any_dtype(s) or pd.api.types.is_timedelta64_dtype(s):
                raise SummaryError(
                    f"Covariate {name!r} holds dates or durations ({s.dtype}); convert it to a number "
                    "(for example years since a reference date) first."
                )
            _, uniques = _factorize(s)
            seen = set(uniques)
            if isinstance(s.dtype, pd.CategoricalDtype):
                cats = [str(c) for c in s.cat.categories if str(c) in seen]
            elif pd.api.types.is_bool_dtype(s) or seen <= {"True", "False"}:
                cats = [c for c in ("False", "True") if c in seen]
            else:
                cats = sorted(seen)
            if n_missing:
                cats.append(MISSING)
            if len(cats) < 2:
                raise SummaryError(
                    f"Covariate {name!r} has a single value ({cats[0]!r}) for every unit; it cannot describe "
                    "any difference between units. Drop it from `columns`."
                )
            specs.append(ColumnSpec(name, "categorical", tuple(cats), n_missing))
        else:
            vals = s.to_numpy(dtype=np.float64, na_value=np.nan)
            if not np.isfinite(vals[~np.isnan(vals)]).all():
                raise SummaryError(f"Covariate {name!r} contains infinite values; replace them with finite numbers or NaN.")
            observed = np.unique(vals[~np.isnan(vals)])
            if observed.size < 2 and not n_missing:
                raise SummaryError(
                    f"Covariate {name!r} has a single value ({observed[0]:g}) for every unit; it cannot describe "
                    "any difference between units. Drop it from `columns`."
                )
            specs.append(ColumnSpec(name, "numeric", (), n_missing))
    return specs


def category_codes(series: pd.Series, spec: ColumnSpec) -> np.ndarray:
    """Integer codes into ``spec.categories`` (missing -> the MISSING category).

    Raises naming the column and the labels when ``series`` holds categories not
    seen when the summary was fitted.
    """
    codes, uniques = _factorize(series)
    lookup = {c: k for k, c in enumerate(spec.categories)}
    other = lookup[OTHER] if spec.pooled else -1  # pooled: every level not kept is "(other)"
    table = np.array([lookup.get(u, other) for u in uniques] + [lookup.get(MISSING, -1)], dtype=np.int64)
    out = table[codes]  # code -1 (missing) picks the last entry: the MISSING category
    if (out < 0).any():
        unknown = sorted({uniques[c] if c >= 0 else MISSING for c in np.unique(codes[out < 0])})
        raise SummaryError(
            f"Covariate {spec.name!r} has categories not seen when the summary was fitted: "
            f"{', '.join(repr(u) for u in unknown[:10])}. Known: {', '.join(repr(c) for c in spec.categories)}."
        )
    return out


def numeric_values(series: pd.Series) -> np.ndarray:
    return series.to_numpy(dtype=np.float64, na_value=np.nan)


def linear_design(covariates: pd.DataFrame, specs: list[ColumnSpec], *, fill=None):
    """Design matrix ``[1, X]`` for the linear summary.

    Numeric columns enter as they are; a numeric column with missing values is
    filled with its (unweighted) mean and gets an indicator column ``"<name>: missing"``
    (the usual missing-indicator method). Categorical columns are dummy-coded against
    their first category (the reference).

    Returns
    -------
    B : ndarray, shape (n_units, n_terms)
    terms : list of str
        Column names, ``"(intercept)"`` first; a dummy reads ``"fuel = oil"``.
    fill : dict
        Fill values used for missing numeric values (pass back to encode new rows alike).
    """
    cols = [np.ones(len(covariates))]
    terms = ["(intercept)"]
    fill = dict(fill or {})
    for spec in specs:
        s = covariates[spec.name]
        if spec.kind == "numeric":
            x = numeric_values(s)
            miss = np.isnan(x)
            if spec.name not in fill:
                fill[spec.name] = float(np.nanmean(x))
            cols.append(np.where(miss, fill[spec.name], x))
            terms.append(spec.name)
            if spec.n_missing:
                cols.append(miss.astype(np.float64))
                terms.append(f"{spec.name}: missing")
        else:
            codes = category_codes(s, spec)
            for k, cat in enumerate(spec.categories[1:], start=1):
                cols.append((codes == k).astype(np.float64))
                terms.append(f"{spec.name} = {cat}")
    return np.column_stack(cols), terms, fill
