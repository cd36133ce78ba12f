"""Speed and memory of the summaries, as ratios measured in one run.

Run:  python benchmarks/bench_summaries.py              (4,000 draws x 100,000 units, float64, 10 covariates)
      python benchmarks/bench_summaries.py --draws 500 --units 20000   (a quick look)

Prints, against one streaming pass over the draws (a row sum) measured in the same run:
the scan done when EffectDraws is built; the tree summary (every depth up to 6); one depth change;
additive and linear summaries; the widget's Python-side update for a depth, level and selection change;
and the naive route (a loop over draws with a pandas groupby, a pygam refit, a statsmodels fit) timed
on a few draws and scaled to all draws. Peak memory is traced with tracemalloc (NumPy reports its
allocations to it) and given as a ratio to the draw matrix.

Targets (issue 3 and 4): tree <= 3x one pass; a depth change < 50 ms; additive and linear >= 100x
faster than the naive route; peak memory < 1.3x the draw matrix; widget update < 100 ms.
"""
from __future__ import annotations

import argparse
import time
import tracemalloc
import warnings

import numpy as np
import pandas as pd


def covariates(n, rng):
    return pd.DataFrame({
        "age": rng.uniform(18, 90, n).round(),
        "income": rng.lognormal(10.3, 0.5, n),
        "floor_area": rng.uniform(40, 250, n),
        "dwelling_age": rng.uniform(0, 120, n).round(),
        "baseline_bill": rng.gamma(9, 15, n),
        "household_size": rng.integers(1, 7, n).astype(float),
        "fuel": rng.choice(["gas", "oil", "electric", "heat pump"], n),
        "region": rng.choice(["north", "south", "east", "west", "centre"], n),
        "tenure": rng.choice(["owner", "renter"], n, p=[0.65, 0.35]),
        "daytime_home": rng.random(n) < 0.4,
    })


def make_draws(S, n, rng):
    X = covariates(n, rng)
    f = (-8 + 0.05 * X["dwelling_age"].to_numpy() - 3 * (X["fuel"] == "oil").to_numpy()
         + 4 * np.sin(X["baseline_bill"].to_numpy() / 60))
    T = np.empty((S, n))
    step = 250
    for s in range(0, S, step):
        k = min(step, S - s)
        T[s:s + k] = f + rng.standard_normal((k, n)) + rng.standard_normal((k, 1))
    return T, X


def draws_and_reference(S, n, seed=0):
    """Simulated draws (S x n float64) and covariates, and the time of one streaming pass over them
    (a row sum, best of 3): the reference every benchmark's ratios are taken against."""
    print(f"building {S} x {n} float64 draws ({S * n * 8 / 2**30:.2f} GiB) and 10 covariates ...", flush=True)
    T, X = make_draws(S, n, np.random.default_rng(seed))
    ref, _ = timed(lambda: T.sum(axis=1), repeat=3)
    print(f"\nreference: one streaming pass (row sum)            {ref:8.3f} s   = 1.00 pass")
    return T, X, ref


def timed(fn, repeat=1):
    best = np.inf
    out = None
    for _ in range(repeat):
        t = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t)
    return best, out


def peak_ratio(fn, matrix_bytes):
    tracemalloc.start()
    tracemalloc.reset_peak()
    fn()
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    return (matrix_bytes + peak) / matrix_bytes


def main(argv=None):
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--draws", type=int, default=4000)
    p.add_argument("--units", type=int, default=100_000)
    p.add_argument("--naive-draws", type=int, default=4, help="draws timed for the naive route (then scaled)")
    args = p.parse_args(argv)

    import summarize_widgets as sw

    S, n = args.draws, args.units
    T, X, ref = draws_and_reference(S, n)
    nbytes = T.nbytes
    t_scan, draws = timed(lambda: sw.EffectDraws(T, X))
    print(f"EffectDraws scan (finite check, means, sums)       {t_scan:8.3f} s   = {t_scan / ref:5.2f} passes")
    t_tree, tree = timed(lambda: sw.summarize_tree(draws, max_depth=6))
    print(f"tree summary, every depth up to 6                  {t_tree:8.3f} s   = {t_tree / ref:5.2f} passes   (target <= 3)")

    from summarize_widgets.core.passes import LeafSums, run_pass

    leaf_of_unit = tree._f.unit_leaf
    t_leafpass, _ = timed(lambda: run_pass(draws, [LeafSums(leaf_of_unit, int(leaf_of_unit.max()) + 1)]))
    print(f"  of which the projection pass (leaf sums)         {t_leafpass:8.3f} s   = {t_leafpass / ref:5.2f} passes"
          f"; the rest is CART on the posterior mean ({t_tree - t_leafpass:.2f} s, independent of the number of draws)")

    def depth_change():
        t = tree.at_depth(3)
        t.table()
        t.fit_r2
        return t
    t_depth, _ = timed(depth_change, repeat=5)
    print(f"one depth change (truncate + table + R^2)          {1e3 * t_depth:8.1f} ms                  (target < 50 ms)")
    t_r2, _ = timed(lambda: tree.fit_r2_by_depth(), repeat=3)
    print(f"summary R^2 posterior at all 6 depths              {1e3 * t_r2:8.1f} ms")

    results = {"tree": t_tree}
    try:
        t_add, additive = timed(lambda: sw.summarize_additive(draws))
        t_lin, linear = timed(lambda: sw.summarize_linear(draws))
        print(f"additive summary (pygam fit + one pass)           {t_add:8.3f} s   = {t_add / ref:5.2f} passes")
        print(f"linear summary (one pass)                          {t_lin:8.3f} s   = {t_lin / ref:5.2f} passes")
        results.update(additive=t_add, linear=t_lin)
    except AttributeError as exc:  # the additive/linear summaries are not there yet
        additive = None
        print(f"additive/linear: not available ({exc})")

    # -- naive route: a loop over draws, scaled to all draws --------------------------------------
    k = args.naive_draws
    leaf = tree.assign(X).to_numpy()

    def naive_tree():
        for s in range(k):
            pd.Series(T[s]).groupby(leaf).mean()
    t_naive_tree = timed(naive_tree)[0] / k * S
    print(f"\nnaive tree (pandas groupby per draw, scaled)       {t_naive_tree:8.3f} s   -> tree summary is {t_naive_tree / t_tree:7.1f}x faster"
          " (its grouping step only; a real naive route would also refit)")
    if additive is not None:
        import statsmodels.api as sm

        from summarize_widgets.core.design import classify_columns, linear_design
        from summarize_widgets.summaries.additive import _features, _pygam_model

        specs = classify_columns(X, list(X.columns))
        Xg, info = _features(X, specs, np.ones(n, bool))
        lam = additive.lam

        def naive_additive():
            # what a user would do without the package: refit pygam to each draw with the smoothing fixed
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                for s in range(k):
                    _pygam_model(Xg, info, 10, lam).fit(Xg, T[s])
        t_naive_add = timed(naive_additive)[0] / k * S
        B, _, _ = linear_design(X, specs)

        def naive_linear():
            for s in range(k):
                sm.WLS(T[s], B, weights=np.ones(n)).fit()
        t_naive_lin = timed(naive_linear)[0] / k * S
        print(f"naive additive (pygam refit per draw, scaled)      {t_naive_add:8.1f} s   -> additive is {t_naive_add / results['additive']:7.1f}x faster (target >= 100)")
        print(f"naive linear (statsmodels WLS per draw, scaled)    {t_naive_lin:8.1f} s   -> linear is {t_naive_lin / results['linear']:7.1f}x faster (target >= 100)")

    # -- widget-side updates (Python work only: tree view state + the visible panel) -----------------
    try:
        from summarize_widgets.widgets import Explorer
    except ImportError as exc:
        print(f"\nwidget: not available ({exc})")
    else:
        lam = additive.lam if additive is not None else None
        t_start, ex = timed(lambda: Explorer(draws, max_depth=6, depth=2, background=False,
                                              additive_options={"lam": lam} if lam else None))
        print(f"\nwidget start-up (tree, linear, additive with lam fixed) {t_start:8.2f} s")
        leaves = list(ex.tree.at_depth(3).leaf_ids)
        changes = {
            "depth 2 -> 3": lambda: (ex.apply(depth=2), ex.apply(depth=3)),
            "level 0.95 -> 0.90": lambda: (ex.apply(level=0.95), ex.apply(level=0.9)),
            "selection of a subgroup": lambda: (ex.apply(selected=int(leaves[0])), ex.apply(selected=int(leaves[-1]))),
        }
        ex.apply(depth=3)
        for name, change in changes.items():
            t_change, _ = timed(change, repeat=3)
            print(f"widget update: {name:<34}{1e3 * t_change / 2:8.1f} ms                  (target < 100 ms)")

    # -- memory --------------------------------------------------------------------------------------
    print("\npeak memory during each step, as a ratio to the draw matrix (target < 1.3):")
    print(f"  EffectDraws scan   {peak_ratio(lambda: sw.EffectDraws(T, X), nbytes):6.3f}")
    print(f"  tree summary       {peak_ratio(lambda: sw.summarize_tree(draws, max_depth=6), nbytes):6.3f}")
    if additive is not None:
        print(f"  additive summary   {peak_ratio(lambda: sw.summarize_additive(draws), nbytes):6.3f}")
        print(f"  linear summary     {peak_ratio(lambda: sw.summarize_linear(draws), nbytes):6.3f}")


if __name__ == "__main__":
    main()
