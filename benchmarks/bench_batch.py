"""Benchmark of soilwave batch inversion: parallel efficiency, time per gather, memory.

Synthetic pick tables (two-layer earth, travel times from
``soilwave.TravelTimeOperator`` plus seeded Gaussian noise of 0.3 ns) are
inverted with the default inversion settings by ``soilwave.run_batch`` on the
local process pool with 1 and with 2 workers, for a small and a large batch
(default 20 and 200 gathers). Printed figures:

* wall time of each run (process start-up, inversion, result files, summary,
  combined dataset) and wall time per gather;
* parallel efficiency ``T(1 worker) / (2 * T(2 workers))`` (goal >= 85 %);
* time per gather inside the workers (median and 90th percentile of wall
  seconds, and the mean CPU seconds, which other processes on a shared
  machine do not inflate; a CPU-time ratio near 1 between the 1- and
  2-worker runs means the pool adds no work, so any wall-time efficiency
  below that is contention for the cores);
* peak resident memory of each worker process (``resource.getrusage``
  ``ru_maxrss``, recorded by the worker itself);
* the 1-minute load average before and after, because on a shared machine
  other processes take cores from the 2-worker run.

Run: ``python benchmarks/bench_batch.py [--small 20] [--large 200] [--workers 2]``
"""

from __future__ import annotations

import argparse
import os
import tempfile
import time
import warnings
from pathlib import Path

import numpy as np

import soilwave as sw


def make_inputs(folder: Path, n: int, *, seed: int = 2024) -> Path:
    """``n`` synthetic two-layer pick tables with varying thickness and velocity."""
    folder.mkdir(parents=True, exist_ok=True)
    x = np.tile(np.linspace(0.5, 3.0, 8), 2)
    phase = ["ground"] * 8 + ["reflection"] * 8
    iface = [0] * 8 + [1] * 8
    op = sw.TravelTimeOperator(x, phase, iface)
    rng = np.random.default_rng(seed)
    for i in range(n):
        h = rng.uniform(0.3, 1.2)
        v1 = rng.uniform(0.07, 0.13)
        v2 = v1 * rng.uniform(0.6, 0.9)
        t = op([h], [v1, v2], 0.0)
        picks = sw.make_picks(
            x, t + rng.normal(0.0, 0.3, t.shape), phase, interface=iface, sigma=0.3
        )
        sw.write_picks(picks, folder / f"g{i:04d}.csv")
    return folder


def run(inputs: Path, out: Path, workers: int) -> dict:
    t0 = time.perf_counter()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        report = sw.run_batch(inputs, out, workers=workers, seed=1, progress=False)
    wall = time.perf_counter() - t0
    s = report.summary
    per_worker = s.groupby("worker")["peak_rss_mb"].max()
    return {
        "wall": wall,
        "n": len(s),
        "failed": len(report.failed),
        "inner_median": float(np.median(s["seconds"])),
        "inner_p90": float(np.quantile(s["seconds"], 0.9)),
        "cpu_mean": float(np.mean(s["cpu_seconds"])),
        "rss": per_worker.to_dict(),
    }


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--small", type=int, default=20)
    ap.add_argument("--large", type=int, default=200)
    ap.add_argument("--workers", type=int, default=2)
    args = ap.parse_args()
    print(f"soilwave {sw.__version__}, {os.cpu_count()} CPU(s), load {os.getloadavg()[0]:.2f}")
    results = {}
    with tempfile.TemporaryDirectory() as d:
        base = Path(d)
        make_inputs(base / "all", args.large)
        for n in (args.small, args.large):
            inputs = base / f"in{n}"
            inputs.mkdir()
            for p in sorted((base / "all").glob("*.csv"))[:n]:
                os.link(p, inputs / p.name)
            for w in (1, args.workers):
                r = run(inputs, base / f"out{n}_{w}", w)
                results[(n, w)] = r
                rss = ", ".join(f"{v:.0f}" for v in r["rss"].values())
                print(
                    f"{n:4d} gathers, {w} worker(s): wall {r['wall']:7.1f} s, "
                    f"{r['wall'] / n:5.2f} s/gather, in-worker median {r['inner_median']:.2f} s "
                    f"(p90 {r['inner_p90']:.2f} s), CPU {r['cpu_mean']:.2f} s, "
                    f"failed {r['failed']}, "
                    f"peak RSS per worker [MB]: {rss}"
                )
    print()
    for n in (args.small, args.large):
        t1, tn = results[(n, 1)]["wall"], results[(n, args.workers)]["wall"]
        eff = t1 / (args.workers * tn)
        print(
            f"parallel efficiency at {n:4d} gathers: {100 * eff:5.1f} %  "
            f"(T1 {t1:.1f} s, T{args.workers} {tn:.1f} s)"
        )
        c1, cn = results[(n, 1)]["cpu_mean"], results[(n, args.workers)]["cpu_mean"]
        print(f"  CPU seconds per gather, 1 vs {args.workers} workers: {c1:.2f} vs {cn:.2f}")
    for w in (1, args.workers):
        a = results[(args.small, w)]["wall"] / args.small
        b = results[(args.large, w)]["wall"] / args.large
        print(
            f"time per gather, {w} worker(s): {a:.2f} s at {args.small}, {b:.2f} s at {args.large}"
        )
    print(f"load average after: {os.getloadavg()[0]:.2f}")


if __name__ == "__main__":
    main()
