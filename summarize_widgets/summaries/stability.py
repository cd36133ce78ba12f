"""Would the posterior support a different tree? The summary tree refitted to single draws.

The summary tree is fitted once, to the posterior mean. Here the same CART (same
depth, smallest subgroup, columns, encoding and binning: :func:`tree.fit_cart` on
:attr:`TreeSummary.encoded_covariates`) is fitted to each of a random sample of
individual draws ``T_s`` (with the draw's own weights ``w_si``; for
complier-weighted draws the unit CLATE ``ITT_y,si / pi_si`` with weight
``v_i pi_si``, the per-draw version of the squared loss the summary tree uses,
units with ``pi_si = 0`` weighing nothing). For each draw-tree we record the
covariate of its first split, the covariates it splits on at each depth, and the
adjusted Rand index (Hubert & Arabie 1985; scikit-learn's ``adjusted_rand_score``)
between its partition of the units and the summary tree's: 1 is the same
partition, about 0 agreement no better than chance.

Each draw-tree is the CART functional of one posterior draw, so the draw-trees
are draws from the posterior of "the tree this procedure would fit to the true
effects". Read low agreement as "the posterior does not pin this structure
down", not as proof of a different one.

The first split is flagged as not supported when fewer than half of the
draw-trees split first on the same covariate (``SUPPORT_SHARE``; a majority rule
of ours, a rule of thumb). This costs one CART fit per sampled draw, so it runs
only on request; the fits run on threads (scikit-learn's tree builder releases
the GIL).
"""
from __future__ import annotations

import os
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from sklearn.metrics import adjusted_rand_score

from ..core.stats import draw_summary, summary_columns
from ..core.validate import SummaryError, check_int, check_interval, check_level
from .evidence import with_prob_above
from .tree import TreeSummary, fit_cart

__all__ = ["StabilityCheck", "structure_stability", "SUPPORT_SHARE", "NO_SPLIT"]

#: The first split is "supported" when at least this share of draw-trees splits first on the same covariate.
SUPPORT_SHARE = 0.5
#: Label for a draw-tree that does not split at all.
NO_SPLIT = "(no split)"


def draw_target(draws, s: int) -> tuple[np.ndarray, np.ndarray]:
    """One draw's unit effects and weights, shape (n_units,) each (see the module notes)."""
    w_given = draws.weights
    if draws.is_complier_weighted:
        num = np.asarray(draws.values[s], dtype=np.float64)
        den = np.asarray(draws.uptake_values[s], dtype=np.float64)
        v = np.ones(draws.n_units) if w_given is None else w_given
        with np.errstate(divide="ignore", invalid="ignore"):
            y = np.where(den > 0, num / np.where(den > 0, den, 1.0), 0.0)
        return y, v * den
    y = np.asarray(draws.values[s], dtype=np.float64)
    if w_given is None:
        return y, np.ones(draws.n_units)
    return y, (w_given[s] if w_given.ndim == 2 else w_given).astype(np.float64)


def _splits(est, columns) -> list[tuple[int, str]]:
    t = est.tree_
    depth = np.zeros(t.node_count, int)
    out = []
    for k in range(t.node_count):  # children always come after their parent
        if t.children_left[k] >= 0:
            depth[t.children_left[k]] = depth[t.children_right[k]] = depth[k] + 1
            out.append((int(depth[k]), columns[t.feature[k]]))
    return out


@dataclass(frozen=True)
class StabilityCheck:
    """Summary tree refitted to single draws (from :func:`structure_stability`).

    Attributes
    ----------
    rows : ndarray of int, shape (n_fits,)
        Which draws were refitted.
    first_split : list of str
        Covariate of each draw-tree's first split (``NO_SPLIT`` when it has none).
    splits : list of list of (depth, covariate)
        Every split of each draw-tree (depth 0 is the first split).
    ari : ndarray, shape (n_fits,)
        Adjusted Rand index of each draw-tree's partition against the summary tree's.
    summary_first : str
        The summary tree's first split covariate.
    summary_splits : list of (depth, covariate)
    columns : list of str
    depth : int
        Depth of the summary tree (and of every draw-tree).
    first_share : float
        Share of draw-trees whose first split is on ``summary_first``.
    supported : bool
        ``first_share >= SUPPORT_SHARE``.
    message : str
        Plain-language reading, with numbers.
    """

    rows: np.ndarray
    first_split: list
    splits: list
    ari: np.ndarray
    summary_first: str
    summary_splits: list
    columns: list
    depth: int
    first_share: float
    supported: bool
    message: str
    label: str = "effect"
    settings: dict = field(default_factory=dict)

    def table(self) -> pd.DataFrame:
        """One row per covariate: ``covariate``, ``first_split`` (share of draw-trees whose first split
        is on it, i.e. at depth 1), ``depth_2`` ... ``depth_<depth>`` (share of draw-trees splitting on it
        at that depth), ``in_summary`` (the depths at which the summary tree splits on it).

        A last row ``NO_SPLIT`` counts draw-trees that do not split at all.
        """
        n = len(self.first_split)
        rows = []
        for col in [*self.columns, NO_SPLIT]:
            row = {"covariate": col, "first_split": sum(f == col for f in self.first_split) / n}
            for d in range(1, self.depth):  # depth 1 is the first split
                row[f"depth_{d + 1}"] = (np.nan if col == NO_SPLIT else
                                         sum(any(sd == d and sc == col for sd, sc in sp) for sp in self.splits) / n)
            row["in_summary"] = ", ".join(str(d + 1) for d in sorted({sd for sd, sc in self.summary_splits if sc == col}))
            rows.append(row)
        out = pd.DataFrame(rows)
        if out.iloc[-1]["first_split"] == 0:
            out = out.iloc[:-1]
        out.attrs.update({"label": self.label, "summary": "stability", "n_fits": n, "depth": self.depth,
                          "summary_first": self.summary_first, "first_share": self.first_share,
                          "supported": self.supported, "message": self.message})
        return out

    def agreement(self, level: float = 0.95, interval: str = "equal-tailed") -> pd.DataFrame:
        """Posterior of the adjusted Rand index over the refitted draws: ``quantity``, ``mean``, ``sd``,
        ``lower``, ``upper``, ``prob_above`` (share of draw-trees with index above 0.5) and the Monte Carlo
        error columns (over the refitted draws, taken as one chain)."""
        level = check_level(level)
        interval = check_interval(interval)
        # The fitted draws are a random sample of the posterior draws: treated as one chain.
        stats = summary_columns(self.ari[:, None], level=level, interval=interval, n_chains=1, threshold=0.5)
        out = pd.DataFrame({"quantity": ["adjusted Rand index, draw-tree vs summary tree"], **with_prob_above(stats)})
        out.attrs.update({"level": level, "interval": interval, "label": self.label, "summary": "stability",
                          "threshold": 0.5, "n_fits": len(self.ari)})
        return out


def structure_stability(tree: TreeSummary, *, n_fits: int = 200, seed: int = 0, threads: int | None = None,
                        level: float = 0.95, progress=None) -> StabilityCheck:
    """Refit the summary tree to a random sample of single draws and compare the structures.

    Parameters
    ----------
    tree : TreeSummary
        At the depth to check (every draw-tree gets this depth and the tree's ``min_size``).
    n_fits : int, default 200
        Draws to refit (all draws when there are fewer); drawn at random without replacement.
    seed : int, default 0
        Seed of the draw sample.
    threads : int, optional
        Worker threads (default: up to 2).
    level : float, default 0.95
        Credible level of the agreement interval in the message.
    progress : callable(done, total), optional
        Called after each fit.

    Returns
    -------
    StabilityCheck
    """
    if not isinstance(tree, TreeSummary):
        raise SummaryError(f"`tree` must be a TreeSummary (from summarize_tree); got {type(tree).__name__}.")
    draws = tree.draws
    n_fits = check_int(n_fits, "n_fits", low=2)
    seed = check_int(seed, "seed", low=0)
    level = check_level(level)
    threads = check_int(threads, "threads", low=1) if threads is not None else max(1, min(2, os.cpu_count() or 1))
    depth, min_size, columns = int(tree.depth), int(tree.min_size), list(tree.columns)
    categorical = [t == "categorical" for t in tree.column_types]
    fit_rows = draws.mean_weights > 0
    X = np.asarray(tree.encoded_covariates)[fit_rows]
    reference = tree.unit_subgroups()[fit_rows]
    S = draws.n_draws
    rows = np.arange(S) if n_fits >= S else np.sort(np.random.default_rng(seed).choice(S, n_fits, replace=False))

    def one(s):
        y, w = draw_target(draws, int(s))
        est = fit_cart(X, y[fit_rows], w[fit_rows], depth=depth, min_size=min_size, categorical=categorical)
        return _splits(est, columns), adjusted_rand_score(reference, est.apply(X))

    results = []
    if threads == 1:
        for k, s in enumerate(rows, 1):
            results.append(one(s))
            if progress:
                progress(k, len(rows))
    else:
        with ThreadPoolExecutor(threads) as pool:
            for k, r in enumerate(pool.map(one, rows), 1):
                results.append(r)
                if progress:
                    progress(k, len(rows))
    splits = [r[0] for r in results]
    ari = np.array([r[1] for r in results], dtype=np.float64)
    first = [sp[0][1] if sp else NO_SPLIT for sp in splits]
    summary_splits = list(tree.split_columns())
    summary_first = summary_splits[0][1] if summary_splits else NO_SPLIT
    share = sum(f == summary_first for f in first) / len(first)
    supported = share >= SUPPORT_SHARE
    counts = pd.Series(first).value_counts()
    top = counts.index[0]
    a = draw_summary(ari[:, None], level, "equal-tailed")
    pct = f"{100 * level:g}%"
    if supported:
        msg = (f"First split supported: {100 * share:.0f}% of {len(first)} trees refitted to single posterior draws "
               f"split first on {summary_first!r}, as the summary tree does.")
    else:
        alt = f" (most often {top!r}: {100 * counts.iloc[0] / len(first):.0f}%)" if top != summary_first else ""
        msg = (f"First split NOT supported: only {100 * share:.0f}% of {len(first)} trees refitted to single posterior "
               f"draws split first on {summary_first!r}{alt}; the posterior does not pin down the tree's structure.")
    msg += (f" Agreement of the draw-trees' subgroups with the summary tree's (adjusted Rand index, 1 = identical): "
            f"{a['mean'][0]:.2f} [{a['lower'][0]:.2f}, {a['upper'][0]:.2f}] ({pct} interval over the draws). "
            "Each draw carries the posterior's full uncertainty, so the draw-trees show which structures the "
            "posterior allows; subgroup findings are exploratory.")
    settings = {"summary": "stability", "n_fits": int(len(rows)), "seed": seed, "depth": depth, "min_size": min_size,
                "columns": columns, "support_share": SUPPORT_SHARE}
    return StabilityCheck(rows=rows, first_split=first, splits=splits, ari=ari, summary_first=summary_first,
                          summary_splits=summary_splits, columns=columns, depth=depth, first_share=share,
                          supported=supported, message=msg, label=draws.label, settings=settings)
