"""Draws larger than memory: the whole job on a zarr store (and a .npy file) against one plain read.

Writes ``--draws`` x ``--units`` float32 draws (simulated retrofit-study effects, invented data)
into a temporary folder, as an uncompressed zarr store with chunks of whole draws (and, with
``npy`` in ``--formats``, as a .npy file, written after the store is deleted so the disk holds
one copy at a time), then for each store:

1. times one plain chunked read (every chunk read and summed once, on the same scheduler);
2. times the whole job: pass 1 (the validation scan, building ``EffectDraws``), the structure
   fits on the posterior mean (CART to depth ``--depth``, linear design, additive design and
   GCV smoothing choice; no pass over the draws), pass 2 (every projection at once) and the
   report tables (subgroups, nodes, summary R^2 by depth, linear terms, curves);
3. prints the passes' time as a ratio to the plain read and the peak anonymous memory (RssAnon
   of this process and its children, sampled every 50 ms).

Targets (issue 12): both passes together within 3 plain reads; peak anonymous memory < 4 GiB at
1,000 x 8,000,000 (30 GiB of float32). ``--cluster`` also runs a 2-worker ``LocalCluster``
(processes, loopback only) on the zarr store. Files are deleted at the end.

    python benchmarks/bench_scale.py --draws 1000 --units 8000000          # the full run (30 GiB)
    python benchmarks/bench_scale.py --draws 200 --units 200000 --cluster  # a quick look
"""
from __future__ import annotations

import argparse
import os
import shutil
import tempfile
import threading
import time
from pathlib import Path

import numpy as np
import pandas as pd


def covariates(n: int, seed: int = 0) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    return pd.DataFrame({
        "age": rng.uniform(20, 85, n).round(0),
        "income": rng.lognormal(10, 0.5, n).round(-2),
        "floor_area": rng.uniform(40, 250, n).round(0),
        "build_year": rng.integers(1900, 2020, n).astype(float),
        "fuel": pd.Categorical(rng.choice(["gas", "oil", "heat pump"], n)),
        "region": pd.Categorical(rng.choice(["north", "south", "east", "west", "coast"], n)),
    })


def truth(X: pd.DataFrame) -> np.ndarray:
    return (0.02 * (X["age"].to_numpy() - 50) + np.sin(X["floor_area"].to_numpy() / 40)
            - 0.5 * (X["fuel"] == "oil").to_numpy() + 0.3 * (X["region"] == "coast").to_numpy()).astype(np.float32)


def chunk_rows(n_units: int) -> int:
    return max(1, (128 * 2**20) // (4 * n_units))


def draw_block(f, rows, seed):
    rng = np.random.default_rng(seed)
    out = rng.standard_normal((rows, f.size), dtype=np.float32)
    out *= 0.5
    out += f
    out += rng.standard_normal((rows, 1), dtype=np.float32) * 0.1
    return out


def write_zarr(path, f, S):
    import zarr

    rows = chunk_rows(f.size)
    z = zarr.create_array(str(path), shape=(S, f.size), chunks=(rows, f.size), dtype="float32", compressors=None)
    for k, a in enumerate(range(0, S, rows)):
        z[a:a + rows] = draw_block(f, min(rows, S - a), k)


def write_npy(path, f, S):
    mm = np.lib.format.open_memmap(path, mode="w+", dtype=np.float32, shape=(S, f.size))
    rows = chunk_rows(f.size)
    for k, a in enumerate(range(0, S, rows)):
        mm[a:a + rows] = draw_block(f, min(rows, S - a), k)
    mm.flush()
    del mm


class PeakAnon:
    """Peak RssAnon (kB, from /proc) of this process plus its children, sampled in a thread."""

    def __init__(self):
        self.peak = 0
        self._stop = threading.Event()
        self._t = threading.Thread(target=self._run, daemon=True)

    @staticmethod
    def _anon(pid) -> int:
        try:
            for line in open(f"/proc/{pid}/status"):
                if line.startswith("RssAnon:"):
                    return int(line.split()[1])
        except OSError:
            return 0
        return 0

    def now(self) -> int:
        import psutil

        pids = [os.getpid()] + [c.pid for c in psutil.Process().children(recursive=True)]
        return sum(self._anon(p) for p in pids)

    def _run(self):
        while not self._stop.is_set():
            self.peak = max(self.peak, self.now())
            time.sleep(0.05)

    def __enter__(self):
        self._t.start()
        return self

    def __exit__(self, *exc):
        self._stop.set()
        self._t.join()

    def gib(self) -> float:
        return self.peak / 2**20


def plain_read(open_values) -> float:
    """One chunked read of the store: every chunk read and reduced to a number (threads)."""
    import dask.array as da

    t = time.perf_counter()
    values = open_values()
    if isinstance(values, np.ndarray):
        from concurrent.futures import ThreadPoolExecutor

        rows = chunk_rows(values.shape[1])
        with ThreadPoolExecutor(2) as pool:
            list(pool.map(lambda a: float(values[a:a + rows].sum(dtype=np.float64)), range(0, values.shape[0], rows)))
    else:
        da.sum(values, axis=1, dtype=np.float64).compute()
    return time.perf_counter() - t


def whole_job(open_values, X, depth):
    import summarize_widgets as sw
    from summarize_widgets.summaries import plan_additive, plan_linear, plan_tree, project

    times = {}
    t = time.perf_counter()
    draws = sw.EffectDraws(open_values(), X)
    times["pass 1 (scan)"] = time.perf_counter() - t
    t = time.perf_counter()
    plans = [plan_tree(draws, max_depth=depth)]
    times["fit: CART"] = time.perf_counter() - t
    t = time.perf_counter()
    plans.append(plan_linear(draws))
    times["fit: linear design"] = time.perf_counter() - t
    t = time.perf_counter()
    plans.append(plan_additive(draws))
    times["fit: additive design + GCV"] = time.perf_counter() - t
    t = time.perf_counter()
    tree, linear, additive = project(draws, plans)
    times["pass 2 (projections)"] = time.perf_counter() - t
    t = time.perf_counter()
    tables = {"subgroups": tree.at_depth(min(3, depth)).table(), "nodes": tree.nodes(),
              "fit": tree.fit_r2_by_depth(), "linear": linear.table(), "curves": additive.curves()}
    times["report tables"] = time.perf_counter() - t
    return times, tables


def report(name, read, times, peak):
    passes = times["pass 1 (scan)"] + times["pass 2 (projections)"]
    print(f"\n== {name}")
    print(f"plain chunked read      {read:8.1f} s")
    for k, v in times.items():
        print(f"{k:<26}{v:8.1f} s")
    print(f"passes / plain read     {passes / read:8.2f}   (target <= 3)")
    total = sum(times.values())
    print(f"whole job / plain read  {total / read:8.2f}   (structure fits included)")
    print(f"peak anonymous memory   {peak:8.2f} GiB (target < 4)")


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--draws", type=int, default=1000)
    ap.add_argument("--units", type=int, default=8_000_000)
    ap.add_argument("--depth", type=int, default=6)
    ap.add_argument("--formats", default="zarr,npy")
    ap.add_argument("--cluster", action="store_true", help="also run on a 2-worker LocalCluster (zarr)")
    ap.add_argument("--cluster-draws", type=int, default=None, help="draws for the cluster run (default: --draws)")
    ap.add_argument("--dir", default=None, help="where the temporary folder goes (default: the system's)")
    args = ap.parse_args(argv)
    os.environ.setdefault("SUMMARIZE_WIDGETS_PROGRESS", "0")
    import dask

    dask.config.set(scheduler="threads", num_workers=2)
    S, n = args.draws, args.units
    print(f"{S} draws x {n} units float32 = {S * n * 4 / 2**30:.1f} GiB; tree depth {args.depth}; 2 threads")
    X = covariates(n)
    f = truth(X)
    folder = Path(tempfile.mkdtemp(prefix="bench_scale_", dir=args.dir))
    try:
        for fmt in [s.strip() for s in args.formats.split(",") if s.strip()]:
            t = time.perf_counter()
            if fmt == "zarr":
                import dask.array as da

                path = folder / "draws.zarr"
                write_zarr(path, f, S)
                opener = lambda path=path: da.from_zarr(str(path))  # noqa: E731
            else:
                path = folder / "draws.npy"
                write_npy(path, f, S)
                opener = lambda path=path: np.load(path, mmap_mode="r")  # noqa: E731
            print(f"wrote {fmt} in {time.perf_counter() - t:.0f} s")
            read = plain_read(opener)
            with PeakAnon() as mem:
                base = mem.now() / 2**20
                times, _ = whole_job(opener, X, args.depth)
            report(f"{fmt} (threads); memory before the job {base:.2f} GiB", read, times, mem.gib())
            if fmt == "zarr" and args.cluster:
                cluster_run(path, X, args)
            shutil.rmtree(path) if path.is_dir() else path.unlink()
    finally:
        shutil.rmtree(folder, ignore_errors=True)


def cluster_run(path, X, args):
    import dask.array as da
    from distributed import Client, LocalCluster

    S = args.cluster_draws or args.draws
    opener = lambda: da.from_zarr(str(path))[:S]  # noqa: E731
    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
                      dashboard_address=None) as cluster, Client(cluster):
        read = plain_read(opener)
        with PeakAnon() as mem:
            times, _ = whole_job(opener, X, args.depth)
    report(f"zarr on a 2-worker LocalCluster ({S} draws; memory: client + workers)", read, times, mem.gib())


if __name__ == "__main__":
    main()
