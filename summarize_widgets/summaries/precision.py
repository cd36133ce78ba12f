"""Is every reported number precise enough? One verdict over the Monte Carlo error columns of all tables.

Every table carries ESS (bulk and tail), R-hat and a ``mc_warning`` per row
(:mod:`summarize_widgets.core.stats`; thresholds R-hat > 1.01 and ESS < 400 after
Vehtari et al. 2021, Bayesian Analysis). :func:`precision_check` gathers them into one
table (one row per summary) and one plain-language verdict, so the report, the
explorer's evidence panel and the command line say in one line whether any number
is not backed by enough effective draws, and which.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Mapping

import numpy as np
import pandas as pd

from ..core.stats import ESS_MIN, RHAT_MAX

__all__ = ["PrecisionCheck", "precision_check"]

#: How many flagged rows the verdict names before it says "and k more".
_NAMED = 3


@dataclass(frozen=True)
class PrecisionCheck:
    """Monte Carlo precision of every table of one set of summaries.

    Attributes
    ----------
    rows : DataFrame
        One row per summary: ``summary``, ``rows`` (numbers checked), ``flagged``, ``min_ess_bulk``,
        ``min_ess_tail``, ``max_rhat``, ``max_mcse_share`` (largest Monte Carlo standard error of a mean as a
        share of that number's posterior sd), ``flagged_rows`` (their labels, "; "-joined).
    message : str
        Plain-language verdict.
    ok : bool
        No row is flagged.
    """

    rows: pd.DataFrame
    message: str
    ok: bool
    settings: dict = field(default_factory=dict)

    def table(self) -> pd.DataFrame:
        out = self.rows.copy()
        out.attrs.update({"summary": "precision", "rhat_max": RHAT_MAX, "ess_min": ESS_MIN, "message": self.message})
        return out


def _row_names(tab: pd.DataFrame) -> list[str]:
    for col in ("label", "term", "group", "quantity", "added", "covariate"):
        if col in tab.columns:
            return [str(v) for v in tab[col]]
    return [str(i) for i in tab.index]


def _agg(tab: pd.DataFrame, col: str, fn) -> float:
    v = pd.to_numeric(tab[col], errors="coerce").to_numpy(dtype=float) if col in tab.columns else np.array([])
    v = v[np.isfinite(v)]
    return float(fn(v)) if v.size else float("nan")


def precision_check(tables: Mapping[str, pd.DataFrame]) -> PrecisionCheck:
    """One verdict over the ``mc_warning``, ``ess_bulk``, ``ess_tail`` and ``rhat`` columns of ``tables``.

    Parameters
    ----------
    tables : mapping of name -> DataFrame
        Summary tables (tree, groups, linear, evidence ...); tables without a ``mc_warning`` column are skipped.
    """
    recs, flagged_all = [], []
    for name, tab in tables.items():
        if tab is None or "mc_warning" not in tab.columns or not len(tab):
            continue
        warn = tab["mc_warning"].fillna("").astype(str)
        bad = warn != ""
        names = _row_names(tab)
        flagged = [f"{names[i]} ({warn.iloc[i]})" for i in np.flatnonzero(bad.to_numpy())]
        flagged_all.extend(f"{name} {f}" for f in flagged)

        ratio = float("nan")
        if {"mcse_mean", "sd"} <= set(tab.columns):
            m = pd.to_numeric(tab["mcse_mean"], errors="coerce").to_numpy(dtype=float)
            sd = pd.to_numeric(tab["sd"], errors="coerce").to_numpy(dtype=float)
            ok = np.isfinite(m) & np.isfinite(sd) & (sd > 0)
            ratio = float(np.max(m[ok] / sd[ok])) if ok.any() else float("nan")
        recs.append({"summary": name, "rows": int(len(tab)), "flagged": int(bad.sum()), "max_mcse_share": ratio,
                     "min_ess_bulk": _agg(tab, "ess_bulk", np.min), "min_ess_tail": _agg(tab, "ess_tail", np.min),
                     "max_rhat": _agg(tab, "rhat", np.max), "flagged_rows": "; ".join(flagged)})
    rows = pd.DataFrame(recs, columns=["summary", "rows", "flagged", "min_ess_bulk", "min_ess_tail", "max_rhat",
                                       "max_mcse_share", "flagged_rows"])
    n = int(rows["rows"].sum()) if len(rows) else 0
    k = len(flagged_all)
    rule = f"ESS of at least {ESS_MIN} and R-hat at most {RHAT_MAX} (Vehtari et al. 2021)"
    if not n:
        msg = "No table carries Monte Carlo error columns; precision was not checked."
    elif k == 0:
        ess = np.nanmin(rows[["min_ess_bulk", "min_ess_tail"]].to_numpy(dtype=float)) if len(rows) else float("nan")
        share = np.nanmax(rows["max_mcse_share"].to_numpy(dtype=float)) if rows["max_mcse_share"].notna().any() else np.nan
        tail = (f" Monte Carlo standard errors of the means are at most {100 * share:.1f}% of their posterior sd."
                if np.isfinite(share) else "")
        msg = f"All {n} reported numbers meet {rule}; the smallest ESS is {ess:,.0f}.{tail}"
    else:
        named = "; ".join(flagged_all[:_NAMED]) + (f"; and {k - _NAMED} more" if k > _NAMED else "")
        msg = (f"{k} of {n} reported numbers fall short of {rule}: {named}. Run more or longer chains before "
               "reporting them; the tables' mcse columns give their Monte Carlo error.")
    return PrecisionCheck(rows=rows, message=msg, ok=k == 0, settings={"summary": "precision", "rhat_max": RHAT_MAX,
                                                                       "ess_min": ESS_MIN})
