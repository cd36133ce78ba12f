"""The one statistics core: per-draw quantities in, table columns out.

Every table of every summary (subgroups, groups, linear terms, additive curves, contrasts,
summary R^2) gets its numbers here, so a column means the same thing everywhere:

- ``mean``, ``sd``, ``lower``, ``upper`` (credible interval), ``prob_positive`` (share of
  draws above 0) -- :func:`draw_summary`;
- Monte Carlo error from arviz-stats (Vehtari, Gelman, Simpson, Carpenter & Buerkner 2021,
  Bayesian Analysis): ``ess_bulk``, ``ess_tail``, ``rhat`` (rank-normalized split R-hat),
  ``mcse_mean`` and the MCSE of each interval endpoint (``mcse_lower``, ``mcse_upper``), and
  ``mc_warning``, a short text naming a chain or precision problem (R-hat above
  :data:`RHAT_MAX` or an ESS below :data:`ESS_MIN`) -- :func:`mc_error`.

Draws are stored chain-major (all of chain 1, then chain 2, ...), as
:class:`~summarize_widgets.core.draws.EffectDraws` keeps them; see docs/method.md section 6.
"""
from __future__ import annotations

import warnings

import numpy as np

try:  # arviz-stats 0.x (the newest on Python 3.11 is 0.8): the numpy core is arviz_stats.base.array_stats
    from arviz_stats.base import array_stats
except ImportError:  # pragma: no cover - newer layouts: the top-level functions take arrays with the same axes
    import arviz_stats as array_stats

from .intervals import credible_interval, prob_above
from .validate import check_interval, check_level

__all__ = ["STAT_COLUMNS", "MC_COLUMNS", "RHAT_MAX", "ESS_MIN", "TAIL_PROBS", "draw_summary", "mc_diagnostics",
           "endpoint_mcse", "mc_error", "summary_columns"]

#: The statistics columns of every table, in order.
STAT_COLUMNS = ("mean", "sd", "lower", "upper", "prob_positive")
#: The Monte Carlo error columns of every table, in order.
MC_COLUMNS = ("ess_bulk", "ess_tail", "rhat", "mcse_mean", "mcse_lower", "mcse_upper", "mc_warning")
#: R-hat above this flags a chain problem (Vehtari et al. 2021, section 4: "R-hat < 1.01").
RHAT_MAX = 1.01
#: Bulk or tail ESS below this flags too few effective draws (Vehtari et al. 2021: ESS > 400).
ESS_MIN = 400
#: Quantiles whose ESS is the tail ESS (arviz-stats' convention, the 5% and 95% quantiles).
TAIL_PROBS = (0.05, 0.95)


def _by_chain(draws: np.ndarray, n_chains: int) -> np.ndarray:
    """(n_draws, k) stored chain-major -> (n_chains, draws_per_chain, k)."""
    x = np.asarray(draws, dtype=np.float64)
    if x.ndim == 1:
        x = x[:, None]
    per = x.shape[0] // n_chains
    return x[: per * n_chains].reshape(n_chains, per, x.shape[1])


def _quiet(func, *args, **kwargs):
    # Constant columns (a share that is 1 in every draw) make arviz divide by zero; they get NaN.
    with warnings.catch_warnings(), np.errstate(all="ignore"):
        warnings.simplefilter("ignore", RuntimeWarning)
        return np.asarray(func(*args, **kwargs), dtype=np.float64)


def draw_summary(draws: np.ndarray, level: float = 0.95, interval: str = "equal-tailed",
                 threshold: float = 0.0) -> dict:
    """Mean, sd, credible interval and ``P(> threshold)`` of each column of ``draws`` (n_draws, k).

    Returns a dict of arrays keyed by :data:`STAT_COLUMNS`.
    """
    x = np.asarray(draws, dtype=np.float64)
    lo, hi = credible_interval(x, level, interval)
    return {
        "mean": x.mean(axis=0),
        "sd": x.std(axis=0, ddof=1),
        "lower": lo,
        "upper": hi,
        "prob_positive": prob_above(x, threshold),
    }


def mc_diagnostics(draws: np.ndarray, n_chains: int = 1) -> dict:
    """Level-free Monte Carlo diagnostics of each column of ``draws`` (n_draws, k).

    ``ess_bulk`` and ``ess_tail`` (:data:`TAIL_PROBS`), ``rhat`` and ``mcse_mean``, from
    ``arviz_stats.base.array_stats``. NaN where a column is constant or a chain has fewer
    than 4 draws (arviz-stats' minimum).
    """
    x = _by_chain(draws, n_chains)
    return {
        "ess_bulk": _quiet(array_stats.ess, x, chain_axis=0, draw_axis=1, method="bulk"),
        "ess_tail": _quiet(array_stats.ess, x, chain_axis=0, draw_axis=1, method="tail", prob=TAIL_PROBS),
        "rhat": _quiet(array_stats.rhat, x, chain_axis=0, draw_axis=1),
        "mcse_mean": _quiet(array_stats.mcse, x, chain_axis=0, draw_axis=1, method="mean"),
    }


def endpoint_mcse(draws: np.ndarray, lower: np.ndarray, upper: np.ndarray, n_chains: int = 1,
                  *, level: float, interval: str) -> tuple[np.ndarray, np.ndarray]:
    """MCSE of the interval endpoints, as MCSEs of quantiles (arviz-stats, method "quantile").

    Equal-tailed endpoints are the ``(1 -+ level) / 2`` quantiles. A highest-density endpoint
    is treated as the quantile at its own empirical probability (the share of draws at or
    below it): an approximation that ignores the error in choosing the shortest window.
    """
    x = _by_chain(draws, n_chains)
    if check_interval(interval) == "equal-tailed":
        a = (1.0 - check_level(level)) / 2.0
        return (_quiet(array_stats.mcse, x, chain_axis=0, draw_axis=1, method="quantile", prob=a),
                _quiet(array_stats.mcse, x, chain_axis=0, draw_axis=1, method="quantile", prob=1.0 - a))
    flat = x.reshape(-1, x.shape[2])
    out = []
    for ends in (lower, upper):
        p = np.clip((flat <= np.asarray(ends)[None, :]).mean(axis=0), 1e-6, 1 - 1e-6)
        out.append(np.array([float(_quiet(array_stats.mcse, x[:, :, [j]], chain_axis=0, draw_axis=1,
                                          method="quantile", prob=float(pj))[0]) for j, pj in enumerate(p)]))
    return out[0], out[1]


def _warning_text(ess_bulk, ess_tail, rhat, sd) -> list[str]:
    notes = []
    for eb, et, rh, s in zip(ess_bulk, ess_tail, rhat, sd):
        if not s > 0:
            notes.append("")
            continue
        problems = []
        if np.isnan(eb) or np.isnan(et):
            problems.append("too few draws per chain for ESS")
        else:
            ess = min(eb, et)
            if ess < ESS_MIN:
                problems.append(f"ESS {ess:.0f} < {ESS_MIN}")
        if np.isfinite(rh) and rh > RHAT_MAX:
            problems.append(f"R-hat {rh:.3f} > {RHAT_MAX}")
        notes.append("; ".join(problems))
    return notes


def mc_error(draws: np.ndarray, lower, upper, sd, n_chains: int = 1, *, level: float, interval: str,
             diagnostics: dict | None = None) -> dict:
    """Every Monte Carlo error column (:data:`MC_COLUMNS`) of each column of ``draws``.

    ``diagnostics`` reuses level-free results of :func:`mc_diagnostics` for these columns.
    """
    diag = diagnostics if diagnostics is not None else mc_diagnostics(draws, n_chains)
    mlo, mhi = endpoint_mcse(draws, lower, upper, n_chains, level=level, interval=interval)
    out = dict(diag)
    out["mcse_lower"] = mlo
    out["mcse_upper"] = mhi
    out["mc_warning"] = _warning_text(diag["ess_bulk"], diag["ess_tail"], diag["rhat"], np.asarray(sd))
    return {k: out[k] for k in MC_COLUMNS}


def summary_columns(draws: np.ndarray, *, level: float = 0.95, interval: str = "equal-tailed", n_chains: int = 1,
                    threshold: float = 0.0, diagnostics: dict | None = None) -> dict:
    """:data:`STAT_COLUMNS` followed by :data:`MC_COLUMNS` for each column of ``draws`` (n_draws, k)."""
    level = check_level(level)
    interval = check_interval(interval)
    stats = draw_summary(draws, level, interval, threshold)
    stats.update(mc_error(draws, stats["lower"], stats["upper"], stats["sd"], n_chains, level=level,
                          interval=interval, diagnostics=diagnostics))
    return stats
