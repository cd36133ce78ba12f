"""One structure, several posteriors: side-by-side summaries and the posterior of their differences.

A summary's structure (tree subgroups, pre-specified groups, linear terms, additive
smooths) is fitted once; ``summary.apply_to(other_draws)`` projects another
posterior of the same units onto that frozen structure (a second outcome, a second
model of one outcome, the intention-to-treat draws beside complier-weighted ones).
:func:`compare_posteriors` then gives, per subgroup, term or curve point, both
posteriors and the posterior of their difference.

Paired or independent (docs/method.md section 6: a difference is computed per draw, never
from two marginal intervals):

* **paired** -- the two draw sets come from one sampler run (draw ``s`` of each is
  the same sampler state, for example outcome and uptake of one joint model), so
  ``d_s = a_s - b_s`` keeps their posterior dependence. Detected when both
  :class:`~summarize_widgets.EffectDraws` carry the same ``source`` and number of
  draws and chains, or stated with ``paired=True``.
* **independent** -- two separate fits: their joint posterior is the product of the
  two, sampled by pairing the draws at random (a seeded permutation), ``d_s = a_s -
  b_{pi(s)}``. Pairing by index would impose a dependence no model implied.

The table says which was used. Units are matched by the covariate index and values
(or refused), never paired by position silently.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..core.intervals import credible_interval
from ..core.intervals import prob_above
from ..core.validate import SummaryError, check_interval, check_level

__all__ = ["check_same_units", "Pairing", "pairing_of", "summary_draws", "compare_posteriors", "Comparison",
           "side_by_side", "COMPARE_CAUTION"]

#: The caution every comparison output carries.
COMPARE_CAUTION = (
    "Both columns describe models' posteriors on one structure chosen from the first posterior; "
    "subgroup findings are exploratory unless pre-specified, and moderators are not mechanisms."
)


def _same_values(a: pd.Series, b: pd.Series) -> np.ndarray:
    """Per unit: the two columns hold the same value (missing equals missing)."""
    a = a.reset_index(drop=True)
    b = b.reset_index(drop=True)
    na, nb = a.isna().to_numpy(), b.isna().to_numpy()
    if pd.api.types.is_numeric_dtype(a) and pd.api.types.is_numeric_dtype(b) and not (
            pd.api.types.is_bool_dtype(a) ^ pd.api.types.is_bool_dtype(b)):
        va, vb = a.to_numpy(np.float64, na_value=np.nan), b.to_numpy(np.float64, na_value=np.nan)
        return (na & nb) | (~na & ~nb & (va == vb))
    sa, sb = a.astype(object).astype(str).to_numpy(), b.astype(object).astype(str).to_numpy()
    return (na & nb) | (~na & ~nb & (sa == sb))


def check_same_units(reference, other, columns=None) -> None:
    """Refuse ``other`` unless it describes the units of ``reference``, in the same order.

    Parameters
    ----------
    reference, other : EffectDraws
    columns : list of str, optional
        Covariates whose values must agree unit by unit (default: every column of ``reference``).

    Raises
    ------
    SummaryError
        When the number of units, the covariate index (labels or order) or a covariate's values differ.
    """
    from ..core.draws import EffectDraws

    if not isinstance(other, EffectDraws):
        raise SummaryError(f"`draws` must be an EffectDraws; got {type(other).__name__}.")
    if other.n_units != reference.n_units:
        raise SummaryError(
            f"`draws` has {other.n_units} units but the structure was fitted on {reference.n_units}; "
            "a structure applies only to draws of the same units."
        )
    ia, ib = reference.unit_ids, other.unit_ids
    if not ia.equals(ib):
        if ia.is_unique and ib.is_unique and set(ia) == set(ib):
            raise SummaryError(
                "`draws` has the same units as the structure but in a different order (covariate index); "
                "put its columns in the order of the structure's covariate index first."
            )
        unmatched = int((~ib.isin(ia)).sum()) if ia.is_unique else other.n_units
        raise SummaryError(
            f"`draws` covariate index differs from the structure's ({unmatched} of {other.n_units} labels unmatched); "
            "units are matched by the covariate index, never by position: give both the same index."
        )
    cols = list(reference.covariates.columns) if columns is None else list(columns)
    for c in cols:
        if c not in other.covariates.columns:
            raise SummaryError(f"`draws` covariates lack the column {c!r} that the structure uses.")
        same = _same_values(reference.covariates[c], other.covariates[c])
        if not same.all():
            raise SummaryError(
                f"`draws` covariate {c!r} differs from the structure's for {int((~same).sum())} of {other.n_units} "
                "units with the same index; these are not the same units (or not in the same order)."
            )


@dataclass(frozen=True)
class Pairing:
    """How the draws of two posteriors were combined into draws of their difference.

    Attributes
    ----------
    paired : bool
        True: draw s with draw s. False: independent posteriors, draws paired at random.
    how : str
        One line for tables and reports.
    index_a, index_b : ndarray of int
        Rows of each posterior's draws used, in pairing order.
    """

    paired: bool
    how: str
    index_a: np.ndarray
    index_b: np.ndarray


def pairing_of(a, b, paired=None, seed: int = 0) -> Pairing:
    """Decide how draws of ``a`` and ``b`` (EffectDraws) are combined.

    Parameters
    ----------
    a, b : EffectDraws
    paired : None or bool
        None: paired when both carry the same ``source`` and the same numbers of draws and
        chains, independent otherwise. True: paired (the user says so; needs equal draw counts).
        False: independent.
    seed : int, default 0
        Seed of the random pairing of independent posteriors.
    """
    if paired not in (None, True, False):
        raise SummaryError(f"`paired` must be None (detect), True or False; got {paired!r}.")
    same_shape = a.n_draws == b.n_draws and a.n_chains == b.n_chains
    if paired is True:
        if a.n_draws != b.n_draws:
            raise SummaryError(
                f"`paired=True` needs the same number of draws; got {a.n_draws} and {b.n_draws}. "
                "Draws of one sampler run have equal counts; use paired=False for separate fits."
            )
        idx = np.arange(a.n_draws)
        return Pairing(True, "paired by draw index (stated by the user)", idx, idx)
    if paired is None and same_shape and a.source == b.source:
        idx = np.arange(a.n_draws)
        return Pairing(True, "paired by draw index (same sampler run: shared source)", idx, idx)
    rng = np.random.default_rng(seed)
    m = min(a.n_draws, b.n_draws)
    ia = np.arange(m) if a.n_draws == m else np.sort(rng.choice(a.n_draws, m, replace=False))
    ib = rng.permutation(b.n_draws)[:m]
    reason = "stated by the user" if paired is False else "no shared source"
    return Pairing(False, f"independent posteriors ({reason}): {m} draws paired at random (seed {seed})", ia, ib)


def summary_draws(summary) -> tuple[np.ndarray, pd.DataFrame]:
    """Per-draw quantities of a summary and one row of keys per quantity.

    Returns
    -------
    draws : ndarray, shape (n_draws, k)
        Subgroup effects (tree, groups), coefficients (linear) or curve points (additive, every
        covariate's grid in turn).
    keys : DataFrame, k rows
        ``subgroup``, ``rule``, ``n_units``, ``share`` (tree, groups); ``term`` (linear);
        ``covariate``, ``x`` (additive).
    """
    from .additive import AdditiveSummary
    from .groups import GroupSummary
    from .linear import LinearSummary
    from .tree import TreeSummary

    if isinstance(summary, TreeSummary):
        return summary.leaf_draws, summary.table()[["subgroup", "rule", "n_units", "share"]]
    if isinstance(summary, GroupSummary):
        return summary.group_draws, summary.table()[["subgroup", "rule", "n_units", "share"]]
    if isinstance(summary, LinearSummary):
        return summary.coef_draws, pd.DataFrame({"term": summary.terms})
    if isinstance(summary, AdditiveSummary):
        parts, keys = [], []
        for c in summary.columns:
            parts.append(summary.curve_draws(c))
            keys.append(pd.DataFrame({"covariate": c, "x": pd.Series(list(summary.grids[c]), dtype=object)}))
        return np.hstack(parts), pd.concat(keys, ignore_index=True)
    raise SummaryError(
        "`first` and `second` must be summaries (TreeSummary, GroupSummary, LinearSummary or AdditiveSummary); "
        f"got {type(summary).__name__}."
    )


_STRUCTURE_KEYS = ("subgroup", "rule", "n_units", "term", "covariate", "x")


def _check_same_structure(ka: pd.DataFrame, kb: pd.DataFrame, a, b) -> None:
    if type(a) is not type(b):
        raise SummaryError(f"`first` is a {type(a).__name__} but `second` a {type(b).__name__}; compare like with like.")
    cols = [c for c in _STRUCTURE_KEYS if c in ka.columns]
    same = len(ka) == len(kb) and all(
        list(map(str, ka[c])) == list(map(str, kb[c])) for c in cols)
    if not same:
        raise SummaryError(
            "`second` is not on the structure of `first` (different subgroups, terms or grid); "
            "build it with `first.apply_to(other_draws)`."
        )


class Comparison:
    """Two posteriors on one structure, and the posterior of their difference (``a - b``).

    Build it with :func:`compare_posteriors`.

    Attributes
    ----------
    first, second : summary objects
    labels : tuple of str
        Names of the two posteriors in tables.
    pairing : Pairing
    keys : DataFrame
        One row per subgroup, term or curve point.
    draws_a, draws_b : ndarray, shape (n_draws, k)
        Each posterior's draws (all of them).
    difference_draws : ndarray, shape (m, k)
        Per-draw differences, combined as ``pairing`` says.
    """

    def __init__(self, first, second, labels, pairing, keys, qa, qb):
        self.first = first
        self.second = second
        self.labels = labels
        self.pairing = pairing
        self.keys = keys
        self.draws_a = qa
        self.draws_b = qb
        self.difference_draws = qa[pairing.index_a] - qb[pairing.index_b]

    def table(self, level: float = 0.95, interval: str = "equal-tailed") -> pd.DataFrame:
        """One row per subgroup (term, curve point): both posteriors and their difference.

        Columns: the keys (see :func:`summary_draws`), ``mean_a``, ``lower_a``, ``upper_a``,
        ``mean_b``, ``lower_b``, ``upper_b``, ``difference`` (posterior mean of ``a - b``),
        ``lower_diff``, ``upper_diff`` (its credible interval at ``level``), ``prob_a_greater``,
        ``pairing`` (how the difference draws were formed). ``df.attrs``: ``label_a``,
        ``label_b``, ``pairing``, ``paired``, ``level``, ``interval``, ``caution``.
        """
        level = check_level(level)
        interval = check_interval(interval)
        out = self.keys.reset_index(drop=True).copy()
        for tag, q in (("a", self.draws_a), ("b", self.draws_b)):
            lo, hi = credible_interval(q, level, interval)
            out[f"mean_{tag}"] = q.mean(axis=0)
            out[f"lower_{tag}"] = lo
            out[f"upper_{tag}"] = hi
        d = self.difference_draws
        lo, hi = credible_interval(d, level, interval)
        out["difference"] = d.mean(axis=0)
        out["lower_diff"] = lo
        out["upper_diff"] = hi
        out["prob_a_greater"] = prob_above(d, 0.0)
        out["pairing"] = "paired" if self.pairing.paired else "independent"
        out.attrs.update({"label_a": self.labels[0], "label_b": self.labels[1], "pairing": self.pairing.how,
                          "paired": self.pairing.paired, "level": level, "interval": interval,
                          "summary": "comparison", "caution": COMPARE_CAUTION})
        return out

    def __repr__(self) -> str:
        return (f"Comparison('{self.labels[0]}' - '{self.labels[1]}' on {len(self.keys)} rows; "
                f"{self.pairing.how})")


def _draws_of(summary):
    d = getattr(summary, "draws", None)
    if d is None:
        raise SummaryError(f"{type(summary).__name__} does not record its draws; rebuild it with this version.")
    return d


def compare_posteriors(first, second, *, paired=None, labels=None, seed: int = 0) -> Comparison:
    """Both posteriors on one structure and the posterior of ``first - second``.

    Parameters
    ----------
    first : TreeSummary, GroupSummary, LinearSummary or AdditiveSummary
        The summary whose structure is shared.
    second : the same kind
        ``first.apply_to(other_draws)``: the other posterior on the same structure.
    paired : None or bool
        See :func:`pairing_of` (None: detected from the draws' ``source``).
    labels : pair of str, optional
        Names in tables (default: the draws' labels, made distinct).
    seed : int, default 0
        Seed of the random pairing of independent posteriors.

    Returns
    -------
    Comparison
    """
    qa, ka = summary_draws(first)
    qb, kb = summary_draws(second)
    _check_same_structure(ka, kb, first, second)
    da, db = _draws_of(first), _draws_of(second)
    check_same_units(da, db, None if not hasattr(first, "columns") else list(first.columns))
    if labels is None:
        la, lb = da.label, db.label
        if la == lb:
            la, lb = f"{la} (A)", f"{lb} (B)"
    else:
        if len(labels) != 2 or not all(isinstance(x, str) for x in labels):
            raise SummaryError(f"`labels` must be two strings; got {labels!r}.")
        la, lb = labels
    return Comparison(first, second, (la, lb), pairing_of(da, db, paired, seed), ka, qa, qb)


def side_by_side(summaries, level: float = 0.95, interval: str = "equal-tailed") -> pd.DataFrame:
    """Several posteriors on one structure, stacked: one row per posterior and subgroup (term, point).

    Parameters
    ----------
    summaries : mapping label -> summary
        Summaries of one kind on one structure (the first and ``first.apply_to(...)`` of others).

    Returns
    -------
    DataFrame
        ``posterior`` (the label), the keys of :func:`summary_draws`, ``mean``, ``sd``,
        ``lower``, ``upper``, ``prob_positive``.
    """
    level = check_level(level)
    interval = check_interval(interval)
    if not hasattr(summaries, "items") or not summaries:
        raise SummaryError("`summaries` must be a non-empty mapping of label -> summary on one structure.")
    items = list(summaries.items())
    _, k0 = summary_draws(items[0][1])
    frames = []
    for label, s in items:
        q, k = summary_draws(s)
        _check_same_structure(k0, k, items[0][1], s)
        lo, hi = credible_interval(q, level, interval)
        f = k.reset_index(drop=True).copy()
        f.insert(0, "posterior", str(label))
        f["mean"] = q.mean(axis=0)
        f["sd"] = q.std(axis=0, ddof=1)
        f["lower"] = lo
        f["upper"] = hi
        f["prob_positive"] = prob_above(q, 0.0)
        frames.append(f)
    out = pd.concat(frames, ignore_index=True)
    out.attrs.update({"level": level, "interval": interval, "summary": "side by side", "caution": COMPARE_CAUTION})
    return out
