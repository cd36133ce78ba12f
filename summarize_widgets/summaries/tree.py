"""Summary trees: CART fitted to the posterior mean, every draw projected onto its leaves.

One tree is grown on the weighted posterior mean to ``max_depth``; shallower
trees are its truncations (docs/method.md section 3). One pass over the draws gives
the per-draw sums of every deepest leaf; any node at any depth is a union of
deepest leaves, so a depth change costs O(n_draws x n_leaves) and never reads
the draws again.

Categorical covariates: before fitting, each categorical column's categories are
ordered by the weighted mean of the posterior mean within the category and
coded by that rank, so a threshold split on the code is a split of the
categories into two sets (``region in {east, west}``). For squared loss this
ordering gives the best binary partition at a node (Fisher 1958; Breiman et
al. 1984, sec. 9.4); we compute it once on all units, so it is exact for splits
at the root and an approximation below it (scikit-learn's tree has no
categorical splits). Missing numeric values follow scikit-learn's missing-value
support; missing categories form their own category.
"""
from __future__ import annotations

from functools import cached_property

import numpy as np
import pandas as pd
from sklearn.tree import DecisionTreeRegressor

from ..core.draws import EffectDraws
from ..core.design import ColumnSpec, category_codes, classify_columns, numeric_values
from .projection import SummaryPlan, checked_r2, no_heterogeneity, offset_centre, project, r2_note
from ..core.passes import LeafSums
from ..core.rules import Condition, combine, nice_threshold
from .base import SummaryResult
from .subgroups import UPTAKE_FLOOR, best_position, contrast_table, effect_table, ratio_draws
from ..core.validate import SummaryError, check_columns, check_int, check_level

__all__ = ["summarize_tree", "plan_tree", "TreeSummary", "default_min_size", "fit_cart"]

_MAX_DEPTH_LIMIT = 8


def default_min_size(n_units: int) -> int:
    """Default smallest subgroup: 5% of the units, at most 1,000 and at least 1 (common practice for readable subgroups)."""
    return int(max(1, min(1000, round(0.05 * n_units))))


def _encode(covariates: pd.DataFrame, specs: list[ColumnSpec], rank: dict, edges: dict, codes=None) -> np.ndarray:
    """The matrix the tree sees: numeric values (or their bin numbers), categories as Fisher ranks.

    ``codes`` (column -> category codes) reuses codes the caller already has.
    """
    codes = codes or {}
    cols = []
    for spec in specs:
        s = covariates[spec.name]
        if spec.kind == "numeric":
            x = numeric_values(s)
            if spec.name in edges:
                x = np.where(np.isnan(x), np.nan, np.searchsorted(edges[spec.name], x, side="right").astype(np.float64))
            cols.append(x)
        else:
            c = codes[spec.name] if spec.name in codes else category_codes(s, spec)
            cols.append(rank[spec.name][c].astype(np.float64))
    return np.column_stack(cols)


# Largest count of distinct values whose ranks float32 (what scikit-learn's trees split on) holds exactly.
_MAX_RANKS = 2**24


def _bin_edges(x: np.ndarray, n_bins: int | None) -> np.ndarray:
    """The grid a numeric column is ranked on: its distinct observed values, or quantile bin edges
    when it has more than ``n_bins`` distinct values.

    The tree sees ``searchsorted(grid, x, side="right")``: a rank among the distinct values (or a
    bin number), never the value itself. CART's splits depend only on the order of a column, so
    ranking changes no split, but it makes every column equally visible to scikit-learn, which
    casts to float32 and ignores differences below 1e-7: a dose in grams (1e-9 apart) or a
    timestamp with a large offset (1.7e9 + seconds) would otherwise never be split on.
    """
    obs = x[~np.isnan(x)]
    limit = _MAX_RANKS if n_bins is None else n_bins
    if pd.Series(obs).nunique() <= limit:  # hash-based count: no sort
        return np.unique(obs)
    return np.unique(np.quantile(obs, np.linspace(0, 1, limit + 1)[1:-1], method="lower"))


class _Fitted:
    """Everything shared by a tree and its truncations (computed once)."""

    def __init__(self, draws, specs, est, X, rank, edges, max_depth, min_size, unit_leaf, A, W_draw, W_fixed,
                 names_by_rank, grown_on=None, A_centred=None):
        self.draws = draws
        self.grown_on = draws.label if grown_on is None else grown_on  # label of the draws the tree was grown on
        self.specs = specs
        self.est = est
        self.X = X
        self.rank = rank
        self.edges = edges
        self.max_depth = max_depth
        self.min_size = min_size
        t = est.tree_
        self.t = t
        n_nodes = t.node_count
        self.parent = np.full(n_nodes, -1)
        self.node_depth = np.zeros(n_nodes, int)
        # Each node's path from the root as left (0) / right (1) turns: its place in the tree,
        # which does not depend on max_depth (scikit-learn's node ids do).
        self.path: list[tuple] = [()] * n_nodes
        for node in range(n_nodes):
            for turn, child in enumerate((t.children_left[node], t.children_right[node])):
                if child >= 0:
                    self.parent[child] = node
                    self.node_depth[child] = self.node_depth[node] + 1
                    self.path[child] = self.path[node] + (turn,)
        self.sk_leaves = np.flatnonzero(t.children_left < 0)
        L = len(self.sk_leaves)
        # membership: deepest leaf -> every ancestor node
        M = np.zeros((L, n_nodes))
        for j, leaf in enumerate(self.sk_leaves):
            node = leaf
            while node >= 0:
                M[j, node] = 1.0
                node = self.parent[node]
        self.M = M
        self.unit_leaf = unit_leaf  # index into sk_leaves, per unit
        self.A_nodes = A @ M  # (S, n_nodes)
        # sums of w (T - c_s), when the pass centred them (large common offsets); else rebuilt from A_nodes
        self.Ac_nodes = None if A_centred is None else A_centred @ M
        wbar = draws.mean_weights
        self.n_units_node = np.bincount(unit_leaf, minlength=L) @ M
        self.wbar_node = np.bincount(unit_leaf, weights=wbar, minlength=L) @ M
        if W_draw is not None:
            self.W_nodes = W_draw @ M
        else:
            self.W_nodes = np.broadcast_to(W_fixed @ M, self.A_nodes.shape)
        self.unit_w_node = None
        if draws.is_complier_weighted:
            v = draws.unit_weights
            self.unit_w_node = np.bincount(unit_leaf, weights=v, minlength=L) @ M
        self.names_by_rank = names_by_rank
        self.diagnostics: dict = {}  # Monte Carlo diagnostics per node, shared by every truncation
        self.conditions = self._conditions()
        self.rules = self._rules()

    # -- rules -----------------------------------------------------------------------
    def _raw_column(self, f: int) -> np.ndarray:
        """Numeric column ``f`` as given (float64, NaN where missing), from the covariates."""
        return numeric_values(self.draws.covariates[self.specs[f].name])

    def _conditions(self) -> dict:
        """Condition on the edge into each non-root node.

        Thresholds are written with the fewest digits that keep the fitted partition, which
        needs each child's largest (left) and smallest (right) value; category sets list the
        categories present in each child. Both come from per-leaf summaries (a node is a union
        of deepest leaves), so no per-node pass over the units is made.
        """
        t = self.t
        L = len(self.sk_leaves)
        order = np.argsort(self.unit_leaf, kind="stable")
        starts = np.searchsorted(self.unit_leaf[order], np.arange(L))
        # Column by column, each rebuilt from the covariates: no float64 copy of every column is kept
        # beside the encoded matrix (at 8,000,000 units and 6 columns that copy was 384 MB).
        raw_of = {f: self._raw_column(f) for f, spec in enumerate(self.specs) if spec.kind == "numeric"}
        leaf_max = np.full((L, len(self.specs)), np.nan)
        leaf_min = np.full((L, len(self.specs)), np.nan)
        with np.errstate(invalid="ignore"):
            for f in range(len(self.specs)):
                col = (raw_of[f] if f in raw_of else self.X[:, f].astype(np.float64))[order]
                leaf_max[:, f] = np.fmax.reduceat(col, starts)  # NaN only where a leaf has no observed value
                leaf_min[:, f] = np.fmin.reduceat(col, starts)
                del col
        present = {}
        for f, spec in enumerate(self.specs):
            if spec.kind == "categorical":
                k = len(spec.categories)
                codes = self.X[:, f].astype(np.int64)
                present[f] = np.bincount(self.unit_leaf * k + codes, minlength=L * k).reshape(L, k) > 0
        member = self.M > 0  # (leaves, nodes)

        def child_max(c, f):
            v = leaf_max[member[:, c], f]
            v = v[~np.isnan(v)]
            return v.max() if v.size else -np.inf

        def child_min(c, f):
            v = leaf_min[member[:, c], f]
            v = v[~np.isnan(v)]
            return v.min() if v.size else np.inf

        binary: dict[int, bool] = {}

        def is_binary(f):
            if f not in binary:
                v = raw_of[f] if f in raw_of else self.X[:, f].astype(np.float64)
                v = v[~np.isnan(v)]
                binary[f] = bool(np.isin(v, (0.0, 1.0)).all())
            return binary[f]

        n_missing: dict[int, np.ndarray] = {}

        def missing_at(f):  # per node, how many units with column f missing reach it
            if f not in n_missing:
                v = raw_of[f] if f in raw_of else self.X[:, f]
                n_missing[f] = np.bincount(self.unit_leaf, weights=np.isnan(v), minlength=L) @ self.M
            return n_missing[f]

        conds = {}
        self.split_value = np.full(t.node_count, np.nan)  # each split's threshold as assign() compares it
        for node in range(t.node_count):
            left, right = t.children_left[node], t.children_right[node]
            if left < 0:
                continue
            f = t.feature[node]
            spec = self.specs[f]
            if spec.kind == "numeric":
                has_missing = spec.n_missing > 0 and missing_at(f)[node] > 0  # missing units reached this split
                ml = has_missing and bool(t.missing_go_to_left[node])
                if not np.isfinite(t.threshold[node]):  # scikit-learn's split of observed (left) from missing (right)
                    conds[left] = Condition(spec.name, op="observed", numeric_value=np.inf)
                    conds[right] = Condition(spec.name, op="missing", numeric_value=np.inf)
                    self.split_value[node] = np.inf
                    continue
                if is_binary(f):  # a 0/1 indicator reads "= 0" / "= 1", never "<= 0"
                    conds[left] = Condition(spec.name, op="=", value="0", numeric_value=0.0, with_missing=ml)
                    conds[right] = Condition(spec.name, op="=", value="1", numeric_value=1.0,
                                             with_missing=has_missing and not ml)
                    self.split_value[node] = 0.0
                    continue
                dtype = self.draws.covariates[spec.name].dtype
                dtype = dtype if getattr(dtype, "kind", "f") == "f" else np.dtype(np.float64)
                # the tree split on ranks: threshold r keeps grid values below grid[floor(r)] on the left
                grid = self.edges[spec.name]
                in_units = float(grid[min(max(int(np.floor(t.threshold[node])) - 1, 0), grid.size - 1)])
                value = nice_threshold(in_units, child_max(left, f), child_min(right, f), dtype)
                # compared as the data's own type, so assign() and the printed rule agree on every unit
                self.split_value[node] = float(dtype.type(float(value)))
                conds[left] = Condition(spec.name, op="<=", value=value, numeric_value=float(value), with_missing=ml)
                conds[right] = Condition(spec.name, op=">", value=value, numeric_value=float(value),
                                         with_missing=has_missing and not ml)
            else:
                names = self.names_by_rank[spec.name]
                self.split_value[node] = float(t.threshold[node])  # categories stay ranked
                for child in (left, right):
                    ranks = np.flatnonzero(present[f][member[:, child]].any(axis=0))
                    labels = tuple(sorted((names[r] for r in ranks), key=spec.categories.index))
                    conds[child] = Condition(spec.name, labels=labels)
        return conds

    def path_conditions(self, node: int) -> list:
        """The conditions on the path from the root to ``node``, root first."""
        path = []
        k = node
        while self.parent[k] >= 0:
            path.append(self.conditions[k])
            k = self.parent[k]
        return path[::-1]

    def _rules(self) -> list[str]:
        return [combine(self.path_conditions(node)) for node in range(self.t.node_count)]

    def route(self, covariates: pd.DataFrame) -> np.ndarray:
        """The deepest node (scikit-learn id) of each row, following the printed rules.

        Numeric splits compare the row's value, in the fitted column's own type, with the printed
        threshold; missing values go where the fitted tree sends them; categories by their rank.
        On the fitted units this is the tree's own assignment; on new rows it is what the rules say.
        """
        t = self.t
        cols = []
        for spec in self.specs:
            s = covariates[spec.name]
            if spec.kind == "numeric":
                dtype = self.draws.covariates[spec.name].dtype
                x = numeric_values(s)
                cols.append(x.astype(dtype).astype(np.float64) if getattr(dtype, "kind", "") == "f" else x)
            else:
                cols.append(self.rank[spec.name][category_codes(s, spec)].astype(np.float64))
        V = np.column_stack(cols)
        node = np.zeros(len(V), dtype=np.int64)
        rows = np.arange(len(V))
        for _ in range(int(self.node_depth.max())):
            inner = t.children_left[node] >= 0
            if not inner.any():
                break
            nd = node[inner]
            x = V[rows[inner], t.feature[nd]]
            with np.errstate(invalid="ignore"):
                go_left = np.where(np.isnan(x), t.missing_go_to_left[nd].astype(bool), x <= self.split_value[nd])
            node[inner] = np.where(go_left, t.children_left[nd], t.children_right[nd])
        return node

    def nodes_at(self, depth: int) -> np.ndarray:
        """Node ids of the subgroups of the truncation at ``depth`` (in tree order: left to right)."""
        is_leaf = self.t.children_left < 0
        sel = (self.node_depth == depth) | (is_leaf & (self.node_depth < depth))
        ids = np.flatnonzero(sel)
        # scikit-learn numbers nodes depth first, left child first, so id order is tree order;
        # the labels rely on it, so check rather than assume.
        if [self.path[i] for i in ids] != sorted(self.path[i] for i in ids):  # pragma: no cover
            raise SummaryError("Internal: tree node ids are not in left-to-right order.")
        return ids

    def labels_at(self, depth: int) -> dict[int, str]:
        """Node id -> readable label ``S1 .. Sk`` of the subgroups at ``depth``, left to right.

        The label follows the subgroup's place in the tree, so the same leaves get the same
        labels whatever ``max_depth`` the tree was grown to.
        """
        return {int(i): f"S{k}" for k, i in enumerate(self.nodes_at(depth), start=1)}


class _DepthNumber(int):
    """The current depth (an int). Calling it, as in ``tree.depth(2)``, is the old spelling of
    :meth:`TreeSummary.at_depth` and still works, with a deprecation warning."""

    def __new__(cls, value, tree):
        self = super().__new__(cls, value)
        self._tree = tree
        return self

    def __call__(self, d):
        import warnings

        warnings.warn("TreeSummary.depth(d) is now TreeSummary.at_depth(d); `depth` is the current depth (an int).",
                      DeprecationWarning, stacklevel=2)
        return self._tree.at_depth(d)


class TreeSummary(SummaryResult):
    """A summary tree and the posterior of its subgroup effects at one depth.

    Build it with :func:`summarize_tree`; ``.at_depth(d)`` gives the truncation at depth d
    without touching the draws. See DEVELOPERS.md for the columns of every table.

    Attributes
    ----------
    depth : int
        The depth this object describes (its subgroups are the nodes at this depth, or leaves above it).
    """

    summary_type = "tree"

    def __init__(self, fitted: _Fitted, depth: int):
        self._f = fitted
        self._depth = int(depth)
        super().__init__(fitted.draws, {
            "depth": self._depth,
            "max_depth": fitted.max_depth,
            "min_size": fitted.min_size,
            "columns": [s.name for s in fitted.specs],
            "n_draws": fitted.draws.n_draws,
            "n_units": fitted.draws.n_units,
            "complier_weighted": fitted.draws.is_complier_weighted,
            "structure_from": fitted.grown_on,
        })
        self._diagnostics = fitted.diagnostics

    # -- structure ----------------------------------------------------------------------
    @property
    def depth(self) -> int:
        """The current depth (an int)."""
        return _DepthNumber(self._depth, self)

    @property
    def current_depth(self) -> int:
        """Deprecated name of :attr:`depth`."""
        import warnings

        warnings.warn("TreeSummary.current_depth is now TreeSummary.depth.", DeprecationWarning, stacklevel=2)
        return self._depth

    @property
    def max_depth(self) -> int:
        return self._f.max_depth

    @property
    def fitted_depth(self) -> int:
        """Depth the grown tree actually reached (it stops early when no split is allowed)."""
        return int(self._f.node_depth.max())

    @property
    def columns(self) -> list[str]:
        return [s.name for s in self._f.specs]

    @property
    def min_size(self) -> int:
        return self._f.min_size

    def at_depth(self, d: int) -> "TreeSummary":
        """The truncation at depth ``d`` (1 to ``max_depth``), from stored sums only."""
        d = check_int(d, "depth", low=1, high=self.max_depth)
        return TreeSummary(self._f, d)

    @cached_property
    def leaf_ids(self) -> np.ndarray:
        """Node ids of the subgroups at the current depth."""
        return self._f.nodes_at(self._depth)

    @cached_property
    def leaf_draws(self) -> np.ndarray:
        """Per-draw subgroup effects, shape (n_draws, n_subgroups), columns in ``leaf_ids`` order."""
        f = self._f
        ids = self.leaf_ids
        return ratio_draws(f.A_nodes[:, ids], f.W_nodes[:, ids], [f.rules[i] for i in ids])

    @cached_property
    def leaf_weight_draws(self) -> np.ndarray:
        """Per-draw total weight of each subgroup ``W_sl = sum_{i in l} w_si``, shape (n_draws, n_subgroups).

        Columns in ``leaf_ids`` order; constant over draws unless the weights vary by draw (for
        complier-weighted draws: the subgroup's summed uptake effect).
        """
        f = self._f
        return np.array(f.W_nodes[:, self.leaf_ids], dtype=np.float64)

    def fitted_values(self, rows=None) -> np.ndarray:
        """Projected draws: each unit's subgroup effect, shape (n_rows, n_units).

        Parameters
        ----------
        rows : None, int, slice or array of int
            Which draws (default: all; mind the memory, n_draws x n_units).
        """
        theta = self.leaf_draws if rows is None else np.atleast_2d(self.leaf_draws[rows])
        col = np.searchsorted(self.leaf_ids, self._ancestor_at_depth()[self._f.sk_leaves[self._f.unit_leaf]])
        return theta[:, col]

    def _uptake(self, ids):
        f = self._f
        if f.unit_w_node is None:
            return None
        return f.W_nodes[:, ids] / f.unit_w_node[ids]

    @cached_property
    def labels(self) -> dict[int, str]:
        """Node id -> printed label (``S1 .. Sk``, left to right) of each subgroup at the current depth.

        Labels follow the subgroups' places in the tree: the same leaves keep the same labels
        whatever ``max_depth`` was. Every output (tables, figures, report, explorer) prints them.
        """
        return self._f.labels_at(self._depth)

    def label_of(self, subgroup) -> str:
        """The printed label of a subgroup given by node id (or by its label, returned as is)."""
        if isinstance(subgroup, str) and subgroup in self.labels.values():
            return subgroup
        try:
            return self.labels[int(subgroup)]
        except (KeyError, TypeError, ValueError):
            raise SummaryError(f"`subgroup` {subgroup!r} is not a subgroup at depth {self._depth}: node ids "
                               f"{list(self.labels)} or labels {list(self.labels.values())}.") from None

    def node_of(self, subgroup) -> int:
        """The node id of a subgroup given by label (``"S2"``) or node id."""
        if isinstance(subgroup, str):
            for node, lab in self.labels.items():
                if lab == subgroup:
                    return node
        self.label_of(subgroup)  # raises naming the valid ids and labels
        return int(subgroup)

    def full_rule(self, subgroup) -> str:
        """The rule of a subgroup (label or node id) with every category listed.

        Rules in tables, figures and reports abbreviate long category sets after
        :data:`~summarize_widgets.core.rules.SHOWN_LEVELS` labels ("and 9,990 more").
        """
        return combine(self._f.path_conditions(self.node_of(subgroup)), full=True)

    def rule_levels(self, subgroup) -> dict:
        """Column -> the full tuple of categories a subgroup's rule keeps, for its categorical columns."""
        out = {}
        for c in self._f.path_conditions(self.node_of(subgroup)):
            if c.labels is not None:
                out[c.column] = tuple(c.labels)  # the last (narrowest) set on the path
        return out

    def _shares(self, ids):
        """Share of units (by unit weight) and, complier-weighted, share of compliers."""
        f = self._f
        if f.unit_w_node is None:
            return f.wbar_node[ids] / f.wbar_node[0], None
        return f.unit_w_node[ids] / f.unit_w_node[0], f.wbar_node[ids] / f.wbar_node[0]

    def _info(self, ids) -> pd.DataFrame:
        f = self._f
        share, complier = self._shares(ids)
        out = pd.DataFrame({
            "subgroup": ids.astype(int),
            "label": [self.labels[int(i)] for i in ids],
            "rule": [f.rules[i] for i in ids],
            "n_units": f.n_units_node[ids].astype(int),
            "share": share,
        })
        if complier is not None:
            out["complier_share"] = complier
        return out

    def _attrs(self):
        return {"label": self.label, "depth": self._depth, "summary": "tree", "unit": self.draws.unit,
                "better": self.draws.better}

    def table(self, level: float = 0.95, interval: str = "equal-tailed", uptake_floor: float = UPTAKE_FLOOR) -> pd.DataFrame:
        """One row per subgroup at the current depth.

        Columns (:data:`~summarize_widgets.summaries.subgroups.SUBGROUP_COLUMNS`): ``subgroup``
        (node id, as :meth:`assign` returns it), ``label`` (``S1 .. Sk`` left to right, what every
        output prints), ``rule``, ``n_units``, ``share`` (share of units, by unit weight), then the
        statistics core's ``mean``, ``sd``, ``lower``, ``upper`` (credible interval at
        ``level``), ``prob_positive`` and Monte Carlo error columns ``ess_bulk``, ``ess_tail``,
        ``rhat``, ``mcse_mean``, ``mcse_lower``, ``mcse_upper``, ``mc_warning``
        (:mod:`summarize_widgets.core.stats`); complier-weighted draws add ``complier_share``
        (the subgroup's share of the compliers), ``uptake_share``,
        ``uptake_lower``, ``uptake_upper`` and ``weak_uptake`` (lower credible limit of the
        complier share below ``uptake_floor``: the subgroup's ratio is unstable).
        """
        ids = self.leaf_ids
        cols = self.statistics([int(i) for i in ids], self.leaf_draws, level=level, interval=interval)
        return effect_table(cols, self._info(ids), level=level, interval=interval, uptake=self._uptake(ids),
                            uptake_floor=uptake_floor, attrs=self._attrs())

    def nodes(self, level: float = 0.95, interval: str = "equal-tailed") -> pd.DataFrame:
        """Every node down to the current depth (the one description core for every renderer).

        Columns: ``node``, ``label`` (the subgroup's ``S1 .. Sk`` label, "" for inner nodes),
        ``parent`` (-1 for the root), ``depth``, ``split`` (condition on the
        edge from the parent), ``rule`` (the full path), ``is_leaf`` (a subgroup at the current
        depth), ``n_units``, ``share``, then the statistics core's columns (as in :meth:`table`).
        """
        f = self._f
        ids = np.flatnonzero(f.node_depth <= self._depth)
        theta = ratio_draws(f.A_nodes[:, ids], f.W_nodes[:, ids], [f.rules[i] for i in ids])
        cols = self.statistics([int(i) for i in ids], theta, level=level, interval=interval)
        leaves = set(self.leaf_ids.tolist())
        share, complier = self._shares(ids)
        out = pd.DataFrame({
            "node": ids.astype(int),
            "label": [self.labels.get(int(i), "") for i in ids],
            "parent": f.parent[ids].astype(int),
            "depth": f.node_depth[ids].astype(int),
            "split": [f.conditions[i].text() if i in f.conditions else "" for i in ids],
            "rule": [f.rules[i] for i in ids],
            "is_leaf": [int(i) in leaves for i in ids],
            "n_units": f.n_units_node[ids].astype(int),
            "share": share,
            **({"complier_share": complier} if complier is not None else {}),
            **cols,
        })
        out.attrs.update({"level": check_level(level), "interval": interval, **self._attrs()})
        return out

    def outline(self) -> pd.DataFrame:
        """Every node down to the current depth, structure only: ``node``, ``parent`` (-1 for the
        root), ``depth``, ``rule``, ``is_leaf`` (a subgroup at the current depth), in the row order
        of :meth:`nodes`. No per-draw work: what finding a node's ancestor or a rule's node needs."""
        f = self._f
        ids = np.flatnonzero(f.node_depth <= self._depth)
        leaves = set(self.leaf_ids.tolist())
        return pd.DataFrame({
            "node": ids.astype(int),
            "parent": f.parent[ids].astype(int),
            "depth": f.node_depth[ids].astype(int),
            "rule": [f.rules[i] for i in ids],
            "is_leaf": [int(i) in leaves for i in ids],
        })

    def best_subgroup(self, level: float = 0.95, interval: str = "equal-tailed") -> int:
        """Node id of the subgroup with the largest benefit in the draws' direction (``draws.better``):
        the lowest posterior mean when lower is better, else the highest; weak-uptake subgroups only
        when no other is left (:func:`~summarize_widgets.summaries.subgroups.best_position`).
        ``level`` and ``interval`` matter only for the weak-uptake flag."""
        table = self.table(level=level, interval=interval)
        return int(table["subgroup"].iloc[best_position(table)])

    def contrasts(self, level: float = 0.95, interval: str = "equal-tailed", subgroup=None) -> pd.DataFrame:
        """Every pair of subgroups (or ``subgroup`` against each other): difference per draw,
        its interval and ``P(A > B)``; never two marginal intervals combined."""
        ids = self.leaf_ids
        if subgroup is not None:
            subgroup = self.node_of(subgroup)
        return contrast_table(self.leaf_draws, [int(i) for i in ids], [self._f.rules[i] for i in ids],
                              level=level, interval=interval, subgroup=subgroup, attrs=self._attrs(),
                              labels=[self.labels[int(i)] for i in ids], best=self.best_subgroup(level, interval),
                              stats=lambda keys, diff: self.statistics(keys, diff, level=level, interval=interval))

    # -- summary R^2 ---------------------------------------------------------------------
    def _r2_at(self, depth: int) -> np.ndarray:
        f = self._f
        d = f.draws
        ids = f.nodes_at(depth)
        c = d.scan.centre[:, None]
        W = f.W_nodes[:, ids]
        Wt = f.W_nodes[:, 0]
        if f.Ac_nodes is not None:  # summed centred in the pass: every digit of the spread kept
            Ac, Atc = f.Ac_nodes[:, ids], f.Ac_nodes[:, 0]
        else:
            Ac = f.A_nodes[:, ids] - c * W  # centred leaf sums (docs/method.md section 3 numerics)
            Atc = f.A_nodes[:, 0] - d.scan.centre * Wt
        with np.errstate(divide="ignore", invalid="ignore"):
            sse = d.scan.centred_squares - np.where(W > 0, Ac * Ac / np.where(W > 0, W, 1.0), 0.0).sum(axis=1)
            sst = d.scan.centred_squares - Atc * Atc / Wt
            none = no_heterogeneity(sst, Wt, d.scan.centre)
            r2 = np.where(none, np.nan, 1.0 - np.clip(sse, 0.0, None) / np.where(none, 1.0, sst))
        return np.clip(r2, 0.0, 1.0)

    @property
    def fit_r2(self) -> np.ndarray:
        """Summary R^2 per draw at the current depth, shape (n_draws,).

        NaN for draws with no heterogeneity (see ``fit_r2_note``); raises when every draw has none.
        """
        return checked_r2(self._r2_at(self._depth))

    @property
    def fit_r2_note(self) -> str:
        """How many draws had no heterogeneity (their R^2 is undefined), or ""."""
        return r2_note(self._r2_at(self._depth))

    def fit_r2_draws_by_depth(self) -> dict[int, np.ndarray]:
        """Depth -> per-draw summary R^2 (n_draws,), for every depth 1..max_depth."""
        return {d: checked_r2(self._r2_at(d)) for d in range(1, self.max_depth + 1)}

    def fit_r2_by_depth(self, level: float = 0.95, interval: str = "equal-tailed") -> pd.DataFrame:
        """Posterior of summary R^2 at every depth: ``depth``, ``n_subgroups``, then
        :data:`~summarize_widgets.summaries.base.FIT_COLUMNS` (``mean``, ``sd``, ``lower``,
        ``upper`` and the Monte Carlo error columns)."""
        rows = []
        for d, r2 in self.fit_r2_draws_by_depth().items():
            rows.append({"depth": d, "n_subgroups": len(self._f.nodes_at(d)),
                         **self.r2_statistics(("fit_r2", d), r2, level=level, interval=interval)})
        out = pd.DataFrame(rows)
        out.attrs.update({"level": check_level(level), "interval": interval, **self._attrs()})
        return out

    # -- new rows ---------------------------------------------------------------------------
    def assign(self, covariates: pd.DataFrame) -> pd.Series:
        """The subgroup (node id at the current depth) of each row of ``covariates``."""
        if not isinstance(covariates, pd.DataFrame):
            raise SummaryError(f"`covariates` must be a pandas DataFrame; got {type(covariates).__name__}.")
        if any(not isinstance(c, str) for c in covariates.columns):  # integer names, as EffectDraws reads them
            covariates = covariates.rename(columns=str)
        missing = [c for c in self.columns if c not in covariates.columns]
        if missing:
            raise SummaryError(f"`covariates` lacks the column(s) the tree uses: {', '.join(repr(m) for m in missing)}.")
        f = self._f
        anc = self._ancestor_at_depth()
        return pd.Series(anc[f.route(covariates)], index=covariates.index, name="subgroup")

    def apply_to(self, draws, *, progress=None) -> "TreeSummary":
        """The same subgroups (this tree, frozen) with effects computed from other draws of the same units.

        Parameters
        ----------
        draws : EffectDraws
            Another posterior for the same units: a second outcome, a second model, the
            intention-to-treat draws beside complier-weighted ones. Its covariates must have
            the same index, in the same order, and the same values in the tree's columns.
        progress : callable(done, total), optional

        Returns
        -------
        TreeSummary
            At the current depth, every depth available; one pass over ``draws``, no refit.
            Applied to the draws the tree was grown on, it reproduces this summary exactly.
        """
        from .compare import check_same_units

        if not isinstance(draws, EffectDraws):
            raise SummaryError(f"`draws` must be an EffectDraws; got {type(draws).__name__}.")
        f = self._f
        check_same_units(f.draws, draws, self.columns)
        plan = _leaf_plan(draws, f.specs, f.est, f.X, f.rank, f.edges, f.max_depth, f.min_size, f.unit_leaf,
                          f.names_by_rank, grown_on=f.grown_on, depth=self._depth)
        return project(draws, [plan], progress=progress)[0]

    def _ancestor_at_depth(self) -> np.ndarray:
        f = self._f
        anc = np.arange(f.t.node_count)
        for node in range(f.t.node_count):
            k = node
            while f.node_depth[k] > self._depth:
                k = f.parent[k]
            anc[node] = k
        return anc

    # -- refitting the same tree to other targets (structure stability) -------------------
    @property
    def encoded_covariates(self) -> np.ndarray:
        """The matrix the tree was fitted on, shape (n_units, n_columns), read-only.

        Numeric columns hold each value's rank among the column's distinct values (or its
        quantile-bin number), so the fit does not depend on a column's scale or offset;
        categorical columns the rank of each category (see :func:`fit_cart`). Columns in
        ``columns`` order.
        """
        v = self._f.X.view()
        v.flags.writeable = False
        return v

    @property
    def column_types(self) -> list[str]:
        """``"numeric"`` or ``"categorical"`` for each of ``columns``."""
        return [s.kind for s in self._f.specs]

    def split_columns(self) -> list[tuple[int, str]]:
        """``(depth, column)`` of every split above the current depth, in node order (the root's first)."""
        f = self._f
        return [(int(f.node_depth[k]), f.specs[f.t.feature[k]].name) for k in range(f.t.node_count)
                if f.t.children_left[k] >= 0 and f.node_depth[k] < self.depth]

    def unit_subgroups(self) -> np.ndarray:
        """The subgroup (node id at the current depth) of every unit, shape (n_units,)."""
        f = self._f
        return self._ancestor_at_depth()[f.sk_leaves[f.unit_leaf]]

    def __repr__(self) -> str:
        tab = self.table()
        lines = [f"TreeSummary of '{self.label}' at depth {self._depth} (max {self.max_depth}), "
                 f"{len(tab)} subgroups, min size {self.min_size}:"]
        for r in tab.itertuples():
            lines.append(f"  [{r.subgroup}] {r.rule}: n={r.n_units}, mean {r.mean:.4g} [{r.lower:.4g}, {r.upper:.4g}]")
        return "\n".join(lines)


def _leaf_plan(draws, specs, est, X, rank, edges, max_depth, min_size, unit_leaf, names_by_rank,
               grown_on=None, depth=None) -> SummaryPlan:
    """The projection step of a tree: per-draw sums of every deepest leaf (so of every node at every depth)."""
    n_leaves = int(np.flatnonzero(est.tree_.children_left < 0).size)
    sums = LeafSums(unit_leaf, n_leaves, centre=offset_centre(draws))

    def finish():
        W_draw = sums.weights
        W_fixed = None
        if W_draw is None:
            W_fixed = np.bincount(unit_leaf, weights=draws.unit_weights, minlength=n_leaves)
        fitted = _Fitted(draws, specs, est, X, rank, edges, max_depth, min_size, unit_leaf, sums.sums, W_draw,
                         W_fixed, names_by_rank, grown_on=grown_on, A_centred=sums.centred_sums)
        return TreeSummary(fitted, max_depth if depth is None else depth)

    return SummaryPlan([sums], finish, "tree")


def summarize_tree(draws, *, max_depth: int = 4, min_size: int | None = None, columns=None,
                   n_bins: int | None = 256, progress=None) -> TreeSummary:
    """Fit a summary tree to the posterior mean and project every draw onto its subgroups.

    One pass over the draws (:func:`plan_tree` then its projection).

    Parameters
    ----------
    draws : EffectDraws
    max_depth : int, default 4
        Deepest tree offered (1 to 8); every shallower depth is available via ``.at_depth(d)``.
    min_size : int, optional
        Smallest subgroup, in units (scikit-learn's ``min_samples_leaf``); default
        :func:`default_min_size` (5% of the units, at most 1,000).
    columns : list of str, optional
        Covariates the tree may split on (default: all).
    n_bins : int or None, default 256
        A numeric covariate with more distinct values than this is split only between its
        quantile bins (as histogram-based tree learners do): the search is much faster on
        large samples and the thresholds are at most one bin (1/256 of the units) away from
        the exact CART split. ``None`` searches every threshold. Rules are written in the
        covariate's own units and hold exactly for the fitted units.
    progress : callable(done, total), optional
        Called after each block of the pass over the draws.

    Returns
    -------
    TreeSummary
        At depth ``max_depth``.
    """
    plan = plan_tree(draws, max_depth=max_depth, min_size=min_size, columns=columns, n_bins=n_bins)
    return project(draws, [plan], progress=progress)[0]


def plan_tree(draws, *, max_depth: int = 4, min_size: int | None = None, columns=None,
              n_bins: int | None = 256) -> SummaryPlan:
    """The fit-structure step of :func:`summarize_tree` (CART on the posterior mean; no pass
    over the draws). Returns a :class:`~summarize_widgets.summaries.projection.SummaryPlan`
    whose projection gives the :class:`TreeSummary` at depth ``max_depth``.
    """
    from ..core.draws import EffectDraws

    if not isinstance(draws, EffectDraws):
        raise SummaryError(f"`draws` must be an EffectDraws (see summarize_widgets.EffectDraws); got {type(draws).__name__}.")
    max_depth = check_int(max_depth, "max_depth", low=1, high=_MAX_DEPTH_LIMIT)
    n = draws.n_units
    min_size = default_min_size(n) if min_size is None else check_int(min_size, "min_size", low=1, high=n)
    cols = check_columns(columns, list(draws.covariates.columns))
    specs = classify_columns(draws.covariates, cols)

    target = draws.posterior_mean
    wbar = draws.mean_weights
    fit_rows = wbar > 0
    # Fisher ordering of categories by the weighted mean of the target within each category.
    rank, names_by_rank, all_codes = {}, {}, {}
    for spec in specs:
        if spec.kind != "categorical":
            continue
        codes = all_codes[spec.name] = category_codes(draws.covariates[spec.name], spec)
        k = len(spec.categories)
        wsum = np.bincount(codes[fit_rows], weights=wbar[fit_rows], minlength=k)
        tsum = np.bincount(codes[fit_rows], weights=(wbar * np.nan_to_num(target))[fit_rows], minlength=k)
        means = np.where(wsum > 0, tsum / np.where(wsum > 0, wsum, 1.0), np.inf)
        order = np.argsort(means, kind="stable")
        r = np.empty(k, int)
        r[order] = np.arange(k)
        rank[spec.name] = r
        names_by_rank[spec.name] = [spec.categories[j] for j in order]
    if n_bins is not None:
        n_bins = check_int(n_bins, "n_bins", low=2, high=2**20)
    # every numeric column is ranked on its grid (distinct values or quantile bins): scale and offset free
    edges = {spec.name: _bin_edges(numeric_values(draws.covariates[spec.name]), n_bins)
             for spec in specs if spec.kind == "numeric"}
    # float32 is what scikit-learn's trees split on anyway (ranks, bin numbers and category ranks are exact in it);
    # it halves the matrix kept for rules on millions of units.
    X = _encode(draws.covariates, specs, rank, edges, codes=all_codes).astype(np.float32)

    est = DecisionTreeRegressor(max_depth=max_depth, min_samples_leaf=min_size, random_state=0)
    est.fit(X[fit_rows], _standardized(target[fit_rows], wbar[fit_rows]), sample_weight=wbar[fit_rows])
    sk_leaves = np.flatnonzero(est.tree_.children_left < 0)
    unit_leaf = np.searchsorted(sk_leaves, est.apply(X))

    return _leaf_plan(draws, specs, est, X, rank, edges, max_depth, min_size, unit_leaf, names_by_rank)


def _standardized(y: np.ndarray, w: np.ndarray) -> np.ndarray:
    """``(y - mean) / sd`` (weighted): the target CART is fitted to.

    Splits do not change under ``a + b y``, but scikit-learn's variance sums lose digits when the
    effects are large relative to their spread, and it treats a node whose variance is below
    float64's epsilon as pure, so effects on a 1e-12 scale were never split. A constant target is
    returned centred (no split is possible).
    """
    yc = y - np.average(y, weights=w)
    sd = float(np.sqrt(np.average(yc * yc, weights=w)))
    return yc / sd if sd > 0 and np.isfinite(sd) else yc


def fit_cart(X: np.ndarray, y: np.ndarray, weights: np.ndarray, *, depth: int, min_size: int,
             categorical) -> DecisionTreeRegressor:
    """Fit the summary tree's CART to another target, as :func:`summarize_tree` fits the posterior mean.

    Parameters
    ----------
    X : ndarray, shape (n_rows, n_columns)
        Rows of :attr:`TreeSummary.encoded_covariates`.
    y : ndarray, shape (n_rows,)
        The target (for example one posterior draw of the unit effects).
    weights : ndarray, shape (n_rows,)
        Non-negative sample weights.
    depth, min_size : int
        scikit-learn's ``max_depth`` and ``min_samples_leaf``.
    categorical : sequence of bool, length n_columns
        Which columns hold category ranks: they are re-ranked by the weighted mean of ``y``
        within each category first (Fisher 1958, as for the posterior mean), so a threshold
        split is the best split of the categories into two sets for this target.

    Returns
    -------
    DecisionTreeRegressor
        Fitted on the re-ranked matrix and the standardized target; ``random_state=0`` as the summary tree.
    """
    X = np.asarray(X, dtype=np.float64)
    y = np.asarray(y, dtype=np.float64)
    w = np.asarray(weights, dtype=np.float64)
    if not (y.shape == w.shape == (X.shape[0],)):
        raise SummaryError(f"`y` and `weights` must have shape ({X.shape[0]},); got {y.shape} and {w.shape}.")
    total = w.sum()
    if not total > 0:
        raise SummaryError("`weights` sum to zero: there is nothing to fit.")
    cats = [j for j, c in enumerate(categorical) if c]
    if cats:
        X = X.copy()
        for j in cats:
            codes = X[:, j].astype(np.int64)
            k = int(codes.max()) + 1
            ws = np.bincount(codes, weights=w, minlength=k)
            ts = np.bincount(codes, weights=w * y, minlength=k)
            means = np.where(ws > 0, ts / np.where(ws > 0, ws, 1.0), np.inf)
            order = np.argsort(means, kind="stable")
            r = np.empty(k)
            r[order] = np.arange(k)
            X[:, j] = r[codes]
    est = DecisionTreeRegressor(max_depth=depth, min_samples_leaf=min_size, random_state=0)
    est.fit(X, _standardized(y, w), sample_weight=w)
    return est
