"""Benchmark: import a multi-GB forecast CSV and an actuals CSV; print time and peak memory.

    python tests/benchmarks/bench_import.py [--gb 2.5] [--keep DIR]
    python tests/benchmarks/bench_import.py --gb 0.08        # about 1M forecast rows
    python tests/benchmarks/bench_import.py --case distinct-labels [--rows 4000000]
    python tests/benchmarks/bench_import.py --case many-runs [--runs 8000]

Writes (or, with --keep DIR, reuses) a synthetic monthly forecast file of about GB gigabytes —
models × origins × series × 12 horizons, a point and 80% / 95% bounds per row (invented data) —
and an actuals file for the same series, then runs ``backsight actuals`` and ``backsight
snapshot`` on a new ledger, each in a fresh process, and prints each one's wall time, rows per
second, CPU seconds (user + system of the child) and peak resident memory (the child's own
VmHWM: Linux keeps ru_maxrss across exec, so a child's ru_maxrss holds its parent's memory at
the fork). Beside ``snapshot`` it times the reference, DuckDB's bare ``read_csv`` of the same
file into a temporary table in a fresh process, and prints the ratio.
Targets: peak RSS under 2 GB however large the file (issue 7); 1M rows in 2 s and the 2.29 GB
file in 90 s from the CLI on 2 cores (issue 17).

``--case distinct-labels``: an actuals file whose every row has its own period label (daily
dates with a time of day that names the series: 1,000 series × ROWS/1,000 days); target (issue
16): peak RSS under 1.5 GB for 4M rows. ``--case many-runs``: a back-fill file of RUNS one-row
runs (one model, daily origins); target (issue 16): under 10 s for 8,000 runs.
"""

from __future__ import annotations

import argparse
import os
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
    print(round(max(int(l.split()[1]) for l in open('/proc/self/status') if l.startswith('VmHWM:')) / 1024), file=sys.stderr, flush=True)
"""
MODELS, ORIGINS, HORIZONS = 4, 24, 12
BYTES_PER_ROW = 79  # measured on this generator's rows; used only to size the file


def _labels(months: np.ndarray) -> np.ndarray:
    return np.array([f"{m // 12}-{m % 12 + 1:02d}" for m in months])


def write_files(folder: Path, gigabytes: float, seed: int = 11) -> tuple[Path, Path, int, int]:
    """The forecast and actuals CSVs, written a run at a time so that writing stays small too."""
    n_series = max(1, int(gigabytes * 1e9 / BYTES_PER_ROW / (MODELS * ORIGINS * HORIZONS)))
    rng = np.random.default_rng(seed)
    first = 12 * 2024
    months = np.arange(first - 24, first + ORIGINS + HORIZONS)
    labels = _labels(months)
    keys = np.array([f"region-{i % 9}/item-{i:06d}" for i in range(n_series)])
    level = rng.uniform(50, 500, n_series)
    forecasts, actuals = folder / "forecasts.csv", folder / "actuals.csv"
    rows = 0
    with open(forecasts, "w", encoding="utf-8", newline="") as out:
        out.write("model,origin,series,period,forecast,lower_80,upper_80,lower_95,upper_95\n")
        for mi in range(MODELS):
            for o in range(ORIGINS):
                origin = first + o
                target = origin + np.arange(1, HORIZONS + 1) - months[0]
                point = np.repeat(level, HORIZONS) * (1 + 0.05 * rng.standard_normal(n_series * HORIZONS))
                w80 = 0.10 * np.repeat(level, HORIZONS)
                pd.DataFrame({
                    "model": f"model-{mi}", "origin": labels[origin - months[0]],
                    "series": np.repeat(keys, HORIZONS), "period": np.tile(labels[target], n_series),
                    "forecast": point.round(2), "lower_80": (point - w80).round(2), "upper_80": (point + w80).round(2),
                    "lower_95": (point - 1.5 * w80).round(2), "upper_95": (point + 1.5 * w80).round(2),
                }).to_csv(out, index=False, header=False)
                rows += n_series * HORIZONS
    seen = months <= first + ORIGINS
    pd.DataFrame({
        "series": np.repeat(keys, seen.sum()), "period": np.tile(labels[seen], n_series),
        "actual": (np.repeat(level, seen.sum()) * (1 + 0.05 * rng.standard_normal(n_series * seen.sum()))).round(2),
    }).to_csv(actuals, index=False)
    return forecasts, actuals, rows, n_series


_BARE = """
import resource, sys, duckdb
con = duckdb.connect(config={"temp_directory": sys.argv[2]})
con.execute("CREATE TEMP TABLE t AS SELECT * FROM read_csv(?)", [sys.argv[1]])
print(con.execute("SELECT count(*) FROM t").fetchone()[0], file=sys.stderr)
print(round(max(int(l.split()[1]) for l in open('/proc/self/status') if l.startswith('VmHWM:')) / 1024), file=sys.stderr, flush=True)
"""
CPU = {"last": 0.0}     # CPU seconds of the last child


def _child(code: str, *args: str) -> tuple[float, int]:
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    t = time.perf_counter()
    child = subprocess.run([sys.executable, "-c", code, *args], stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                           text=True)
    seconds = time.perf_counter() - t
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    CPU["last"] = after.ru_utime + after.ru_stime - before.ru_utime - before.ru_stime
    if child.returncode:
        sys.exit(f"{' '.join(args)} failed:\n{child.stderr}")
    return seconds, int(child.stderr.strip().splitlines()[-1])


def _run(ledger: Path, *args: str) -> tuple[float, int]:
    return _child(_CHILD, "--ledger", str(ledger), *args)


def _load() -> str:
    return "load average " + ", ".join(f"{x:.1f}" for x in os.getloadavg())


def distinct_labels(folder: Path, rows: int) -> None:
    """Actuals whose every row has a distinct period label (invented data)."""
    path = folder / "distinct-labels.csv"
    days = rows // 1000
    start = np.datetime64("1990-01-01")
    with open(path, "w") as fh:
        fh.write("series,period,actual\n")
        for d in range(days):
            day = str(start + d)
            fh.write("".join(f"s{k},{day} {k // 3600:02d}:{k // 60 % 60:02d}:{k % 60:02d},{(d * 7 + k) % 97}\n"
                             for k in range(1000)))
    ledger = folder / "labels.duckdb"
    ledger.unlink(missing_ok=True)
    seconds, rss = _run(ledger, "actuals", str(path), "--freq", "daily")
    print(f"distinct labels: {days * 1000:,} rows, {days * 1000:,} distinct labels: backsight actuals {seconds:.1f} s "
          f"({CPU['last']:.1f} s CPU, {_load()}), "
          f"peak RSS {rss:,} MB (target: under 1,536 MB)", flush=True)


def many_runs(folder: Path, runs: int) -> None:
    """A back-fill file of ``runs`` one-row runs (invented data)."""
    path = folder / "many-runs.csv"
    start = np.datetime64("1990-01-01")
    with open(path, "w") as fh:
        fh.write("series,period,forecast,model,origin\n")
        fh.write("".join(f"s{i % 50},{start + i + 1},{i}.5,m,{start + i}\n" for i in range(runs)))
    ledger = folder / "runs.duckdb"
    ledger.unlink(missing_ok=True)
    seconds, rss = _run(ledger, "snapshot", str(path), "--freq", "daily")
    print(f"many runs: {runs:,} one-row runs in one back-fill file: backsight snapshot {seconds:.1f} s "
          f"({CPU['last']:.1f} s CPU, {_load()}) "
          f"({1000 * seconds / runs:.2f} ms per run; target: 8,000 runs in 10 s), peak RSS {rss:,} MB", flush=True)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--gb", type=float, default=2.5, help="size of the forecast file (default 2.5)")
    parser.add_argument("--keep", type=Path, default=None, help="write the files in this folder and reuse them")
    parser.add_argument("--case", choices=["big-file", "distinct-labels", "many-runs"], default="big-file")
    parser.add_argument("--rows", type=int, default=4_000_000, help="rows of the distinct-labels case")
    parser.add_argument("--runs", type=int, default=8_000, help="runs of the many-runs case")
    args = parser.parse_args()
    if args.case != "big-file":
        folder = args.keep or Path(tempfile.mkdtemp(prefix="bench-import-"))
        folder.mkdir(parents=True, exist_ok=True)
        distinct_labels(folder, args.rows) if args.case == "distinct-labels" else many_runs(folder, args.runs)
        return

    folder = args.keep or Path(tempfile.mkdtemp(prefix="bench-import-"))
    folder.mkdir(parents=True, exist_ok=True)
    forecasts, actuals = folder / "forecasts.csv", folder / "actuals.csv"
    t = time.perf_counter()
    if args.keep and forecasts.exists() and actuals.exists():
        rows = sum(1 for _ in open(forecasts, "rb")) - 1
        print(f"reusing {forecasts} ({rows:,} rows)")
    else:
        forecasts, actuals, rows, n_series = write_files(folder, args.gb)
        print(f"wrote {rows:,} forecast rows ({n_series:,} series × {MODELS} models × {ORIGINS} origins × "
              f"{HORIZONS} horizons) in {time.perf_counter() - t:.0f} s")
    size = forecasts.stat().st_size
    print(f"forecast file: {size / 1e9:.2f} GB; actuals file: {actuals.stat().st_size / 1e6:.0f} MB", flush=True)
    ledger = folder / "bench.duckdb"
    ledger.unlink(missing_ok=True)
    seconds, rss = _run(ledger, "actuals", str(actuals))
    print(f"backsight actuals: {seconds:.1f} s, peak RSS {rss:,} MB", flush=True)
    print(_load(), flush=True)
    seconds, rss = _run(ledger, "snapshot", str(forecasts))
    cpu = CPU["last"]
    print(f"backsight snapshot: {seconds:.1f} s wall, {cpu:.1f} s CPU = {rows / seconds:,.0f} rows/s "
          f"({size / 1e6 / seconds:.0f} MB/s), peak RSS {rss:,} MB (target: under 2,048 MB)", flush=True)
    print(_load(), flush=True)
    spill = folder / "bare.tmp"
    bare, bare_rss = _child(_BARE, str(forecasts), str(spill))
    print(f"reference, DuckDB's bare read_csv of the same file: {bare:.1f} s wall, {CPU['last']:.1f} s CPU = "
          f"{rows / bare:,.0f} rows/s, peak RSS {bare_rss:,} MB; snapshot / reference: {seconds / bare:.1f}× wall, "
          f"{cpu / max(CPU['last'], 1e-9):.1f}× CPU", flush=True)
    print(_load(), flush=True)
    seconds, rss = _run(ledger, "verify")
    print(f"backsight verify: {seconds:.1f} s, peak RSS {rss:,} MB", flush=True)
    print(f"ledger file: {ledger.stat().st_size / 1e9:.2f} GB in {folder}", flush=True)


if __name__ == "__main__":
    main()
