"""Benchmark: rolling-origin backtest speed of the reference methods (prints figures, asserts nothing).

Invented data: seeded synthetic monthly series (level + trend + a random 12-month pattern +
noise), 144 periods each, 24 origins (t = 96..119), horizon 18. Issue 4's target: 1,000 such
series x 24 origins x (naive, snaive, drift, theta) in under 2 minutes on 2 cores.

    python tests/benchmarks/bench_backtest.py                 # defaults: 1000 series, 20 for ETS
    python tests/benchmarks/bench_backtest.py --series 200 --jobs 2 --levels ""
"""

from __future__ import annotations

import argparse
import os
import time

import numpy as np
import pandas as pd

from ledger.methods.rolling import backtest

FAST = ("naive", "snaive", "drift", "theta")
SLOW = ("ses", "holt", "damped", "hw", "hw-damped")
LENGTH, FIRST, LAST, HORIZON = 144, 96, 119, 18


def synthetic_history(n_series: int, seed: int) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    t = np.arange(LENGTH)
    frames = []
    for i in range(n_series):
        pattern = rng.normal(0.0, 8.0, 12)
        y = 200.0 + rng.normal(0.0, 0.5) * t + pattern[t % 12] + rng.normal(0.0, 4.0, LENGTH)
        frames.append(pd.DataFrame({"series": f"S{i:05d}", "t": t, "actual": y}))
    return pd.concat(frames, ignore_index=True)


def time_method(history: pd.DataFrame, method: str, jobs: int, levels: tuple[float, ...]) -> tuple[float, int]:
    start = time.perf_counter()
    out, _ = backtest(history, methods=[method], horizon=HORIZON, m=12, levels=levels,
                      origins=(FIRST, LAST, 1), jobs=jobs)
    return time.perf_counter() - start, len(out) // HORIZON


def report(label: str, history: pd.DataFrame, methods, jobs: int, levels) -> float:
    n = history["series"].nunique()
    print(f"{label}: {n} series x {LAST - FIRST + 1} origins, h={HORIZON}, jobs={jobs}, levels={levels}")
    total = 0.0
    for method in methods:
        seconds, fits = time_method(history, method, jobs, levels)
        total += seconds
        print(f"  {method:9s} {fits:7d} fits {seconds:8.2f} s {fits / seconds:10.1f} fits/s")
    print(f"  total     {total:.2f} s")
    return total


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--series", type=int, default=1000, help="series for naive/snaive/drift/theta")
    parser.add_argument("--ets-series", type=int, default=10, help="series for the ETS methods")
    parser.add_argument("--jobs", type=int, default=os.cpu_count(), help="worker processes")
    parser.add_argument("--levels", default="80,95", help="comma-separated levels; empty for points only")
    parser.add_argument("--seed", type=int, default=20260401)
    args = parser.parse_args()
    levels = tuple(float(x) for x in args.levels.split(",") if x.strip())
    total = report("fast methods", synthetic_history(args.series, args.seed), FAST, args.jobs, levels)
    projected = total * 1000 / args.series
    print(f"  projected for 1000 series: {projected:.0f} s (target: under 120 s on 2 cores;"
          f" {args.jobs} jobs here, check the machine's load)")
    if args.ets_series:
        report("ETS methods", synthetic_history(args.ets_series, args.seed + 1), SLOW, args.jobs, levels)


if __name__ == "__main__":
    main()
