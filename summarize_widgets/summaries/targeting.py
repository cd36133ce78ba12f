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
           "TARGETING_CURVE_COLUMNS", "TARGETING_HALF_COLUMNS", "TARGETING_CAUTION", "ESTIMATES", "COMPARISONS"]

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
                              "prob_benefit", "rank", "offered", "share_offered_cross_fitted")
#: Columns of :meth:`TargetingResult.half_subgroups`.
TARGETING_HALF_COLUMNS = ("half", "subgroup", "label", "rule", "n_units", "gain_per_offer", "lower", "upper",
                          "prob_benefit", "rank", "offered")
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


def _sums(draws: EffectDraws, blocks, progress=None):
    """Per draw ``S`` (sum of w T) and ``W`` (sum of w) of every cell of every block, one pass.

    ``blocks`` is a list of (cell per unit, n_cells); a cell of -1 leaves the unit out of that block.
    Returns one (S, W) pair per block, each of shape (n_draws, n_cells).
    """
    sizes = [k for _, k in blocks]
    H = np.zeros((draws.n_units, sum(sizes)))
    at = 0
    for cells, k in blocks:
        keep = cells >= 0
        H[np.flatnonzero(keep), at + cells[keep]] = 1.0
        at += k
    # Complier-weighted draws: block.wt is the outcome ITT times the unit weight, and an offer counts by the
    # unit weight (not by the uptake, which is what block.w holds for them).
    per_draw = draws.has_draw_weights and not draws.is_complier_weighted
    red = LinearMap(H, with_weights=per_draw)
    run_pass(draws, [red], progress=progress)
    if per_draw:
        W = red.weights_out
    else:
        W = np.broadcast_to(draws.unit_weights @ H, red.out.shape)
    W = np.array(W, dtype=np.float64)
    out, at = [], 0
    for k in sizes:
        out.append((red.out[:, at:at + k], W[:, at:at + k]))
        at += k
    return out


def _half_draws(draws: EffectDraws, rows: np.ndarray) -> EffectDraws:
    """The draws of some units only (a copy of their columns), same label, unit, direction and chains."""
    cov = draws.covariates.iloc[rows].reset_index(drop=True)
    w = draws.weights
    w = None if w is None else (w[rows] if w.ndim == 1 else w[:, rows])
    kw = {"label": draws.label, "unit": draws.unit or None, "better": draws.better, "chains": draws.n_chains}
    vals = np.asarray(draws.values[:, rows])
    if draws.is_complier_weighted:
        return EffectDraws.from_itt(vals, np.asarray(draws.uptake_values[:, rows]), cov, weights=w, **kw)
    return EffectDraws(vals, cov, weights=w, **kw)


def _half_structure(summary, draws, rows: np.ndarray, member: np.ndarray, info):
    """The subgroups half ``rows`` chooses on: its own tree (tree summaries) or the same groups.

    Returns (structure, member index of every unit in it, info DataFrame).
    """
    from .tree import TreeSummary, summarize_tree

    if not isinstance(summary, TreeSummary):
        return summary, member, info
    sub = _half_draws(draws, rows)
    depth = int(summary.depth)
    tree = summarize_tree(sub, max_depth=depth, min_size=max(1, summary.min_size // 2), columns=summary.columns,
                          progress=lambda done, total: None)
    tree = tree.at_depth(min(depth, tree.max_depth))
    ids = [int(i) for i in tree.leaf_ids]
    pos = {node: k for k, node in enumerate(ids)}
    nodes = tree.assign(draws.covariates).to_numpy()
    m = np.array([pos[int(u)] for u in nodes], dtype=np.int64)
    tab = tree.table()[["subgroup", "label", "rule", "n_units", "share"]].reset_index(drop=True)
    return tree, m, tab


def _check_cost(cost) -> float:
    if isinstance(cost, bool) or not isinstance(cost, (int, float, np.integer, np.floating)) or not np.isfinite(cost) or cost < 0:
        raise SummaryError(f"`cost` must be a number >= 0 (the cost of one offer, in the outcome's units); got {cost!r}.")
    return float(cost)


def _check_prob(min_prob) -> float:
    if isinstance(min_prob, bool) or not isinstance(min_prob, (int, float, np.integer, np.floating)) or not 0 < min_prob <= 1:
        raise SummaryError(f"`min_prob` must be a probability in (0, 1], for example 0.9; got {min_prob!r}.")
    return float(min_prob)


def _unit_weights(draws) -> np.ndarray:
    """A fixed weight per unit: the unit weights, or the per-draw weights averaged over draws."""
    w = draws.unit_weights
    return np.asarray(draws.weights, dtype=np.float64).mean(axis=0) if w is None else np.asarray(w, dtype=np.float64)


def _per_offer(G: np.ndarray, W: np.ndarray) -> np.ndarray:
    """Gain per offer ``G / W`` per draw; NaN where a subgroup has no units (weight 0)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(W > 0, G / np.where(W > 0, W, 1.0), np.nan)


def _order(per_offer: np.ndarray) -> np.ndarray:
    """Subgroups best first by posterior mean gain per offer (empty subgroups last; ties keep table order)."""
    with np.errstate(all="ignore"):
        m = np.nanmean(per_offer, axis=0) if per_offer.shape[0] else np.zeros(per_offer.shape[1])
    return np.argsort(-np.nan_to_num(m, nan=-np.inf), kind="stable")


def _direction(draws) -> float:
    return 1.0 if draws.better == "higher" else -1.0


class TargetingResult(SummaryResult):
    """The posterior of what a targeting rule gains over offering to all or to none.

    Build it with :func:`value_of_targeting`.

    Attributes
    ----------
    structure : TreeSummary or GroupSummary
        Whose subgroups are offered (in-sample).
    half_structures : tuple of two summaries
        The subgroups each half of the units chose its rule on: for a tree, a tree grown on that
        half's units alone (same depth and columns); for groups, the same groups.
    min_prob, cost : float
        The rule's threshold on the probability of benefit and the cost per offer.
    offered : ndarray of bool, shape (K,)
        The in-sample rule: which subgroups are offered.
    half_offered : tuple of two ndarrays of bool
        The rule each half chose, over its own subgroups.
    gain_draws : dict
        ``(estimate, comparison)`` -> per-draw total gain, shape (n_draws,).
    curve_draws : dict
        estimate -> per-draw total gain of offering the first k subgroups, shape (n_draws, steps).
    total_weight : float
        The number of units (weighted) totals are counted over.
    """

    summary_type = "targeting"

    def __init__(self, structure, info, S, W, halves, *, min_prob, cost, seed, scale_by, half_units):
        draws = structure.draws
        refit = structure.summary_type == "tree"
        super().__init__(draws, {"structure": structure.summary_type, "min_prob": min_prob, "cost": cost, "seed": seed,
                                 "n_subgroups": len(info), "cross_fitting": "two halves of the units, stratified by subgroup"
                                 + ("; a tree grown on each half" if refit else "; the same groups in each half"),
                                 "effect": "intention-to-treat (offer) effect" if draws.is_complier_weighted else "effect"})
        self.structure = structure
        self.min_prob = min_prob
        self.cost = cost
        self.seed = seed
        self._refit = refit
        self._info = info.reset_index(drop=True)
        self._half_units = half_units
        b = _direction(draws)
        G = b * S - cost * W  # gain per subgroup, (n_draws, K)
        self._G, self._W = G, W
        per_unit = float(np.mean(W.sum(axis=1)))
        self._per_unit = per_unit
        self._scale_by = scale_by
        self.total_weight = per_unit * scale_by
        self.gain_per_offer_draws = _per_offer(G, W)
        self.prob_benefit = (self.gain_per_offer_draws > 0).mean(axis=0)  # NaN > 0 is False
        self.offered = self.prob_benefit >= min_prob
        self.order = _order(self.gain_per_offer_draws)
        K = len(info)
        self._K = K
        all_g = G.sum(axis=1)
        rule_in = G @ self.offered
        Wm = W.mean(axis=0)

        # Cross-fitting: half h chooses on its own units (cells "choose"), is judged on the other half ("judge").
        self.half_structures = tuple(h["structure"] for h in halves)
        self._half_info = [h["info"] for h in halves]
        self.half_gain_per_offer_draws, self.half_prob_benefit, self.half_offered, self.half_order = [], [], [], []
        rule_cross = np.zeros_like(all_g)
        share_cross = 0.0
        n_steps = max(len(h["info"]) for h in halves) + 1
        curve_cross = np.zeros((G.shape[0], n_steps))
        curve_share_cross = np.zeros(n_steps)
        unit_offer = np.zeros(draws.n_units)
        for h in halves:
            Gc = b * h["S_choose"] - cost * h["W_choose"]
            Gj = b * h["S_judge"] - cost * h["W_judge"]
            Wj = h["W_judge"].mean(axis=0)
            per = _per_offer(Gc, h["W_choose"])
            prob = (per > 0).mean(axis=0)
            offer = prob >= min_prob
            order = _order(per)
            self.half_gain_per_offer_draws.append(per)
            self.half_prob_benefit.append(prob)
            self.half_offered.append(offer)
            self.half_order.append(order)
            rule_cross = rule_cross + Gj @ offer
            share_cross += float(Wj @ offer)
            cum = np.hstack([np.zeros((G.shape[0], 1)), np.cumsum(Gj[:, order], axis=1)])
            cum_w = np.concatenate([[0.0], np.cumsum(Wj[order])])
            pad = n_steps - cum.shape[1]  # the half with fewer subgroups stays at offer-to-all
            curve_cross += np.hstack([cum, np.repeat(cum[:, -1:], pad, axis=1)])
            curve_share_cross += np.concatenate([cum_w, np.repeat(cum_w[-1:], pad)])
            judge = h["judge"]
            unit_offer[judge] = offer[h["member"][judge]]
        self.gain_draws = {
            ("in-sample", COMPARISONS[0]): rule_in,
            ("in-sample", COMPARISONS[1]): rule_in - all_g,
            ("in-sample", COMPARISONS[2]): all_g,
            ("cross-fitted", COMPARISONS[0]): rule_cross,
            ("cross-fitted", COMPARISONS[1]): rule_cross - all_g,
            ("cross-fitted", COMPARISONS[2]): all_g,
        }
        self._share = {"in-sample": float(Wm @ self.offered / Wm.sum()), "cross-fitted": share_cross / Wm.sum()}
        self._n_offered = {"in-sample": float(self.offered.sum()),
                           "cross-fitted": float(np.mean([o.sum() for o in self.half_offered]))}
        self._n_subgroups = {"in-sample": float(K), "cross-fitted": float(np.mean([len(o) for o in self.half_offered]))}
        uw = _unit_weights(draws)
        member = half_units["member"]
        #: Per unit: offered by the in-sample rule, and by the cross-fitted rules (its half's rule chosen on the other).
        self.offered_units = self.offered[member]
        self.cross_fitted_offered_units = unit_offer.astype(bool)
        self._cross_share_by_subgroup = (np.bincount(member, weights=uw * unit_offer, minlength=K)
                                         / np.bincount(member, weights=uw, minlength=K))
        zero = np.zeros((G.shape[0], 1))
        self.curve_draws = {"in-sample": np.hstack([zero, np.cumsum(G[:, self.order], axis=1)]),
                            "cross-fitted": curve_cross}
        self._curve_share = {"in-sample": np.concatenate([[0.0], np.cumsum(Wm[self.order])]) / Wm.sum(),
                             "cross-fitted": curve_share_cross / Wm.sum()}

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
                "In-sample: the subgroups and the rule chosen and judged on the same posterior (optimistic). "
                f"Cross-fitted: the units of every subgroup split at random into two halves (seed {self.seed}); "
                + ("a tree grown on one half's units, " if self._refit else "")
                + "the rule chosen on one half is judged on the other half's units, and the other way round.")

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
        per_unit = self._per_unit
        for est in ESTIMATES:
            for comp in COMPARISONS:
                g = self.gain_draws[(est, comp)]
                for scale in _SCALES:
                    keys.append(("targeting", est, comp, scale))
                    cols.append(g / per_unit if scale == "per unit" else g * self._scale_by)
                    all_vs_none = comp == COMPARISONS[2]
                    rows.append({"estimate": est, "comparison": comp, "scale": scale,
                                 "share_offered": 1.0 if all_vs_none else self._share[est],
                                 "n_subgroups_offered": self._n_subgroups[est] if all_vs_none else self._n_offered[est]})
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
        out["share_offered_cross_fitted"] = self._cross_share_by_subgroup
        out.attrs.update(self._attrs(level, interval))
        return out[list(TARGETING_SUBGROUP_COLUMNS)]

    def half_subgroups(self, level: float = 0.95, interval: str = "equal-tailed") -> pd.DataFrame:
        """The subgroups each half chose its rule on (``half`` "A" or "B"), from that half's units only:
        gain per offer, ``prob_benefit``, ``rank`` and ``offered`` (the rule judged on the other half)."""
        from ..core.intervals import credible_interval

        level = check_level(level)
        interval = check_interval(interval)
        frames = []
        for name, info, per, prob, offer, order in zip("AB", self._half_info, self.half_gain_per_offer_draws,
                                                        self.half_prob_benefit, self.half_offered, self.half_order):
            f = info.reset_index(drop=True).copy()
            f.insert(0, "half", name)
            lo, hi = credible_interval(np.nan_to_num(per), level, interval)
            with np.errstate(all="ignore"):
                f["gain_per_offer"] = np.nanmean(per, axis=0)
            f["lower"] = lo
            f["upper"] = hi
            f["prob_benefit"] = prob
            rank = np.empty(len(order), dtype=int)
            rank[order] = np.arange(1, len(order) + 1)
            f["rank"] = rank
            f["offered"] = offer
            frames.append(f[list(TARGETING_HALF_COLUMNS)])
        out = pd.concat(frames, ignore_index=True)
        out.attrs.update(self._attrs(level, interval))
        return out

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
        per_unit = self._per_unit
        labels = list(self._info["label"].astype(str))
        half_labels = [list(i["label"].astype(str)) for i in self._half_info]
        frames = []
        for est in ESTIMATES:
            q = self.curve_draws[est] / per_unit if scale == "per unit" else self.curve_draws[est] * self._scale_by
            steps = q.shape[1]
            if est == "in-sample":
                offered = [", ".join(labels[j] for j in self.order[:k]) for k in range(steps)]
            else:
                offered = ["; ".join(f"half {n}'s {', '.join(hl[j] for j in o[:k]) or 'none'}"
                                     for n, hl, o in zip("AB", half_labels, self.half_order)) for k in range(steps)]
            stats = self.statistics([("curve", est, scale, k) for k in range(steps)], q, level=level, interval=interval)
            jl, ju = simultaneous_band(q[:, 1:], level)
            f = pd.DataFrame({"estimate": est, "step": np.arange(steps), "offered": offered,
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
        return (f"Offering to the {self._n_offered['in-sample']:.0f} of {self._K} subgroups with P(benefit) >= {self.min_prob:g} "
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
    halves = []
    for h in (0, 1):
        struct, m, hinfo = _half_structure(summary, draws, np.flatnonzero(half == h), member, info)
        halves.append({"structure": struct, "member": m, "info": hinfo, "judge": half != h})
    blocks = [(member * 2 + half, 2 * K)]
    for h, d in enumerate(halves):
        k = len(d["info"])
        blocks.append((np.where(half == h, d["member"], -1), k))  # choose on half h
        blocks.append((np.where(half != h, d["member"], -1), k))  # judge on the other half
    sums = _sums(draws, blocks, progress)
    S2, W2 = sums[0]
    S, W = S2[:, 0::2] + S2[:, 1::2], W2[:, 0::2] + W2[:, 1::2]
    for h, d in enumerate(halves):
        (d["S_choose"], d["W_choose"]), (d["S_judge"], d["W_judge"]) = sums[1 + 2 * h], sums[2 + 2 * h]
    scale_by = 1.0
    if population is not None:
        if isinstance(population, bool) or not isinstance(population, (int, float, np.integer, np.floating)) \
                or not np.isfinite(population) or population <= 0:
            raise SummaryError(f"`population` must be a positive number of units; got {population!r}.")
        scale_by = float(population) / float(np.mean(W.sum(axis=1)))
    return TargetingResult(summary, info, S, W, halves, min_prob=min_prob, cost=cost, seed=seed, scale_by=scale_by,
                           half_units={"half": half, "member": member})


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
    ((S, W),) = _sums(draws, [(m.astype(np.int64), 2)])
    return (_direction(draws) * S[:, 1] - cost * W[:, 1]) / W.sum(axis=1)
