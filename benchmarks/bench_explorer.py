"""The explorer's start-up and updates, as ratios to one pass over the draws measured in one run.

Run:  python benchmarks/bench_explorer.py                    (4,000 draws x 100,000 units, float64, 10 covariates)
      python benchmarks/bench_explorer.py --draws 500 --units 20000   (a quick look)

Prints, against one streaming pass over the draws (a row sum) and the CART fit on the posterior
mean (sklearn's DecisionTreeRegressor to the explorer's depth, fitted here on its own):
- the validation scan (building ``EffectDraws``: one pass);
- the explorer's first view with the linear and additive tabs filled in afterwards
  (``fill_in_background=True``, the default: tree and groups only), then the time until those
  tabs are in;
- the explorer computing everything before its first view (``fill_in_background=False``);
- the Python side of a depth, level and selection change (median of 5).

Targets (issue 11): first view within 2 passes plus the CART fit; each change < 50 ms.
"""
from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np

_HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(_HERE))
import bench_summaries as B  # noqa: E402  (the shared simulated draws and timer)


def _median_ms(fn, n=5):
    times = []
    for k in range(n):
        t = time.perf_counter()
        fn(k)
        times.append(time.perf_counter() - t)
    return 1e3 * float(np.median(times))


def main(argv=None):
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--draws", type=int, default=4000)
    p.add_argument("--units", type=int, default=100_000)
    p.add_argument("--max-depth", type=int, default=4)
    args = p.parse_args(argv)

    import summarize_widgets as sw
    from sklearn.tree import DecisionTreeRegressor
    from summarize_widgets.widgets import Explorer

    S, n = args.draws, args.units
    T, X, ref = B.draws_and_reference(S, n)
    t_scan, d = B.timed(lambda: sw.EffectDraws(T, X))
    codes = np.column_stack([X[c].to_numpy(float) if X[c].dtype.kind in "biuf" else X[c].astype("category").cat.codes
                             for c in X.columns])
    mean = T.mean(axis=0)
    t_cart, _ = B.timed(lambda: DecisionTreeRegressor(max_depth=args.max_depth, min_samples_leaf=max(1, n // 100))
                        .fit(codes, mean), repeat=3)
    print(f"CART on the posterior mean (sklearn, depth {args.max_depth})     {t_cart:8.3f} s  = {t_cart / ref:5.2f} passes")
    print(f"validation scan (EffectDraws)                    {t_scan:8.3f} s  = {t_scan / ref:5.2f} passes")

    t0 = time.perf_counter()
    ex = Explorer(d, max_depth=args.max_depth, fill_in_background=True)
    t_first = time.perf_counter() - t0
    ex.wait()
    t_all = time.perf_counter() - t0
    budget = 2 * ref + t_cart
    print(f"first view, tabs filled in afterwards          {t_first:8.3f} s  = {t_first / ref:5.2f} passes "
          f"({t_first / budget:.2f}x the target of 2 passes + CART)")
    print(f"  ... linear and additive tabs in after         {t_all:8.3f} s  = {t_all / ref:5.2f} passes")
    t0 = time.perf_counter()
    ex2 = Explorer(d, max_depth=args.max_depth, fill_in_background=False)
    ex2.wait()
    t_eager = time.perf_counter() - t0
    print(f"everything before the first view (opt-in)      {t_eager:8.3f} s  = {t_eager / ref:5.2f} passes")

    depths = [1 + k % args.max_depth for k in range(1, 6)]
    levels = [0.8, 0.9, 0.95, 0.5, 0.9]
    ms_depth = _median_ms(lambda k: ex.apply(depth=depths[k]))
    ms_level = _median_ms(lambda k: ex.apply(level=levels[k]))
    leaves = [r["node"] for r in ex.tree_view.nodes if r["is_leaf"]]
    ms_sel = _median_ms(lambda k: ex.apply(selected=leaves[k % len(leaves)]))
    print(f"depth change (Python side, median of 5)        {ms_depth:8.1f} ms (target < 50)")
    print(f"level change                                   {ms_level:8.1f} ms (target < 50)")
    print(f"selection change                               {ms_sel:8.1f} ms (target < 50)")


if __name__ == "__main__":
    main()
