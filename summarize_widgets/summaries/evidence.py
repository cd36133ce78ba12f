"""Is there heterogeneity at all? The posterior of the spread of effects, and a plain verdict.

Three per-draw quantities, each a functional of one posterior draw, so their
draws are draws from their posterior (docs/method.md section 2):

* ``unit_sd_s``: the weighted standard deviation of the unit effects across the
  units, ``sqrt(sum_i w_si (T_si - m_s)^2 / sum_i w_si)`` with
  ``m_s = sum_i w_si T_si / sum_i w_si`` (the draw's average effect). For
  complier-weighted draws (:meth:`EffectDraws.from_itt`) ``w_si = v_i pi_si``
  and ``T_si = ITT_y,si / pi_si``, so this is the uptake-weighted sd of the unit
  CLATEs around the draw's overall LATE, computed without dividing unit by unit as
  ``sum_i v_i (ITT_y,si - m_s pi_si)^2 / pi_si`` over units with ``pi_si > 0``.
* ``between_sd_s``: the weighted sd of the subgroup effects of a chosen summary
  (a tree at a depth, or pre-specified groups) around their weighted mean, each
  subgroup weighted by its total weight in the draw ``W_sg = sum_{i in g} w_si``.
  For a tree (a partition) this is the between-subgroup part of the variance
  decomposition: ``between_sd_s^2 = R2_s * unit_sd_s^2`` with the tree's summary
  R^2 (docs/method.md section 3). For overlapping groups it is a descriptive spread.
* ``range_s``: the largest minus the smallest subgroup effect in the draw.

``P(range > c)`` is the share of draws whose range exceeds ``c``. The default
``c`` is a rule of thumb of ours (no published standard): a quarter of the
larger of the absolute posterior mean of the average effect and the posterior
mean of ``unit_sd`` (so an average effect near zero does not make every
difference look large). Pass ``threshold`` to use a difference that matters in
your field.

Note that ``unit_sd`` includes posterior uncertainty that varies independently
across units: a posterior that is unsure about each unit has a large ``unit_sd``
even when the truth is flat. Subgroup averages cancel most of that noise, so
``between_sd`` and the range are the better evidence for heterogeneity that a
summary can describe.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..core.draws import EffectDraws
from ..core.stats import draw_summary
from ..core.passes import run_pass
from ..core.validate import SummaryError, check_interval, check_level

__all__ = ["HeterogeneityEvidence", "heterogeneity_evidence", "unit_sd_draws", "between_sd_draws",
           "DEFAULT_FRACTION", "SUPPORT_PROB"]

#: Default threshold ``c`` as a fraction of the reference scale (rule of thumb; see the module notes).
DEFAULT_FRACTION = 0.25
#: Posterior probability at or above which a verdict calls a difference supported, and at or below
#: ``1 - SUPPORT_PROB`` unsupported (the conventional 95%).
SUPPORT_PROB = 0.95


class _SpreadSums:
    """Reducer: per draw ``W_s = sum_i w_si``, ``A_s = sum_i w_si T_si`` and the centred
    ``SST_s = sum_i w_si (T_si - A_s / W_s)^2``, centring before squaring (float64)."""

    def start(self, n_draws: int) -> None:
        self.wsum = np.zeros(n_draws)
        self.wtsum = np.zeros(n_draws)
        self.sst = np.zeros(n_draws)

    def consume(self, block) -> None:
        wt = np.asarray(block.wt, dtype=np.float64)
        rows = block.rows
        if block.w is None:
            W = np.full(wt.shape[0], float(wt.shape[1]))
            A = wt.sum(axis=1)
            m = A / W
            r = wt - m[:, None]
            sst = np.einsum("ij,ij->i", r, r)
        else:
            w = np.broadcast_to(np.asarray(block.w, dtype=np.float64), wt.shape)
            W = w.sum(axis=1)
            A = wt.sum(axis=1)
            with np.errstate(divide="ignore", invalid="ignore"):
                m = np.where(W > 0, A / np.where(W > 0, W, 1.0), 0.0)
                # w (T - m)^2 = (wt - m w)^2 / w, zero where w = 0 (the unit takes no part).
                r = wt - m[:, None] * w
                sst = np.where(w > 0, r * r / np.where(w > 0, w, 1.0), 0.0).sum(axis=1)
        self.wsum[rows] = W
        self.wtsum[rows] = A
        self.sst[rows] = sst


def unit_sd_draws(draws, *, progress=None) -> np.ndarray:
    """Per draw, the weighted sd of the unit effects across the units, shape (n_draws,).

    One pass over the draws (see the module notes for complier-weighted draws).
    """
    _check_draws(draws)
    red = _SpreadSums()
    run_pass(draws, [red], progress=progress)
    if (red.wsum <= 0).any():
        raise SummaryError(f"{int((red.wsum <= 0).sum())} draws have zero total weight; the spread of their effects is undefined.")
    return np.sqrt(np.clip(red.sst, 0.0, None) / red.wsum)


def between_sd_draws(theta: np.ndarray, weights: np.ndarray) -> np.ndarray:
    """Per draw, the weighted sd of subgroup effects around their weighted mean.

    Parameters
    ----------
    theta : ndarray, shape (n_draws, n_groups)
        Subgroup effects per draw.
    weights : ndarray, shape (n_groups,) or (n_draws, n_groups)
        Non-negative subgroup weights (total unit weight per subgroup, per draw or fixed).

    Returns
    -------
    ndarray, shape (n_draws,)
    """
    theta = np.asarray(theta, dtype=np.float64)
    w = np.broadcast_to(np.asarray(weights, dtype=np.float64), theta.shape)
    W = w.sum(axis=1)
    if (W <= 0).any():
        raise SummaryError("The subgroups have zero total weight in some draws; their spread is undefined.")
    m = (w * theta).sum(axis=1) / W
    d = theta - m[:, None]
    return np.sqrt((w * d * d).sum(axis=1) / W)


def _check_draws(draws):

    if not isinstance(draws, EffectDraws):
        raise SummaryError(f"`draws` must be an EffectDraws (see summarize_widgets.EffectDraws); got {type(draws).__name__}.")


def _subgroup_draws(summary):
    """(theta, weights, description) of a tree (at its current depth) or a group summary."""
    from .groups import GroupSummary
    from .tree import TreeSummary

    if isinstance(summary, TreeSummary):
        d = summary.depth
        return summary.leaf_draws, summary.leaf_weight_draws, f"the {summary.leaf_draws.shape[1]} subgroups of the tree at depth {d}"
    if isinstance(summary, GroupSummary):
        theta = summary.group_draws[:, 1:]  # the first column is "All units"
        if theta.shape[1] < 2:
            raise SummaryError("Heterogeneity between groups needs at least two pre-specified groups; got one.")
        return theta, summary.group_weight_draws[:, 1:], f"the {theta.shape[1]} pre-specified groups"
    raise SummaryError(f"`summary` must be a TreeSummary or a GroupSummary; got {type(summary).__name__}.")


def _weak_uptake(summary, level, interval) -> int:
    """How many subgroups of a complier-weighted summary are flagged for weak uptake (0 otherwise)."""
    if not summary.draws.is_complier_weighted:
        return 0
    tab = summary.table(level=level, interval=interval)
    if "weak_uptake" not in tab.columns:
        return 0
    flags = tab["weak_uptake"].astype(bool).to_numpy()
    if "subgroup" in tab.columns and len(tab) and tab["subgroup"].iloc[0] == "All units":
        flags = flags[1:]
    return int(flags.sum())


@dataclass(frozen=True)
class HeterogeneityEvidence:
    """The posterior of the spread of effects and a verdict (from :func:`heterogeneity_evidence`).

    Attributes
    ----------
    unit_sd : ndarray, shape (n_draws,)
        Weighted sd of unit effects across units, per draw.
    between_sd : ndarray, shape (n_draws,)
        Weighted sd of the summary's subgroup effects, per draw.
    range : ndarray, shape (n_draws,)
        Largest minus smallest subgroup effect, per draw.
    overall : ndarray, shape (n_draws,)
        The draw's weighted average effect (the scale of the default threshold).
    threshold : float
        ``c`` in ``P(range > c)``.
    threshold_rule : str
        How ``c`` was chosen, in words.
    prob_range_above : float
        ``P(range > c)``.
    verdict : str
        One of "supported", "not supported", "inconclusive".
    message : str
        The verdict in plain language, with numbers.
    subgroups : str
        Which subgroups (for the message and tables).
    level, interval : float, str
        Credible level and interval kind used in the message and :meth:`table`.
    n_chains : int
    label : str
    """

    unit_sd: np.ndarray
    between_sd: np.ndarray
    range: np.ndarray
    overall: np.ndarray
    threshold: float
    threshold_rule: str
    prob_range_above: float
    verdict: str
    message: str
    subgroups: str
    level: float
    interval: str
    n_chains: int = 1
    label: str = "effect"
    settings: dict = field(default_factory=dict)

    def table(self, level: float | None = None, interval: str | None = None) -> pd.DataFrame:
        """One row per quantity: ``quantity``, ``mean``, ``sd``, ``lower``, ``upper``, ``prob_above``.

        ``prob_above`` is ``P(quantity > threshold)`` (the threshold ``c`` for every row).
        ``df.attrs`` holds ``level``, ``interval``, ``label``, ``threshold``, ``verdict``, ``message``.
        """
        level = check_level(self.level if level is None else level)
        interval = check_interval(self.interval if interval is None else interval)
        mat = np.column_stack([self.unit_sd, self.between_sd, self.range])
        stats = draw_summary(mat, level, interval, threshold=self.threshold)
        stats["prob_above"] = stats.pop("prob_positive")
        out = pd.DataFrame({"quantity": ["sd of unit effects", f"sd between subgroups ({self.subgroups})",
                                         "largest minus smallest subgroup effect"], **stats})
        out.attrs.update({"level": level, "interval": interval, "label": self.label, "threshold": self.threshold,
                          "threshold_rule": self.threshold_rule, "verdict": self.verdict, "message": self.message,
                          "summary": "heterogeneity"})
        return out


def _fmt(x: float) -> str:
    return f"{x:.3g}"


def _interval_text(x, level, interval) -> str:
    s = draw_summary(x[:, None], level, interval)
    return f"{_fmt(s['mean'][0])} [{_fmt(s['lower'][0])}, {_fmt(s['upper'][0])}]"


def heterogeneity_evidence(draws, summary, *, threshold: float | None = None, level: float = 0.95,
                           interval: str = "equal-tailed", unit_sd=None, progress=None) -> HeterogeneityEvidence:
    """Posterior of the spread of effects across units and across a summary's subgroups, with a verdict.

    Parameters
    ----------
    draws : EffectDraws
        The draws the summary was built from.
    summary : TreeSummary or GroupSummary
        A tree at its current depth (``tree.at_depth(d)``) or pre-specified groups (the
        "All units" row is left out).
    threshold : float, optional
        ``c`` in ``P(largest - smallest subgroup effect > c)``, on the effect's scale; default:
        the rule of thumb in the module notes (a quarter of the larger of the absolute average
        effect and the mean sd of unit effects).
    level : float, default 0.95
        Credible level of the intervals in the message and table.
    interval : {"equal-tailed", "highest-density"}
    unit_sd : ndarray, shape (n_draws,), optional
        Per-draw unit sd already computed with :func:`unit_sd_draws` (skips its pass).
    progress : callable(done, total), optional

    Returns
    -------
    HeterogeneityEvidence

    Notes
    -----
    Verdict: "supported" when ``P(range > c) >= 0.95``, "not supported" when it is at most
    0.05, "inconclusive" otherwise (the conventional 95%; ``SUPPORT_PROB``).
    """
    _check_draws(draws)
    level = check_level(level)
    interval = check_interval(interval)
    theta, weights, what = _subgroup_draws(summary)
    if summary.draws is not draws:
        raise SummaryError("`summary` was built from other draws than `draws`; pass the draws it summarizes.")
    if unit_sd is None:
        unit_sd = unit_sd_draws(draws, progress=progress)
    else:
        unit_sd = np.asarray(unit_sd, dtype=np.float64)
        if unit_sd.shape != (draws.n_draws,):
            raise SummaryError(f"`unit_sd` must have shape ({draws.n_draws},) (one per draw); got {unit_sd.shape}.")
    between = between_sd_draws(theta, weights)
    spread = theta.max(axis=1) - theta.min(axis=1)
    overall = np.asarray(draws.overall, dtype=np.float64)

    if threshold is None:
        avg, usd = abs(float(overall.mean())), float(unit_sd.mean())
        if avg >= usd:
            c = DEFAULT_FRACTION * avg
            rule = f"a quarter of the absolute average effect ({_fmt(avg)})"
        else:
            c = DEFAULT_FRACTION * usd
            rule = f"a quarter of the posterior mean sd of unit effects ({_fmt(usd)}, larger than the absolute average effect)"
        rule += "; a rule of thumb, not a standard: set the threshold to a difference that matters in your field"
    else:
        try:
            c = float(threshold)
        except (TypeError, ValueError):
            raise SummaryError(f"`threshold` must be a number on the effect's scale; got {threshold!r}.") from None
        if not np.isfinite(c) or c < 0:
            raise SummaryError(f"`threshold` must be a finite number >= 0; got {threshold!r}.")
        rule = "set by the user"
    p = float((spread > c).mean())
    if p >= SUPPORT_PROB:
        verdict = "supported"
    elif p <= 1.0 - SUPPORT_PROB:
        verdict = "not supported"
    else:
        verdict = "inconclusive"
    pct = f"{100 * level:g}%"
    head = {
        "supported": f"Heterogeneity supported: the largest and smallest of {what} differ by more than {_fmt(c)} "
                     f"with posterior probability {p:.2f}.",
        "not supported": f"Little evidence of heterogeneity: the largest and smallest of {what} differ by more than "
                         f"{_fmt(c)} with posterior probability only {p:.2f}.",
        "inconclusive": f"Inconclusive: the largest and smallest of {what} differ by more than {_fmt(c)} with "
                        f"posterior probability {p:.2f}.",
    }[verdict]
    unit_hi = float(draw_summary(unit_sd[:, None], level, interval)["upper"][0])
    body = (f" Subgroup effects spread with sd {_interval_text(between, level, interval)}; unit effects with sd "
            f"{_interval_text(unit_sd, level, interval)} ({pct} intervals; average effect "
            f"{_interval_text(overall, level, interval)}).")
    if unit_hi < c:
        body += f" Unit effects themselves vary little: the {pct} upper limit of their sd is below {_fmt(c)}."
    weak = _weak_uptake(summary, level, interval)
    if weak:
        body += (f" {weak} of the subgroups have weak uptake (the interval of their complier share reaches near zero): "
                 "their ratio estimates are unstable and can drive the range.")
    tail = f" Threshold {_fmt(c)}: {rule}. This describes the model's posterior; subgroup findings are exploratory."
    settings = {"summary": "heterogeneity", "threshold": c, "threshold_rule": rule, "level": level,
                "interval": interval, "subgroups": what, "n_draws": draws.n_draws}
    return HeterogeneityEvidence(unit_sd=unit_sd, between_sd=between, range=spread, overall=overall, threshold=c,
                                 threshold_rule=rule, prob_range_above=p, verdict=verdict, message=head + body + tail,
                                 subgroups=what, level=level, interval=interval, n_chains=draws.n_chains,
                                 label=draws.label, settings=settings)
