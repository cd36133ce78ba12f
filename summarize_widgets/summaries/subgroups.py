"""Per-draw subgroup effects from subgroup sums, and the table every subgroup summary shares.

Tree leaves and pre-specified groups both reduce to two per-draw sums per
subgroup: ``A_sg = sum_{i in g} w_si T_si`` and ``W_sg = sum_{i in g} w_si``.
The subgroup effect in draw s is their ratio (for complier-weighted draws this
is the Wald ratio of docs/method.md section 5). This module turns the sums into the
shared table columns, so the tree and group summaries cannot drift apart.
"""
from __future__ import annotations

import numpy as np
import pandas as pd

from ..core.validate import SummaryError, check_interval, check_level
from ..core.intervals import credible_interval
from ..core.stats import MC_COLUMNS, STAT_COLUMNS

__all__ = ["ratio_draws", "effect_table", "contrast_table", "best_position", "UPTAKE_FLOOR", "SUBGROUP_COLUMNS", "CONTRAST_COLUMNS",
           "UPTAKE_COLUMNS"]

#: A complier-weighted subgroup is flagged when the lower credible limit of its
#: complier share is below this value (its Wald ratio is then unstable).
UPTAKE_FLOOR = 0.05

#: Columns of every subgroup table (tree leaves and groups), in order. ``subgroup`` identifies
#: the subgroup (a tree's node id, as :meth:`TreeSummary.assign` returns it; a group's name),
#: ``label`` is what every output prints (``S1 .. Sk`` for a tree, the name for a group), and
#: ``share`` is the share of units (weighted by the unit weights).
SUBGROUP_COLUMNS = ("subgroup", "label", "rule", "n_units", "share", *STAT_COLUMNS, *MC_COLUMNS)
#: Columns complier-weighted subgroup tables add: ``complier_share`` (the subgroup's share of
#: the compliers, i.e. of the summed uptake effect), then the posterior of the subgroup's own
#: uptake share (its complier fraction) and the weak-uptake flag.
UPTAKE_COLUMNS = ("complier_share", "uptake_share", "uptake_lower", "uptake_upper", "weak_uptake")
#: Columns of every contrast table, in order.
CONTRAST_COLUMNS = ("subgroup_a", "subgroup_b", "label_a", "label_b", "rule_a", "rule_b", "difference", "sd",
                    "lower", "upper", "prob_a_greater", *MC_COLUMNS)


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


def effect_table(columns: dict, info: pd.DataFrame, *, level: float, interval: str,
                 uptake: np.ndarray | None = None, uptake_floor: float = UPTAKE_FLOOR, attrs: dict | None = None) -> pd.DataFrame:
    """The shared subgroup table (:data:`SUBGROUP_COLUMNS`, then :data:`UPTAKE_COLUMNS` for
    complier-weighted draws).

    Parameters
    ----------
    columns : dict
        The statistics core's columns of the per-draw subgroup effects
        (:meth:`~summarize_widgets.summaries.base.SummaryResult._columns`).
    info : DataFrame
        One row per group with ``subgroup``, ``label``, ``rule``, ``n_units``, ``share`` (and
        ``complier_share`` for complier-weighted draws).
    uptake : ndarray, shape (n_draws, n_groups), optional
        Per-draw complier share of each group (complier-weighted draws only).
    """
    level = check_level(level)
    interval = check_interval(interval)
    info = info.reset_index(drop=True)
    out = info[[c for c in SUBGROUP_COLUMNS if c in info.columns]].copy()
    for name in (*STAT_COLUMNS, *MC_COLUMNS):
        out[name] = columns[name]
    if uptake is not None:
        out["complier_share"] = info["complier_share"].to_numpy()
        ulo, uhi = credible_interval(uptake, level, interval)
        out["uptake_share"] = uptake.mean(axis=0)
        out["uptake_lower"] = ulo
        out["uptake_upper"] = uhi
        out["weak_uptake"] = ulo < uptake_floor
    out.attrs.update({"level": level, "interval": interval, **(attrs or {})})
    if uptake is not None:
        out.attrs["uptake_floor"] = uptake_floor
    return out


def best_position(table: pd.DataFrame) -> int:
    """Row position of the subgroup with the largest benefit in a subgroup table.

    The benefit follows the draws' direction (``table.attrs["better"]``, from
    ``EffectDraws(better=...)``): the lowest posterior mean when lower is better, the highest
    otherwise. Subgroups flagged for weak uptake (an unstable ratio) are passed over while any
    other subgroup is left, so an erratic complier ratio is never the reference.
    """
    if len(table) == 0:
        raise SummaryError("The subgroup table is empty: there is no subgroup with the largest benefit.")
    means = table["mean"].to_numpy(dtype=float)
    usable = np.isfinite(means)
    if "weak_uptake" in table.columns:
        steady = usable & ~table["weak_uptake"].to_numpy(dtype=bool)
        usable = steady if steady.any() else usable
    if not usable.any():
        raise SummaryError("Every subgroup's posterior mean is missing: there is no subgroup with the largest benefit.")
    score = -means if table.attrs.get("better", "higher") == "lower" else means
    return int(np.argmax(np.where(usable, score, -np.inf)))


def contrast_table(theta: np.ndarray, ids, rules, *, level: float, interval: str, stats, subgroup=None,
                   attrs=None, labels=None, best=None) -> pd.DataFrame:
    """Every pair (a, b) of subgroups: posterior of ``theta_a - theta_b`` per draw (docs/method.md section 6).

    With ``subgroup`` given, only the pairs (subgroup, other) are returned. ``stats(keys, diff)``
    turns per-draw differences into the statistics core's columns (the result's ``_columns``).
    ``labels`` are the printed names of the subgroups (default: the ids as text). ``best`` is the
    id of the subgroup with the largest benefit (:func:`best_position`); the table carries it
    and its label in ``attrs["best"]`` and ``attrs["best_label"]``.
    """
    level = check_level(level)
    interval = check_interval(interval)
    ids = list(ids)
    rules = list(rules)
    labels = [str(i) for i in ids] if labels is None else list(labels)
    if subgroup is not None:
        if subgroup not in ids:
            raise SummaryError(f"`subgroup` {subgroup!r} is not one of the subgroups: {ids}.")
        a = ids.index(subgroup)
        pairs = [(a, b) for b in range(len(ids)) if b != a]
    else:
        pairs = [(a, b) for a in range(len(ids)) for b in range(a + 1, len(ids))]
    if not pairs:
        out = pd.DataFrame(columns=list(CONTRAST_COLUMNS))
    else:
        ia = np.array([p[0] for p in pairs])
        ib = np.array([p[1] for p in pairs])
        diff = theta[:, ia] - theta[:, ib]
        cols = stats([("contrast", ids[i], ids[j]) for i, j in pairs], diff)
        out = pd.DataFrame({
            "subgroup_a": [ids[i] for i in ia],
            "subgroup_b": [ids[i] for i in ib],
            "label_a": [labels[i] for i in ia],
            "label_b": [labels[i] for i in ib],
            "rule_a": [rules[i] for i in ia],
            "rule_b": [rules[i] for i in ib],
            "difference": cols["mean"],
            "sd": cols["sd"],
            "lower": cols["lower"],
            "upper": cols["upper"],
            "prob_a_greater": cols["prob_positive"],
            **{name: cols[name] for name in MC_COLUMNS},
        })
    out.attrs.update({"level": level, "interval": interval, **(attrs or {})})
    if best is not None:
        out.attrs["best"] = best
        out.attrs["best_label"] = labels[ids.index(best)]
    return out
