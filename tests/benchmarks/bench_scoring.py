"""Benchmark: snapshot and scoring speed on synthetic ledgers, built through the public API.

    python tests/benchmarks/bench_scoring.py [CELLS] [--models 4] [--horizons 12] [--keep DIR]
    python tests/benchmarks/bench_scoring.py 1000000 --quantiles 9     # the quantile case

Prints: snapshot rows/s from back-fill CSVs (one per model), in-process scoring time grouped by
model×horizon and by series×model, the wall time of ``backsight scores`` in a fresh process
(start-up included), and peak RSS. Targets (2 cores): 1M cells snapshotted in under 10 s;
``backsight scores`` over 1M cells in under 3 s; 10M cells scored in under 20 s under 4 GB.
With ``--quantiles K`` every forecast also carries K evenly spaced quantiles (K = 9: q10..q90)
and the WIS query is timed on its own; target: 1M cells × 9 quantiles scored with WIS in 3 s.
"""

from __future__ import annotations

import argparse
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd


_CHILD = """
import resource, sys
from ledger.cli import app
sys.argv[0] = "backsight"
try:
    app()
finally:
    print(round(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024), file=sys.stderr)
"""


def _peak_rss_mb(who=resource.RUSAGE_SELF) -> float:
    return resource.getrusage(who).ru_maxrss / 1024


def build_files(folder: Path, cells: int, models: int, horizons: int, seed: int = 0, quantiles: int = 0):
    """One actuals CSV and one back-fill forecast CSV per model (model and origin columns)."""
    rng = np.random.default_rng(seed)
    origins = max(1, int(round(cells / (models * horizons * 1000))))
    n_series = max(1, cells // (models * horizons * origins))
    first_origin = 12 * 2020  # monthly index of 2020-01
    months = np.arange(first_origin - 36, first_origin + origins + horizons)
    level = rng.uniform(50, 500, n_series)
    labels = np.array([f"{m // 12}-{m % 12 + 1:02d}" for m in months])
    keys = np.array([f"S{i:06d}" for i in range(n_series)])
    act = pd.DataFrame({
        "series": np.repeat(keys, len(months)),
        "period": np.tile(labels, n_series),
        "actual": (np.repeat(level, len(months)) * (1 + 0.1 * rng.standard_normal(n_series * len(months)))).round(2),
    })
    act_path = folder / "actuals.csv"
    act.to_csv(act_path, index=False)
    fc_paths, rows = [], 0
    for mi in range(models):
        parts = []
        for o in range(origins):
            origin = first_origin + o
            targets = origin + np.arange(1, horizons + 1)
            idx = targets - months[0]
            point = np.repeat(level, horizons) * (1 + 0.05 * rng.standard_normal(n_series * horizons))
            width = 0.15 * np.repeat(level, horizons)
            wide = width * 1.96 / 1.2816  # the 95% bounds of the same normal as the 80% ones
            parts.append(pd.DataFrame({
                "model": f"model-{mi}",
                "origin": labels[origin - months[0]],
                "series": np.repeat(keys, horizons),
                "period": np.tile(labels[idx], n_series),
                "forecast": point.round(2),
                "lower_80": (point - width).round(2),
                "upper_80": (point + width).round(2),
                "lower_95": (point - wide).round(2),
                "upper_95": (point + wide).round(2),
            }))
            for k in range(1, quantiles + 1):
                tau = k / (quantiles + 1)
                parts[-1][f"q{round(100 * tau):02d}"] = (point + width / 1.2816 * _z(tau)).round(2)
        fc = pd.concat(parts, ignore_index=True)
        fc_paths.append(folder / f"forecasts-model-{mi}.csv")
        fc.to_csv(fc_paths[-1], index=False)
        rows += len(fc)
    return act_path, fc_paths, rows, n_series, origins


def _z(tau: float) -> float:
    from scipy import stats
    return float(stats.norm.ppf(tau))


def _cpu() -> float:
    usage = resource.getrusage(resource.RUSAGE_SELF)
    return usage.ru_utime + usage.ru_stime


def _time_wis(book) -> None:
    from ledger.scoring.cells import cells_sql
    from ledger.scoring.quantile_sql import wis_group_sql
    sel = book.selection()
    sql, params = cells_sql(sel)
    con = book.store.con
    t = time.perf_counter()
    con.execute(f"CREATE OR REPLACE TEMP TABLE _bench AS SELECT row_number() OVER () AS cell_id, * FROM ({sql})",
                params)
    made = time.perf_counter() - t
    t, cpu = time.perf_counter(), _cpu()
    frame = con.execute(wis_group_sql("_bench", "c.model AS model, c.horizon AS horizon", "c.model, c.horizon")).df()
    print(f"WIS by model×horizon: {len(frame):,} groups in {time.perf_counter() - t:.2f} s wall, "
          f"{_cpu() - cpu:.2f} s CPU (cells table built first in {made:.2f} s)")
    con.execute("DROP TABLE _bench")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("cells", nargs="?", type=int, default=1_000_000)
    parser.add_argument("--models", type=int, default=4)
    parser.add_argument("--horizons", type=int, default=12)
    parser.add_argument("--keep", type=Path, default=None, help="build in this folder and keep it")
    parser.add_argument("--quantiles", type=int, default=0, help="evenly spaced quantiles per forecast (9: q10..q90)")
    args = parser.parse_args()

    from ledger import Ledger

    folder = args.keep or Path(tempfile.mkdtemp(prefix="bench-scoring-"))
    folder.mkdir(parents=True, exist_ok=True)
    t = time.perf_counter()
    act_path, fc_paths, rows, n_series, origins = build_files(folder, args.cells, args.models, args.horizons,
                                                                  quantiles=args.quantiles)
    print(f"built files: {rows:,} forecast rows ({n_series:,} series × {args.models} models × {origins} origins "
          f"× {args.horizons} horizons) in {time.perf_counter() - t:.1f} s")
    path = folder / "bench.duckdb"
    path.unlink(missing_ok=True)
    with Ledger.open(path) as book:
        t = time.perf_counter()
        book.record_actuals(act_path)
        print(f"actuals: {time.perf_counter() - t:.2f} s")
        t = time.perf_counter()
        n_runs = sum(len(book.snapshot(p).runs) for p in fc_paths)
        dt = time.perf_counter() - t
        print(f"snapshot: {n_runs} runs from {len(fc_paths)} back-fill CSVs, {rows:,} rows in {dt:.2f} s "
              f"= {rows / dt:,.0f} rows/s")
        for by in (["model", "horizon"], ["series", "model"]):
            t = time.perf_counter()
            frame = book.scores(by=by)
            print(f"scores by {'×'.join(by)}: {len(frame):,} groups in {time.perf_counter() - t:.2f} s")
        if args.quantiles:
            _time_wis(book)
    print(f"peak RSS of this process (building and snapshotting): {_peak_rss_mb():,.0f} MB")
    t = time.perf_counter()
    # The child reports its own peak RSS: RUSAGE_CHILDREN would count the parent's pages copied at fork.
    child = subprocess.run([sys.executable, "-c", _CHILD, "--ledger", str(path), "scores", "--format", "csv"],
                           check=True, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
    print(f"backsight scores (fresh process, start-up included): {time.perf_counter() - t:.2f} s, "
          f"peak RSS {child.stderr.strip().splitlines()[-1]} MB")
    print(f"ledger file: {path.stat().st_size / 1e6:,.0f} MB in {folder}")


if __name__ == "__main__":
    main()
