"""Benchmark: snapshot and scoring speed on synthetic ledgers, built through the public API.

    python tests/benchmarks/bench_scoring.py [CELLS] [--models 4] [--horizons 12] [--keep DIR]
    python tests/benchmarks/bench_scoring.py 1000000 --quantiles 9     # the quantile case
    python tests/benchmarks/bench_scoring.py --reuse --keep DIR --before OLD_TREE  # again, old vs new

Prints: snapshot rows/s from back-fill CSVs (one per model), in-process scoring time grouped by
model×horizon and by series×model, the wall time of ``backsight scores`` in a fresh process
(start-up included), and peak RSS; then ``backsight scores --by model,horizon`` side by side with
a pandas script and a hand-written DuckDB query over the same CSVs (and with the code of an
older source tree, ``--before``), interleaved, with the load average beside every figure.
Targets (2 cores): 1M cells snapshotted in under 10 s; ``backsight scores --by model,horizon``
over 1M cells with two interval levels in 1.2 s, start-up included; 10M cells scored in under
20 s under 4 GB.
With ``--quantiles K`` every forecast also carries K evenly spaced quantiles (K = 9: q10..q90)
and the scores with WIS are timed again; target: 1M cells × 9 quantiles scored with WIS in 3 s.
Every time is printed with its CPU time (user + system over all threads) and the load average:
on a shared machine the CPU time is the steadier figure.
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
    print(round(max(int(l.split()[1]) for l in open('/proc/self/status') if l.startswith('VmHWM:')) / 1024), file=sys.stderr)
"""


# References for the CLI timing, each in a fresh process over the same CSV files: what a user
# would write without Backsight (fewer metrics: no scale, no WIS; n, MAE, RMSE, bias, and the
# coverage and width of each level).
_PANDAS_REF = """
import sys, glob
import pandas as pd
folder = sys.argv[1]
act = pd.read_csv(folder + "/actuals.csv")
fc = pd.concat([pd.read_csv(p) for p in sorted(glob.glob(folder + "/forecasts-*.csv"))], ignore_index=True)
def month(s):
    return s.str[:4].astype(int) * 12 + s.str[5:7].astype(int)
fc["horizon"] = month(fc["period"]) - month(fc["origin"])
c = fc.merge(act, on=["series", "period"])
c["e"] = c["actual"] - c["forecast"]
c["ae"], c["se"] = c["e"].abs(), c["e"] ** 2
for L in (80, 95):
    c[f"in_{L}"] = ((c[f"lower_{L}"] <= c["actual"]) & (c["actual"] <= c[f"upper_{L}"])).astype(float)
    c[f"w_{L}"] = c[f"upper_{L}"] - c[f"lower_{L}"]
g = c.groupby(["model", "horizon"]).agg(n=("e", "size"), mae=("ae", "mean"), mse=("se", "mean"), bias=("e", "mean"),
    coverage_80=("in_80", "mean"), width_80=("w_80", "mean"), coverage_95=("in_95", "mean"), width_95=("w_95", "mean"))
g["rmse"] = g.pop("mse") ** 0.5
g.to_csv(sys.stdout)
"""

_DUCKDB_REF = r"""
import sys, duckdb
folder = sys.argv[1]
con = duckdb.connect()
month = "(CAST(left({0}, 4) AS INT) * 12 + CAST(right({0}, 2) AS INT))"
sql = f'''
SELECT f.model, {month.format('f.period')} - {month.format('f.origin')} AS horizon,
       count(*) AS n, avg(abs(a.actual - f.forecast)) AS mae,
       sqrt(avg((a.actual - f.forecast) ^ 2)) AS rmse, avg(a.actual - f.forecast) AS bias,
       avg(CASE WHEN a.actual BETWEEN f.lower_80 AND f.upper_80 THEN 1.0 ELSE 0.0 END) AS coverage_80,
       avg(f.upper_80 - f.lower_80) AS width_80,
       avg(CASE WHEN a.actual BETWEEN f.lower_95 AND f.upper_95 THEN 1.0 ELSE 0.0 END) AS coverage_95,
       avg(f.upper_95 - f.lower_95) AS width_95
FROM read_csv('{folder}/forecasts-*.csv', types={{'period': 'VARCHAR', 'origin': 'VARCHAR'}}) f
JOIN read_csv('{folder}/actuals.csv', types={{'period': 'VARCHAR'}}) a USING (series, period)
GROUP BY ALL ORDER BY ALL'''
con.sql(sql).write_csv("/dev/stdout")
"""


def _load() -> str:
    return "load average " + " ".join(f"{x:.1f}" for x in os.getloadavg())


def _run_child(code: str, args: list[str], src: Path | None = None) -> tuple[float, float]:
    """Wall time and CPU time (user + system, all threads) of a fresh Python process, start-up included."""
    env = dict(os.environ)
    if src is not None:
        env["PYTHONPATH"] = str(src)
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    t = time.perf_counter()
    subprocess.run([sys.executable, "-c", code, *args], check=True, stdout=subprocess.DEVNULL,
                   stderr=subprocess.DEVNULL, env=env)
    wall = time.perf_counter() - t
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    return wall, (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)


def side_by_side(path: Path, folder: Path, before: Path | None, rounds: int) -> None:
    """``backsight scores --by model,horizon`` beside the pandas and DuckDB references, interleaved
    (and beside the code in ``before``, a source tree, when given), so all see the same load."""
    cli = ["--ledger", str(path), "scores", "--by", "model,horizon", "--format", "csv"]
    cases = [("backsight scores --by model,horizon", _CHILD, cli, None),
             ("pandas script over the CSVs", _PANDAS_REF, [str(folder)], None),
             ("hand-written DuckDB over the CSVs", _DUCKDB_REF, [str(folder)], None)]
    if before is not None:
        cases.insert(1, (f"backsight scores, code in {before}", _CHILD, cli, before))
    times: dict[str, list[str]] = {name: [] for name, *_ in cases}
    for _ in range(rounds):
        for name, code, args, src in cases:
            wall, cpu = _run_child(code, args, src)
            times[name].append(f"{wall:.2f} s wall, {cpu:.2f} s CPU ({_load()})")
    for name, runs in times.items():
        print(f"{name}: " + "; ".join(runs))


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
    """The quantile case: scores with WIS (quantile rows summed row by row), wall and CPU time."""
    t, cpu = time.perf_counter(), _cpu()
    frame = book.scores(by=["model", "horizon"])
    assert frame["wis"].notna().all() and frame["crps_q"].notna().all()
    print(f"scores with WIS and crps_q by model×horizon: {len(frame):,} groups in {time.perf_counter() - t:.2f} s "
          f"wall, {_cpu() - cpu:.2f} s CPU ({_load()})")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("cells", nargs="?", type=int, default=1_000_000)
    parser.add_argument("--models", type=int, default=4)
    parser.add_argument("--horizons", type=int, default=12)
    parser.add_argument("--keep", type=Path, default=None, help="build in this folder and keep it")
    parser.add_argument("--quantiles", type=int, default=0, help="evenly spaced quantiles per forecast (9: q10..q90)")
    parser.add_argument("--reuse", action="store_true", help="reuse the ledger and files kept in --keep DIR")
    parser.add_argument("--before", type=Path, default=None,
                        help="a source tree (holding ledger/) to time beside this one in the side-by-side runs")
    parser.add_argument("--rounds", type=int, default=3, help="rounds of the side-by-side runs")
    args = parser.parse_args()
    if args.reuse:
        if args.keep is None:
            parser.error("--reuse needs --keep DIR")
        reuse(args)
        return

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
            t, cpu = time.perf_counter(), _cpu()
            frame = book.scores(by=by)
            print(f"scores by {'×'.join(by)}: {len(frame):,} groups in {time.perf_counter() - t:.2f} s wall, "
                  f"{_cpu() - cpu:.2f} s CPU ({_load()})")
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
    side_by_side(path, folder, args.before, args.rounds)


def reuse(args) -> None:
    """Time scoring again over a ledger kept by an earlier run (no building, no snapshot)."""
    from ledger import Ledger

    path = args.keep / "bench.duckdb"
    with Ledger.open(path, create=False, read_only=True) as book:
        for by in (["model", "horizon"], ["series", "model"]):
            t, cpu = time.perf_counter(), _cpu()
            frame = book.scores(by=by)
            print(f"scores by {'×'.join(by)}: {len(frame):,} groups in {time.perf_counter() - t:.2f} s wall, "
                  f"{_cpu() - cpu:.2f} s CPU ({_load()})")
        if args.quantiles:
            _time_wis(book)
    side_by_side(path, args.keep, args.before, args.rounds)


if __name__ == "__main__":
    main()
