"""Speed of the evidence computations (heterogeneity, size paths, structure stability), measured in one run.

Run:  python benchmarks/bench_evidence.py                 (4,000 draws x 100,000 units, float64, 10 covariates)
      python benchmarks/bench_evidence.py --draws 500 --units 20000 --fits 20   (a quick look)

Prints, against one streaming pass over the draws (a row sum) in the same run: the heterogeneity
evidence (from the scan record and the tree's stored sums: no pass), the size paths of the tree and
of the linear summary (no pass), the explicit route for the linear path (numpy lstsq per draw and
nested set, timed on a few draws and scaled), the main job (scan + tree + linear and the tables a user reads) with and without the
cheap evidence, and the on-request structure stability check (one CART fit per sampled draw, on two
threads).

Targets (issue 13): heterogeneity and size paths < 0.1 pass each, so gathering them adds < 5% to the
main job; the stability check runs only on request (its cost is reported, not bounded).
"""
from __future__ import annotations

import argparse
import sys
from pathlib import Path

import numpy as np

_HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(_HERE))
import bench_summaries as B  # noqa: E402  (the shared simulated draws and timer)


def main(argv=None):
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--draws", type=int, default=4000)
    p.add_argument("--units", type=int, default=100_000)
    p.add_argument("--depth", type=int, default=3)
    p.add_argument("--fits", type=int, default=200, help="draw-trees of the stability check (default 200)")
    p.add_argument("--naive-draws", type=int, default=3, help="draws timed for the explicit size path (then scaled)")
    args = p.parse_args(argv)

    import summarize_widgets as sw
    from summarize_widgets.core.design import classify_columns, linear_design
    from summarize_widgets.summaries.evidence import heterogeneity_evidence
    from summarize_widgets.summaries.evidence_set import gather_evidence
    from summarize_widgets.summaries.size_path import linear_size_path, tree_size_path
    from summarize_widgets.summaries.stability import structure_stability

    S, n = args.draws, args.units
    T, X, ref = B.draws_and_reference(S, n)

    def main_job():
        # What a user reads: the subgroup table and the linear terms, with their Monte Carlo error.
        d = sw.EffectDraws(T, X)
        tree = sw.summarize_tree(d, max_depth=max(args.depth, 4)).at_depth(args.depth)
        lin = sw.summarize_linear(d)
        tree.table(), lin.table()
        return d, tree, lin

    t_main, (draws, tree, linear) = B.timed(main_job)
    print(f"main job: scan + tree + linear + their tables      {t_main:8.3f} s   = {t_main / ref:5.2f} passes")

    t_het, het = B.timed(lambda: heterogeneity_evidence(draws, tree), repeat=3)
    print(f"heterogeneity evidence (tree at depth {args.depth})          {1e3 * t_het:8.1f} ms  = {t_het / ref:5.3f} passes")
    t_tp, _ = B.timed(lambda: tree_size_path(tree), repeat=3)
    print(f"tree size path (R^2 by depth)                      {1e3 * t_tp:8.1f} ms  = {t_tp / ref:5.3f} passes")
    t_lp, lp = B.timed(lambda: linear_size_path(draws, linear), repeat=3)
    print(f"linear size path ({len(lp.steps) - 1} terms, LARS order)          {1e3 * t_lp:8.1f} ms  = {t_lp / ref:5.3f} passes")
    t_ev, _ = B.timed(lambda: gather_evidence(draws, tree, linear=linear))
    print(f"gather_evidence without stability                  {1e3 * t_ev:8.1f} ms  = {100 * t_ev / t_main:5.2f}% of the "
          "main job (target < 5%)")

    # Explicit route: refit every nested linear summary to each draw with numpy lstsq (timed on a few draws).
    Bd, terms, _ = linear_design(X, classify_columns(X, list(X.columns)))
    idx = [terms.index(t) for t in lp.steps[1:]]
    k = args.naive_draws

    def naive():
        for s in range(k):
            y = T[s]
            for j in range(len(idx) + 1):
                np.linalg.lstsq(Bd[:, [0, *idx[:j]]], y, rcond=None)
    t_naive, _ = B.timed(naive)
    scaled = t_naive / k * S
    print(f"explicit route (lstsq per draw and set), scaled     {scaled:8.1f} s   -> size path {scaled / t_lp:,.0f}x faster")

    t_stab, check = B.timed(lambda: structure_stability(tree, n_fits=args.fits))
    print(f"structure stability, {args.fits} draw-trees (2 threads)      {t_stab:8.2f} s   = {t_stab / args.fits:.3f} s per fit; "
          f"{t_stab / t_main:.1f}x the main job, run only on request")
    print(f"\nverdicts: {het.verdict}; first split {check.summary_first!r} in {100 * check.first_share:.0f}% of draw-trees")


if __name__ == "__main__":
    main()
