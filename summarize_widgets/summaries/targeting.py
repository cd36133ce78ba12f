"""Value of targeting: what offering the treatment to some subgroups would change, per posterior draw.

The subgroups are those of a summary (a tree's subgroups at its depth, or pre-specified groups
that do not overlap). Offering is the decision, so the outcome change is the offer's effect: for
plain draws the effect itself, for complier-weighted draws the intention-to-treat effect on the
outcome (not the effect among compliers; docs/method.md section 9).

Per draw ``s`` and subgroup ``g`` (weights ``w_si``, ones when none were given):

* ``S_sg = sum_{i in g} w_si T_si`` (the total outcome change if ``g`` is offered) and
  ``W_sg = sum_{i in g} w_si`` (the number of offers, weighted);
* the **gain** of offering ``g`` is the outcome change in the direction the user called better,
  net of the cost per offer: ``G_sg = b S_sg - c W_sg`` with ``b = +1`` (``better="higher"``) or
  ``-1`` (``"lower"``), so a positive gain is always good;
* the gain per offer ``G_sg / W_sg`` has the posterior probability of benefit
  ``p_g = P(G_sg / W_sg > 0)`` (the share of draws).

Rules (an offer set ``pi_g`` in {0, 1}):

* **by probability**: offer ``g`` when ``p_g >= min_prob``;
* **by posterior mean**: order the subgroups by the posterior mean gain per offer, best first; the
  curve offers the first ``k`` of them, ``k = 0 .. K`` (gain against share offered).

The gain of a rule in draw s is ``sum_g pi_g G_sg`` (total) and that over ``sum_g W_sg`` (per unit),
compared with offering to none (zero) and to all (``sum_g G_sg``). Every comparison is computed
per draw, so its interval carries the posterior dependence between the rule and the alternatives.

Cross-fitting: choosing a rule and judging it on the same posterior is optimistic (a subgroup that
looks good by chance is both picked and credited). The units of every subgroup are split at random
into two halves (seeded; stratified by subgroup, so each subgroup is in both halves); the rule is
chosen from half A's sums and its gain evaluated on half B's units, and the other way round; the
cross-fitted gain adds the two evaluations. Tables show it beside the in-sample figure.
"""
from __future__ import annotations

import numpy as np
import pandas as pd

from ..core.draws import EffectDraws
from ..core.intervals import simultaneous_band
from ..core.passes import LinearMap, run_pass
from ..core.stats import MC_COLUMNS, STAT_COLUMNS
from ..core.validate import SummaryError, check_int, check_interval, check_level
from .base import SummaryResult

__all__ = ["value_of_targeting", "TargetingResult", "offer_gain_draws", "TARGETING_COLUMNS", "TARGETING_SUBGROUP_COLUMNS",
           "TARGETING_CURVE_COLUMNS", "TARGETING_CAUTION", "ESTIMATES", "COMPARISONS"]

#: The caution every targeting output carries.
TARGETING_CAUTION = (
    "These figures describe a model's posterior, for subgroups chosen from that posterior: subgroup findings are "
    "exploratory unless pre-specified, and moderators are not mechanisms. Decisions about whom to offer a "
    "programme follow the analysis, fairness and consent standards of your field, not this table alone."
)

#: Values of the ``estimate`` column: the rule judged on the posterior it was chosen from, or cross-fitted.
ESTIMATES = ("in-sample", "cross-fitted")
#: Values of the ``comparison`` column.
COMPARISONS = ("rule vs offer to none", "rule vs offer to all", "offer to all vs none")

#: Columns of :meth:`TargetingResult.table`.
TARGETING_COLUMNS = ("estimate", "comparison", "scale", "share_offered", "n_subgroups_offered", *STAT_COLUMNS,
                     *MC_COLUMNS)
#: Columns of :meth:`TargetingResult.subgroups`.
TARGETING_SUBGROUP_COLUMNS = ("subgroup", "label", "rule", "n_units", "share", "gain_per_offer", "lower", "upper",
                              "prob_benefit", "rank", "offered", "offered_by_half_a", "offered_by_half_b")
#: Columns of :meth:`TargetingResult.curve`.
TARGETING_CURVE_COLUMNS = ("estimate", "step", "offered", "share_offered", *STAT_COLUMNS, "lower_joint",
                           "upper_joint", *MC_COLUMNS)

_SCALES = ("per unit", "total")


def _partition(summary):
    """(membership index per unit in 0..K-1, info DataFrame of the K subgroups) of a tree or groups summary."""
    from .groups import ALL_UNITS, GroupSummary
    from .tree import TreeSummary

    if isinstance(summary, TreeSummary):
        tab = summary.table()
        ids = [int(i) for i in summary.leaf_ids]
        pos = {node: k for k, node in enumerate(ids)}
        member = np.array([pos[int(u)] for u in summary.unit_subgroups()], dtype=np.int64)
        info = tab[["subgroup", "label", "rule", "n_units", "share"]].reset_index(drop=True)
        return member, info
    if isinstance(summary, GroupSummary):
        M = summary.membership[:, 1:]  # drop "All units"
        overlap = M.sum(axis=1) > 1
        if overlap.any():
            both = [summary.labels[1 + j] for j in np.flatnonzero(M[overlap].any(axis=0))]
            raise SummaryError(
                f"`summary` groups overlap ({int(overlap.sum())} units are in more than one of "
                f"{', '.join(repr(b) for b in both[:4])}); targeting offers whole subgroups, so the groups must not overlap."
            )
        labels = [lab for lab in summary.labels if lab != ALL_UNITS]
        queries = list(summary.queries[1:])
        member = np.where(M.any(axis=1), M.argmax(axis=1), len(labels)).astype(np.int64)
        if (member == len(labels)).any():
            labels.append("other units")
            queries.append("in none of the groups")
        w = summary.draws.unit_weights
        w = np.ones(summary.draws.n_units) if w is None else w
        counts = np.bincount(member, minlength=len(labels))
        info = pd.DataFrame({"subgroup": labels, "label": labels, "rule": queries, "n_units": counts.astype(int),
                             "share": np.bincount(member, weights=w, minlength=len(labels)) / w.sum()})
        return member, info
    raise SummaryError(
        f"`summary` must be a TreeSummary or a GroupSummary (subgroups to offer); got {type(summary).__name__}."
    )


def _halves(member: np.ndarray, seed: int) -> np.ndarray:
    """Half (0 = A, 1 = B) of each unit: a seeded random split within every subgroup."""
    rng = np.random.default_rng(seed)
    half = np.zeros(member.size, dtype=np.int64)
    for g in np.unique(member):
        idx = np.flatnonzero(member == g)
        idx = idx[rng.permutation(idx.size)]
        half[idx[idx.size // 2:]] = 1  # odd sizes: the extra unit goes to half B
    return half


def _sums(draws: EffectDraws, cells: np.ndarray, n_cells: int, progress=None):
    """Per draw ``S`` (sum of w T) and ``W`` (sum of w) of every cell, shape (n_draws, n_cells), one pass."""
    H = np.zeros((draws.n_units, n_cells))
    H[np.arange(draws.n_units), cells] = 1.0
    # Complier-weighted draws: block.wt is the outcome ITT times the unit weight, and an offer counts by the
    # unit weight (not by the uptake, which is what block.w holds for them).
    per_draw = draws.has_draw_weights and not draws.is_complier_weighted
    red = LinearMap(H, with_weights=per_draw)
    run_pass(draws, [red], progress=progress)
    if per_draw:
        W = red.weights_out
    else:
        W = np.broadcast_to(draws.unit_weights @ H, red.out.shape)
    return red.out, np.array(W, dtype=np.float64)


def _check_cost(cost) -> float:
    if isinstance(cost, bool) or not isinstance(cost, (int, float, np.integer, np.floating)) or not np.isfinite(cost) or cost < 0:
        raise SummaryError(f"`cost` must be a number >= 0 (the cost of one offer, in the outcome's units); got {cost!r}.")
    return float(cost)


def _check_prob(min_prob) -> float:
    if isinstance(min_prob, bool) or not isinstance(min_prob, (int, float, np.integer, np.floating)) or not 0 < min_prob <= 1:
        raise SummaryError(f"`min_prob` must be a probability in (0, 1], for example 0.9; got {min_prob!r}.")
    return float(min_prob)


def _direction(draws) -> float:
    return 1.0 if draws.better == "higher" else -1.0


class TargetingResult(SummaryResult):
    """The posterior of what a targeting rule gains over offering to all or to none.

    Build it with :func:`value_of_targeting`.

    Attributes
    ----------
    structure : TreeSummary or GroupSummary
        Whose subgroups are offered.
    min_prob, cost : float
        The rule's threshold on the probability of benefit and the cost per offer.
    offered : ndarray of bool, shape (K,)
        The in-sample rule: which subgroups are offered.
    offered_by_half : ndarray of bool, shape (2, K)
        The rule chosen on half A (row 0) and on half B (row 1) of the units.
    gain_draws : dict
        ``(estimate, comparison)`` -> per-draw total gain, shape (n_draws,).
    curve_draws : dict
        estimate -> per-draw total gain of offering the first k subgroups, shape (n_draws, K + 1).
    total_weight : float
        The number of units (weighted) that totals are counted over.
    """

    summary_type = "targeting"

    def __init__(self, structure, info, S, W, S_half, W_half, *, min_prob, cost, seed, scale_by):
        draws = structure.draws
        super().__init__(draws, {"structure": structure.summary_type, "min_prob": min_prob, "cost": cost, "seed": seed,
                                 "n_subgroups": len(info), "cross_fitting": "two halves, stratified by subgroup",
                                 "effect": "intention-to-treat (offer) effect" if draws.is_complier_weighted else "effect"})
        self.structure = structure
        self.min_prob = min_prob
        self.cost = cost
        self.seed = seed
        self._info = info.reset_index(drop=True)
        b = _direction(draws)
        # gain per cell, (n_draws, K) and (2, n_draws, K)
        G = b * S - cost * W
        Gh = b * S_half - cost * W_half
        self._G, self._W = G, W
        self.total_weight = float(np.mean(W.sum(axis=1))) * scale_by
        self._scale_by = scale_by
        with np.errstate(divide="ignore", invalid="ignore"):
            per_offer = np.where(W > 0, G / np.where(W > 0, W, 1.0), np.nan)
            per_half = np.where(W_half > 0, Gh / np.where(W_half > 0, W_half, 1.0), np.nan)
        self.gain_per_offer_draws = per_offer
        self.prob_benefit = np.nanmean(per_offer > 0, axis=0) if per_offer.size else np.zeros(0)
        prob_half = (per_half > 0).mean(axis=1)  # NaN > 0 is False: a half without units is never offered
        self.offered = self.prob_benefit >= min_prob
        self.offered_by_half = prob_half >= min_prob
        # ordering by posterior mean gain per offer (best first); ties keep the table order
        mean_half = np.nanmean(per_half, axis=1)
        self.order = np.argsort(-np.nanmean(per_offer, axis=0), kind="stable")
        self.order_by_half = np.vstack([np.argsort(-np.nan_to_num(mean_half[h], nan=-np.inf), kind="stable")
                                        for h in (0, 1)])
        all_g = G.sum(axis=1)
        rule_in = G @ self.offered
        # half A's rule judged on half B's units, and the other way round
        rule_cross = Gh[1] @ self.offered_by_half[0] + Gh[0] @ self.offered_by_half[1]
        self.gain_draws = {
            ("in-sample", COMPARISONS[0]): rule_in,
            ("in-sample", COMPARISONS[1]): rule_in - all_g,
            ("in-sample", COMPARISONS[2]): all_g,
            ("cross-fitted", COMPARISONS[0]): rule_cross,
            ("cross-fitted", COMPARISONS[1]): rule_cross - all_g,
            ("cross-fitted", COMPARISONS[2]): all_g,
        }
        Wm = W.mean(axis=0)
        Whm = W_half.mean(axis=1)
        self._share = {
            "in-sample": float(Wm @ self.offered / Wm.sum()),
            "cross-fitted": float((Whm[1] @ self.offered_by_half[0] + Whm[0] @ self.offered_by_half[1]) / Wm.sum()),
        }
        self._n_offered = {"in-sample": int(self.offered.sum()),
                           "cross-fitted": float(self.offered_by_half.sum(axis=1).mean())}
        K = len(info)
        zero = np.zeros((G.shape[0], 1))
        curve_in = np.hstack([zero, np.cumsum(G[:, self.order], axis=1)])
        curve_cross = np.hstack([zero, np.cumsum(Gh[1][:, self.order_by_half[0]], axis=1)
                                 + np.cumsum(Gh[0][:, self.order_by_half[1]], axis=1)])
        self.curve_draws = {"in-sample": curve_in, "cross-fitted": curve_cross}
        share_in = np.concatenate([[0.0], np.cumsum(Wm[self.order])]) / Wm.sum()
        share_cross = np.concatenate([[0.0], np.cumsum(Whm[1][self.order_by_half[0]])
                                      + np.cumsum(Whm[0][self.order_by_half[1]])]) / Wm.sum()
        self._curve_share = {"in-sample": share_in, "cross-fitted": share_cross}
        self._K = K

    # -- attributes ------------------------------------------------------------------------
    @property
    def caution(self) -> str:
        return TARGETING_CAUTION

    @property
    def note(self) -> str:
        """How the figures were computed, one paragraph for every output."""
        d = self.draws
        better = "a lower outcome" if d.better == "lower" else "a higher outcome"
        what = ("the offer's intention-to-treat effect on the outcome (what offering changes), not the effect among "
                "compliers") if d.is_complier_weighted else "the effect"
        cost = f", net of a cost of {self.cost:g} per offer" if self.cost else ""
        return (f"Gain = outcome change in the better direction ({better} counts as a gain){cost}, from {what}. "
                f"Rule: offer the subgroups whose posterior probability of benefit is at least {self.min_prob:g}. "
                "In-sample: the rule chosen and judged on the same posterior (optimistic). Cross-fitted: the units of "
                f"every subgroup split at random into two halves (seed {self.seed}); the rule chosen on one half is "
                "judged on the other, and the other way round.")

    # -- tables --------------------------------------------------------------------------------
    def _attrs(self, level, interval) -> dict:
        return {"level": level, "interval": interval, "label": self.label, "summary": "targeting", "unit": self.draws.unit,
                "better": self.draws.better, "cost": self.cost, "min_prob": self.min_prob, "note": self.note,
                "caution": TARGETING_CAUTION}

    def table(self, level: float = 0.95, interval: str = "equal-tailed") -> pd.DataFrame:
        """The rule's gain against offering to none and to all, in-sample and cross-fitted.

        One row per ``estimate`` (:data:`ESTIMATES`), ``comparison`` (:data:`COMPARISONS`) and
        ``scale`` ("per unit": the total over the number of units, weighted; "total": over the study's
        units, or ``population`` of :func:`value_of_targeting`). ``share_offered`` and
        ``n_subgroups_offered`` describe the rule (cross-fitted: averaged over the two halves' rules).
        Then the statistics core's columns of the gain (``prob_positive``: P(gain > 0)).
        """
        level = check_level(level)
        interval = check_interval(interval)
        keys, cols, rows = [], [], []
        per_unit = float(np.mean(self._W.sum(axis=1)))
        for est in ESTIMATES:
            for comp in COMPARISONS:
                g = self.gain_draws[(est, comp)]
                for scale in _SCALES:
                    keys.append(("targeting", est, comp, scale))
                    cols.append(g / per_unit if scale == "per unit" else g * self._scale_by)
                    all_vs_none = comp == COMPARISONS[2]
                    rows.append({"estimate": est, "comparison": comp, "scale": scale,
                                 "share_offered": 1.0 if all_vs_none else self._share[est],
                                 "n_subgroups_offered": float(self._K) if all_vs_none else float(self._n_offered[est])})
        stats = self.statistics(keys, np.column_stack(cols), level=level, interval=interval)
        out = pd.DataFrame(rows)
        for name in (*STAT_COLUMNS, *MC_COLUMNS):
            out[name] = stats[name]
        out.attrs.update(self._attrs(level, interval))
        return out[list(TARGETING_COLUMNS)]

    def subgroups(self, level: float = 0.95, interval: str = "equal-tailed") -> pd.DataFrame:
        """One row per subgroup: gain per offer (posterior mean and interval), ``prob_benefit``, ``rank``
        (1 = best posterior mean) and whether each rule offers it (in-sample, chosen on half A, on half B)."""
        from ..core.intervals import credible_interval

        level = check_level(level)
        interval = check_interval(interval)
        out = self._info.copy()
        x = self.gain_per_offer_draws
        lo, hi = credible_interval(x, level, interval)
        out["gain_per_offer"] = x.mean(axis=0)
        out["lower"] = lo
        out["upper"] = hi
        out["prob_benefit"] = self.prob_benefit
        rank = np.empty(self._K, dtype=int)
        rank[self.order] = np.arange(1, self._K + 1)
        out["rank"] = rank
        out["offered"] = self.offered
        out["offered_by_half_a"] = self.offered_by_half[0]
        out["offered_by_half_b"] = self.offered_by_half[1]
        out.attrs.update(self._attrs(level, interval))
        return out[list(TARGETING_SUBGROUP_COLUMNS)]

    def curve(self, level: float = 0.95, interval: str = "equal-tailed", scale: str = "per unit") -> pd.DataFrame:
        """Gain against share offered when the subgroups are offered best first (by posterior mean).

        One row per ``estimate`` and ``step`` k = 0..K (the first k subgroups offered; ``offered``
        names them, in-sample; cross-fitted rows list half A's order). Pointwise interval
        (``lower``, ``upper``) and a simultaneous band over the steps (``lower_joint``,
        ``upper_joint``, docs/method.md section 4). ``scale`` is "per unit" or "total".
        """
        level = check_level(level)
        interval = check_interval(interval)
        if scale not in _SCALES:
            raise SummaryError(f"`scale` must be 'per unit' or 'total'; got {scale!r}.")
        per_unit = float(np.mean(self._W.sum(axis=1)))
        labels = list(self._info["label"].astype(str))
        frames = []
        for est in ESTIMATES:
            q = self.curve_draws[est] / per_unit if scale == "per unit" else self.curve_draws[est] * self._scale_by
            order = self.order if est == "in-sample" else self.order_by_half[0]
            stats = self.statistics([("curve", est, scale, k) for k in range(self._K + 1)], q, level=level, interval=interval)
            jl, ju = simultaneous_band(q[:, 1:], level)
            f = pd.DataFrame({"estimate": est, "step": np.arange(self._K + 1),
                              "offered": [", ".join(labels[j] for j in order[:k]) for k in range(self._K + 1)],
                              "share_offered": self._curve_share[est]})
            for name in STAT_COLUMNS:
                f[name] = stats[name]
            f["lower_joint"] = np.concatenate([[0.0], jl])
            f["upper_joint"] = np.concatenate([[0.0], ju])
            for name in MC_COLUMNS:
                f[name] = stats[name]
            frames.append(f)
        out = pd.concat(frames, ignore_index=True)
        out.attrs.update({**self._attrs(level, interval), "scale": scale})
        return out[list(TARGETING_CURVE_COLUMNS)]

    def headline(self, level: float = 0.95) -> str:
        """One sentence with the in-sample and cross-fitted gain per unit of the rule against offering to none."""
        tab = self.table(level=level)
        r = tab[(tab["comparison"] == COMPARISONS[0]) & (tab["scale"] == "per unit")].set_index("estimate")
        unit = f" {self.draws.unit}" if self.draws.unit else ""
        pct = f"{level:.0%}"
        return (f"Offering to the {self._n_offered['in-sample']} of {self._K} subgroups with P(benefit) >= {self.min_prob:g} "
                f"({self._share['in-sample']:.0%} of units) gains {r.at['in-sample', 'mean']:.3g}{unit} per unit "
                f"({pct} interval {r.at['in-sample', 'lower']:.3g} to {r.at['in-sample', 'upper']:.3g}) in-sample; "
                f"cross-fitted {r.at['cross-fitted', 'mean']:.3g} ({r.at['cross-fitted', 'lower']:.3g} to "
                f"{r.at['cross-fitted', 'upper']:.3g}).")

    def __repr__(self) -> str:
        return f"TargetingResult of '{self.label}' on {self._K} subgroups: {self.headline()}"


def value_of_targeting(summary, *, min_prob: float = 0.9, cost: float = 0.0, seed: int = 0, population=None,
                       progress=None) -> TargetingResult:
    """The posterior of what offering to some subgroups gains over offering to all or to none.

    Parameters
    ----------
    summary : TreeSummary or GroupSummary
        Whose subgroups are offered (a tree at its current depth; groups that do not overlap, units
        in none of them forming one more subgroup). Its draws say which direction is better.
    min_prob : float, default 0.9
        The rule offers a subgroup when the posterior probability that an offer there benefits
        (gain per offer > 0, net of ``cost``) is at least this.
    cost : float, default 0
        Cost of one offer, in the outcome's units (counted against the gain).
    seed : int, default 0
        Seed of the random split of units into two halves for cross-fitting.
    population : float, optional
        Totals are scaled to this many units (default: the study's units, weighted).
    progress : callable(done, total), optional

    Returns
    -------
    TargetingResult
        ``.table()``, ``.subgroups()``, ``.curve()``, ``.headline()``, ``.note``, ``.caution``.
    """
    min_prob = _check_prob(min_prob)
    cost = _check_cost(cost)
    seed = check_int(seed, "seed", low=0)
    member, info = _partition(summary)
    K = len(info)
    draws = summary.draws
    half = _halves(member, seed)
    S2, W2 = _sums(draws, member * 2 + half, 2 * K, progress)
    S_half = np.stack([S2[:, 0::2], S2[:, 1::2]])
    W_half = np.stack([W2[:, 0::2], W2[:, 1::2]])
    S, W = S_half.sum(axis=0), W_half.sum(axis=0)
    scale_by = 1.0
    if population is not None:
        if isinstance(population, bool) or not isinstance(population, (int, float, np.integer, np.floating)) \
                or not np.isfinite(population) or population <= 0:
            raise SummaryError(f"`population` must be a positive number of units; got {population!r}.")
        scale_by = float(population) / float(np.mean(W.sum(axis=1)))
    return TargetingResult(summary, info, S, W, S_half, W_half, min_prob=min_prob, cost=cost, seed=seed,
                           scale_by=scale_by)


def offer_gain_draws(draws: EffectDraws, offer, *, cost: float = 0.0) -> np.ndarray:
    """Per-draw gain per unit of a fixed offer set against offering to none, shape (n_draws,).

    ``(b sum_{i offered} w_si T_si - cost sum_{i offered} w_si) / sum_i w_si`` with ``b`` the
    direction (+1 for ``better="higher"``, -1 for ``"lower"``); for complier-weighted draws ``T``
    is the offer's intention-to-treat effect on the outcome.

    Parameters
    ----------
    draws : EffectDraws
    offer : array of bool, shape (n_units,), or str
        Which units are offered: a boolean selection or a query on the covariates
        (:mod:`summarize_widgets.core.query`, for example ``"tenure == 'owner'"``).
    cost : float, default 0
    """
    from ..core.query import query_mask

    if not isinstance(draws, EffectDraws):
        raise SummaryError(f"`draws` must be an EffectDraws; got {type(draws).__name__}.")
    cost = _check_cost(cost)
    if isinstance(offer, str):
        given = draws.covariates.set_axis(draws.unit_ids, axis=0) if draws.unit_ids is not None else draws.covariates
        try:
            offer = query_mask(given, offer)
        except SummaryError as exc:
            raise SummaryError(f"`offer`: {exc}") from None
    m = np.asarray(offer)
    if m.dtype != bool or m.shape != (draws.n_units,):
        raise SummaryError(f"`offer` must be a boolean array of shape ({draws.n_units},) or a query string; "
                           f"got dtype {m.dtype}, shape {m.shape}.")
    S, W = _sums(draws, m.astype(np.int64), 2)
    return (_direction(draws) * S[:, 1] - cost * W[:, 1]) / W.sum(axis=1)
