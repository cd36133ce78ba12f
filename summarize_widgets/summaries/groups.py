"""Pre-specified subgroups: effects of subgroups the analyst names with queries (:mod:`summarize_widgets.core.query`)."""
from __future__ import annotations

from collections.abc import Mapping

import numpy as np
import pandas as pd

from ..core.draws import EffectDraws
from ..core.passes import LinearMap
from .projection import SummaryPlan, project
from .base import SummaryResult
from .subgroups import UPTAKE_FLOOR, best_position, contrast_table, effect_table, ratio_draws
from ..core.query import query_mask
from ..core.validate import SummaryError

__all__ = ["summarize_groups", "plan_groups", "GroupSummary", "ALL_UNITS"]

#: Label of the first row of every group table.
ALL_UNITS = "All units"


def _mask(covariates: pd.DataFrame, label: str, query: str) -> np.ndarray:
    """Rows of ``covariates`` (as the user gave them, index included) that ``query`` selects."""
    if not isinstance(query, str) or not query.strip():
        raise SummaryError(f"Group {label!r}: the query must be a non-empty string such as \"age >= 65\"; got {query!r}.")
    try:
        return query_mask(covariates, query)
    except SummaryError as exc:
        raise SummaryError(f"Group {label!r}: {exc}") from None


class GroupSummary(SummaryResult):
    """Posterior of the effect in each pre-specified group (groups may overlap).

    Attributes
    ----------
    labels : list of str
        Group labels, ``"All units"`` first.
    queries : list of str
        The query of each group (``"all units"`` first).
    group_draws : ndarray, shape (n_draws, 1 + n_groups)
        Per-draw effect of each group, columns in ``labels`` order.
    """

    summary_type = "groups"

    def __init__(self, draws, labels, queries, masks, theta, uptake, weights=None):
        super().__init__(draws, {"groups": dict(zip(labels[1:], queries[1:])), "n_draws": draws.n_draws,
                                 "n_units": draws.n_units, "complier_weighted": draws.is_complier_weighted})
        self.labels = labels
        self.queries = queries
        self._masks = masks
        self.group_draws = theta  # (n_draws, 1 + n_groups): "All units" first
        self._uptake = uptake
        #: Per-draw total weight of each group, shape (n_draws, 1 + n_groups), "All units" first.
        self.group_weight_draws = np.broadcast_to(weights, theta.shape) if weights is not None else None

    @property
    def membership(self) -> np.ndarray:
        """Which units are in each group, bool (n_units, 1 + n_groups), columns in ``labels`` order (read-only)."""
        v = self._masks.view()
        v.flags.writeable = False
        return v

    def _attrs(self) -> dict:
        return {"label": self.label, "summary": "groups", "unit": self.draws.unit, "better": self.draws.better}

    def _info(self) -> pd.DataFrame:
        wbar = self.draws.mean_weights
        out = pd.DataFrame({
            "subgroup": self.labels,
            "label": self.labels,
            "rule": self.queries,
            "n_units": self._masks.sum(axis=0).astype(int),
            "share": (wbar @ self._masks) / wbar.sum(),
        })
        if self.draws.is_complier_weighted:  # share of units by the unit weights; of compliers by the uptake
            v = self.draws.unit_weights
            out["complier_share"] = out["share"]
            out["share"] = (v @ self._masks) / v.sum()
        return out

    def table(self, level: float = 0.95, interval: str = "equal-tailed", uptake_floor: float = UPTAKE_FLOOR) -> pd.DataFrame:
        """Same columns as :meth:`TreeSummary.table`; ``subgroup`` is the label, ``rule`` the query."""
        cols = self.statistics(self.labels, self.group_draws, level=level, interval=interval)
        return effect_table(cols, self._info(), level=level, interval=interval, uptake=self._uptake,
                            uptake_floor=uptake_floor, attrs=self._attrs())

    def best_subgroup(self, level: float = 0.95, interval: str = "equal-tailed") -> str:
        """Name of the group with the largest benefit in the draws' direction (``draws.better``), as
        :meth:`TreeSummary.best_subgroup` picks it."""
        table = self.table(level=level, interval=interval)
        return table["subgroup"].iloc[best_position(table)]

    def contrasts(self, level: float = 0.95, interval: str = "equal-tailed", subgroup=None) -> pd.DataFrame:
        """Every pair of groups (the "All units" row included): difference, interval, P(A > B)."""
        return contrast_table(self.group_draws, self.labels, self.queries, level=level, interval=interval,
                              subgroup=subgroup, attrs=self._attrs(), labels=self.labels,
                              best=self.best_subgroup(level, interval),
                              stats=lambda keys, diff: self.statistics(keys, diff, level=level, interval=interval))

    def apply_to(self, draws, *, progress=None) -> "GroupSummary":
        """The same groups (memberships frozen) with effects computed from other draws of the same units.

        ``draws`` (EffectDraws) must describe the same units: same covariate index, in the same
        order, with the same covariate values. Applied to the draws these groups were computed
        from, it reproduces this summary exactly.
        """
        from .compare import check_same_units

        if not isinstance(draws, EffectDraws):
            raise SummaryError(f"`draws` must be an EffectDraws; got {type(draws).__name__}.")
        check_same_units(self.draws, draws, None)
        return _project(draws, list(self.labels), list(self.queries), self._masks.astype(np.float64), progress)

    def __repr__(self) -> str:
        return f"GroupSummary of '{self.label}': {', '.join(self.labels)}"


def summarize_groups(draws, groups: Mapping[str, str], level=None, *, progress=None) -> GroupSummary:
    """Effects of pre-specified subgroups, one pass over the draws.

    Parameters
    ----------
    draws : EffectDraws
    groups : mapping of label -> query string
        For example ``{"older owners": "age >= 65 and tenure == 'owner'"}``, in the small
        grammar of :mod:`summarize_widgets.core.query` (comparisons, ``in`` lists,
        ``is missing``, and/or/not), evaluated with NumPy on the covariates as given
        (``index`` is their index). Groups may overlap.
    level : deprecated
        Ignored (it never changed the result); pass ``level`` to ``.table()`` instead.

    Returns
    -------
    GroupSummary
        Its table has a first row for all units.
    """

    if not isinstance(draws, EffectDraws):
        raise SummaryError(f"`draws` must be an EffectDraws; got {type(draws).__name__}.")
    if level is not None:
        import warnings

        warnings.warn("summarize_groups(level=...) is ignored and will be removed; pass level to .table().",
                      DeprecationWarning, stacklevel=2)
    return _project(draws, *_memberships(draws, groups), progress)


def _memberships(draws, groups):
    """Labels, queries and the membership matrix (n_units, 1 + n_groups) of the groups."""
    if not isinstance(draws, EffectDraws):
        raise SummaryError(f"`draws` must be an EffectDraws; got {type(draws).__name__}.")
    if not isinstance(groups, Mapping) or not groups:
        raise SummaryError("`groups` must be a non-empty mapping of label -> query, e.g. {'older': 'age >= 65'}.")
    labels, queries, masks = [ALL_UNITS], ["all units"], [np.ones(draws.n_units, bool)]
    given = draws.covariates.set_axis(draws.unit_ids, axis=0) if draws.unit_ids is not None else draws.covariates
    for label, query in groups.items():
        label = str(label)
        if label in labels:
            raise SummaryError(f"`groups` uses the label {label!r} twice (or it clashes with {ALL_UNITS!r}).")
        m = _mask(given, label, query)
        if not m.any():
            raise SummaryError(f"Group {label!r}: query {query!r} selects no units.")
        labels.append(label)
        queries.append(query)
        masks.append(m)
    return labels, queries, np.column_stack(masks).astype(np.float64)


def _project(draws, labels, queries, M, progress=None) -> GroupSummary:
    """One pass: every group's per-draw effect from the membership matrix ``M`` (n_units, n_groups)."""
    return project(draws, [_group_plan(draws, labels, queries, M)], progress=progress)[0]


def _group_plan(draws, labels, queries, M) -> SummaryPlan:
    red = LinearMap(M, with_weights=draws.has_draw_weights)

    def finish():
        if draws.has_draw_weights:
            W = red.weights_out
        else:
            W = draws.unit_weights @ M
        theta = ratio_draws(red.out, W, labels)
        uptake = None
        if draws.is_complier_weighted:
            uptake = W / (draws.unit_weights @ M)
        return GroupSummary(draws, labels, queries, M.astype(bool), theta, uptake, W)

    return SummaryPlan([red], finish, "groups")


def plan_groups(draws, groups: Mapping[str, str]) -> SummaryPlan:
    """The fit-structure step of :func:`summarize_groups` (memberships from the queries; no pass)."""
    return _group_plan(draws, *_memberships(draws, groups))
