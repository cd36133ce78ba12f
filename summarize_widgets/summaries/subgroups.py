"""Per-draw subgroup effects from subgroup sums, and the table every subgroup summary shares.

Tree leaves and pre-specified groups both reduce to two per-draw sums per
subgroup: ``A_sg = sum_{i in g} w_si T_si`` and ``W_sg = sum_{i in g} w_si``.
The subgroup effect in draw s is their ratio (for complier-weighted draws this
is the Wald ratio of METHOD.md section 5). This module turns the sums into the
shared table columns, so the tree and group summaries cannot drift apart.
"""
from __future__ import annotations

import numpy as np
import pandas as pd

from ..core.validate import SummaryError, check_interval, check_level
from ..core.intervals import ess_bulk, interval, prob_above

__all__ = ["ratio_draws", "effect_table", "contrast_table", "UPTAKE_FLOOR"]

#: A complier-weighted subgroup is flagged when the lower credible limit of its
#: complier share is below this value (its Wald ratio is then unstable).
UPTAKE_FLOOR = 0.05


def ratio_draws(A: np.ndarray, W: np.ndarray, names) -> np.ndarray:
    """Effects ``A / W`` per draw; raise naming the subgroup when a weight sum is zero."""
    W = np.broadcast_to(W, A.shape)
    zero = (W <= 0).any(axis=0)
    if zero.any():
        bad = [str(n) for n, z in zip(names, zero) if z]
        raise SummaryError(
            f"Subgroup(s) {', '.join(repr(b) for b in bad[:5])} have zero total weight in some draws "
            "(no units, all weights zero, or no uptake at all); their effect is undefined."
        )
    return A / W


def effect_table(theta: np.ndarray, info: pd.DataFrame, *, level: float, kind: str, n_chains: int,
                 uptake: np.ndarray | None = None, uptake_floor: float = UPTAKE_FLOOR, attrs: dict | None = None) -> pd.DataFrame:
    """The shared subgroup table.

    Parameters
    ----------
    theta : ndarray, shape (n_draws, n_groups)
        Per-draw subgroup effects.
    info : DataFrame
        One row per group with at least ``subgroup``, ``rule``, ``n_units``, ``share``.
    uptake : ndarray, shape (n_draws, n_groups), optional
        Per-draw complier share of each group (complier-weighted draws only).
    """
    level = check_level(level)
    kind = check_interval(kind)
    lo, hi = interval(theta, level, kind)
    out = info.reset_index(drop=True).copy()
    out["mean"] = theta.mean(axis=0)
    out["sd"] = theta.std(axis=0, ddof=1)
    out["lower"] = lo
    out["upper"] = hi
    out["prob_positive"] = prob_above(theta, 0.0)
    ess = ess_bulk(theta, n_chains)
    out["ess"] = ess
    out["mcse"] = out["sd"] / np.sqrt(ess)
    if uptake is not None:
        ulo, _ = interval(uptake, level, kind)
        out["uptake_share"] = uptake.mean(axis=0)
        out["uptake_lower"] = ulo
        out["weak_uptake"] = ulo < uptake_floor
    out.attrs.update({"level": level, "interval": kind, **(attrs or {})})
    if uptake is not None:
        out.attrs["uptake_floor"] = uptake_floor
    return out


def contrast_table(theta: np.ndarray, ids, rules, *, level: float, kind: str, subgroup=None, attrs=None) -> pd.DataFrame:
    """Every pair (a, b) of subgroups: posterior of ``theta_a - theta_b`` per draw (METHOD.md section 6).

    With ``subgroup`` given, only the pairs (subgroup, other) are returned.
    """
    level = check_level(level)
    kind = check_interval(kind)
    ids = list(ids)
    rules = list(rules)
    if subgroup is not None:
        if subgroup not in ids:
            raise SummaryError(f"`subgroup` {subgroup!r} is not one of the subgroups: {ids}.")
        a = ids.index(subgroup)
        pairs = [(a, b) for b in range(len(ids)) if b != a]
    else:
        pairs = [(a, b) for a in range(len(ids)) for b in range(a + 1, len(ids))]
    if not pairs:
        out = pd.DataFrame(columns=["subgroup_a", "subgroup_b", "rule_a", "rule_b", "difference", "lower", "upper", "prob_a_greater"])
    else:
        ia = np.array([p[0] for p in pairs])
        ib = np.array([p[1] for p in pairs])
        diff = theta[:, ia] - theta[:, ib]
        lo, hi = interval(diff, level, kind)
        out = pd.DataFrame({
            "subgroup_a": [ids[i] for i in ia],
            "subgroup_b": [ids[i] for i in ib],
            "rule_a": [rules[i] for i in ia],
            "rule_b": [rules[i] for i in ib],
            "difference": diff.mean(axis=0),
            "lower": lo,
            "upper": hi,
            "prob_a_greater": prob_above(diff, 0.0),
        })
    out.attrs.update({"level": level, "interval": kind, **(attrs or {})})
    return out
