"""The Explorer's results: the summaries for one setting, and the tables read from them.

:meth:`Results.compute` is the only place that reads the draws (one pass per
summary). Everything else reads stored per-draw results and is cached per
(depth, level, interval kind), so going back to a view costs a dictionary lookup.
"""
from __future__ import annotations

from collections.abc import Callable, Mapping

import numpy as np
import pandas as pd

from ..export.layout import subgroup_texts
from ..summaries.bundle import summarize_all, summarize_extras
from ..summaries.tree import TreeSummary
from .panels import vmax_of
from .tree_view import node_records

__all__ = ["Results"]

#: progress(stage, stage_index, n_stages, done_blocks, total_blocks)
Progress = Callable[[str, int, int, int, int], None]


class Results:
    """Summaries for one smallest-subgroup size and covariate set.

    Attributes
    ----------
    tree : TreeSummary
        At its largest depth.
    additive, linear : AdditiveSummary or LinearSummary or None
        None when not asked for or when it could not be computed (``errors`` says why).
    errors : dict
        "additive" / "linear" -> message.
    """

    def __init__(self, tree: TreeSummary, additive=None, linear=None, errors: Mapping | None = None):
        self.tree = tree
        self.additive = additive
        self.linear = linear
        self.errors = dict(errors or {})
        self.fit_draws = tree.fit_r2_draws_by_depth()
        #: Extras ("linear", "additive") still to come from :meth:`fill_extras`.
        self.pending: set = set()
        self.extras_request: dict = {}
        self._cache: dict = {}

    @classmethod
    def compute(cls, draws, *, max_depth: int, min_size, columns, trends: bool, linear: bool,
                additive_options: Mapping | None = None, progress: Progress | None = None,
                extras_later: bool = False) -> "Results":
        """The summaries for these settings, through the one orchestrator (:func:`summarize_all`).

        With ``extras_later`` only the tree is computed (one pass over the draws); the
        linear and additive summaries asked for are listed in ``pending`` and come from
        :meth:`fill_extras` (one more pass, shared by both).

        Raises :class:`SummaryError` when the tree cannot be built (for example a
        ``min_size`` larger than the data); the additive and linear summaries are extras whose
        failure is recorded in ``errors`` instead.
        """
        now_trends, now_linear = (False, False) if extras_later else (trends, linear)
        bundle = summarize_all(draws, depth=max_depth, max_depth=max_depth, min_size=min_size, columns=columns,
                               additive=now_trends, linear=now_linear, additive_options=additive_options,
                               extras="record", progress=progress)
        res = cls(bundle.tree, additive=bundle.additive, linear=bundle.linear, errors=bundle.errors)
        if extras_later:
            res.pending = {name for name, on in (("linear", linear), ("additive", trends)) if on}
            res.extras_request = {"columns": list(bundle.tree.columns), "additive_options": dict(additive_options or {})}
        return res

    def fill_extras(self, draws, *, progress: Progress | None = None) -> None:
        """Compute the pending linear and additive summaries (one pass shared by both).

        Any failure, expected or not, ends up in ``errors`` under the summary's name (the
        explorer shows it in that summary's tab); ``pending`` is empty afterwards.
        """
        wanted = set(self.pending)
        if not wanted:
            return
        try:
            bundle = summarize_extras(draws, columns=self.extras_request["columns"], linear="linear" in wanted,
                                      additive="additive" in wanted,
                                      additive_options=self.extras_request["additive_options"], extras="record",
                                      progress=progress)
        except Exception as exc:  # noqa: BLE001 - runs on a worker thread: the message goes to the tabs
            text = f"Unexpected error ({type(exc).__name__}): {exc}"
            self.errors.update({name: text for name in wanted})
        else:
            self.linear = bundle.linear if "linear" in wanted else self.linear
            self.additive = bundle.additive if "additive" in wanted else self.additive
            self.errors.update(bundle.errors)
        finally:
            self.pending = set()

    # -- cached reads --------------------------------------------------------------------------
    def _cached(self, key, make):
        if key not in self._cache:
            self._cache[key] = make()
        return self._cache[key]

    def at(self, depth: int) -> TreeSummary:
        """The tree truncated at ``depth`` (no pass over the draws)."""
        return self._cached(("tree", depth), lambda: self.tree.at_depth(depth))

    def nodes(self, depth: int, level: float, interval: str) -> pd.DataFrame:
        return self._cached(("nodes", depth, level, interval),
                            lambda: self.at(depth).nodes(level=level, interval=interval))

    def table(self, depth: int, level: float, interval: str) -> pd.DataFrame:
        return self._cached(("table", depth, level, interval),
                            lambda: self.at(depth).table(level=level, interval=interval))

    def fit_table(self, level: float, interval: str) -> pd.DataFrame:
        return self._cached(("fit", level, interval), lambda: self.tree.fit_r2_by_depth(level=level, interval=interval))

    def curves(self, level: float, interval: str) -> pd.DataFrame:
        return self._cached(("curves", level, interval), lambda: self.additive.curves(level=level, interval=interval))

    def linear_table(self, level: float, interval: str) -> pd.DataFrame:
        return self._cached(("linear", level, interval), lambda: self.linear.table(level=level, interval=interval))

    def records(self, depth: int, level: float, interval: str) -> list[dict]:
        """The tree view's node records at this view, the weak-uptake subgroups flagged."""
        return self._cached(("records", depth, level, interval),
                            lambda: node_records(self.nodes(depth, level, interval),
                                                 weak=self.weak_ids(depth, level, interval)))

    def texts(self, depth: int, level: float, interval: str) -> pd.DataFrame:
        """The printed numbers of :meth:`nodes` (the tables' digits), row for row."""
        return self._cached(("texts", depth, level, interval),
                            lambda: subgroup_texts(self.nodes(depth, level, interval)))

    def weak_ids(self, depth: int, level: float, interval: str) -> frozenset:
        """Subgroups at ``depth`` flagged for weak uptake (complier-weighted draws; else none)."""
        def make():
            table = self.table(depth, level, interval)
            if "weak_uptake" not in table.columns:
                return frozenset()
            return frozenset(int(i) for i in table.loc[table["weak_uptake"].astype(bool), "subgroup"])
        return self._cached(("weak", depth, level, interval), make)

    def colour_limit(self, depth: int, level: float, interval: str) -> float:
        """The |posterior mean| given the full colour: the largest among the subgroups whose ratio is
        stable (not flagged for weak uptake), or among all of them if every one is flagged."""
        def make():
            table = self.table(depth, level, interval)
            steady = table[~table["subgroup"].isin(list(self.weak_ids(depth, level, interval)))]
            return vmax_of((steady if len(steady) else table)["mean"])
        return self._cached(("limit", depth, level, interval), make)

    def contrasts(self, depth: int, level: float, interval: str, subgroup: int) -> pd.DataFrame:
        return self._cached(("contrasts", depth, level, interval, subgroup),
                            lambda: self.at(depth).contrasts(level=level, interval=interval, subgroup=subgroup))

    # -- selection -----------------------------------------------------------------------------
    def leaf_ids(self, depth: int) -> list[int]:
        return self._cached(("leaves", depth), lambda: [int(i) for i in self.at(depth).leaf_ids])

    def standout(self, depth: int) -> int:
        """The subgroup at ``depth`` whose posterior mean is farthest from zero in posterior sds.

        Measured in sds, not in effect units, so an unstable subgroup (a weak complier share,
        a handful of units) with a huge but uncertain mean is not the first one shown.
        """
        tab = self.table(depth, 0.95, "equal-tailed")
        sd = tab["sd"].to_numpy(float)
        score = np.abs(tab["mean"].to_numpy(float)) / np.where(sd > 0, sd, np.inf)
        return int(tab["subgroup"].iloc[int(np.argmax(np.nan_to_num(score, nan=-1.0)))])

    def _outline(self) -> dict:
        """The grown tree's structure (no statistics): node -> parent, depth and rule, rule -> node."""
        def make():
            full = self.tree.outline()
            nodes = full["node"].tolist()
            return {"parent": dict(zip(nodes, full["parent"].tolist())),
                    "depth": dict(zip(nodes, full["depth"].tolist())),
                    "rule": dict(zip(nodes, full["rule"].tolist())),
                    "node": {rule: node for node, rule in zip(nodes[::-1], full["rule"].tolist()[::-1])}}
        return self._cached(("outline",), make)

    def follow(self, node: int, depth: int) -> int:
        """The node to show for ``node`` at ``depth``: itself if shown, else its ancestor at ``depth``."""
        if node < 0:
            return node
        out = self._outline()
        parent, depth_of = out["parent"], out["depth"]
        while node in depth_of and depth_of[node] > depth:
            node = parent[node]
        return node

    def rule_of(self, node) -> str | None:
        """The rule of a node of the grown tree (None for -1 or an unknown node)."""
        if node is None or node < 0:
            return None
        rule = self._outline()["rule"].get(int(node))
        return None if rule is None else str(rule)

    def node_with_rule(self, rule) -> int | None:
        """The node of the grown tree whose rule is ``rule`` (the first in node order), or None."""
        if rule is None:
            return None
        node = self._outline()["node"].get(rule)
        return None if node is None else int(node)

    def inside(self, node: int, depth: int) -> list[int]:
        """The subgroups at ``depth`` inside ``node`` (itself if it is one; none for -1), in tree order."""
        if node < 0:
            return []
        parent = self._outline()["parent"]
        out = []
        for leaf in self.leaf_ids(depth):
            up = leaf
            while up != -1 and up != node:
                up = parent.get(up, -1)
            if up == node:
                out.append(leaf)
        return out
