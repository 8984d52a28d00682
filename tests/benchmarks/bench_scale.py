"""Benchmark: scoring at scale — DuckDB over a lake, DuckDB over a ledger file, Spark over a lake.

    python tests/benchmarks/bench_scale.py [CELLS ...] [--keep DIR [--reuse]] [--engines E,E] [--by K,K;K,K]

For each size (default 10,000,000 cells) it builds, with DuckDB SQL only (``generate_series``
and ``COPY … TO … (PARTITION_BY …)``, no Python loop over rows), a ledger file and a lake of the
same invented data: series × 4 models × 24 monthly origins × 12 horizons, 80% bounds on every
cell, 36 months of history before the first origin. Then, each in a fresh process so that
start-up and peak memory are its own, it times ``scores`` grouped by model × horizon and by
series × model on: DuckDB over the lake (``ledger.lake.open_lake``), DuckDB over the ledger
file, and Spark local[2] over the lake (``ledger.scoring.spark``). Prints wall seconds, seconds
per million cells, CPU seconds (for Spark: the Python driver's plus the JVM's) and peak RSS (for
Spark: the Python driver plus the JVM's high-water mark). On a shared machine the CPU seconds
are the steadier figure; the load average is printed beside each line.
"""

from __future__ import annotations

import argparse
import json
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

MODELS, ORIGINS, HORIZONS, HISTORY = 4, 24, 12, 36

_BUILD = """
INSERT INTO series SELECT 'S' || lpad(i::VARCHAR, 7, '0'), 'monthly', 12, TIMESTAMP '2024-01-01'
    FROM range({n_series}) t(i);
INSERT INTO actuals
    SELECT 'S' || lpad(s::VARCHAR, 7, '0'), (DATE '2017-01-01' + INTERVAL (m) MONTH)::DATE, 24204 + m,
           round(100 + (s % 400) + 20 * sin(m / 1.9) + 10 * ((hash(s * 7919 + m) % 1000) / 1000.0 - 0.5), 2),
           1, TIMESTAMP '2024-01-01' + INTERVAL (m) MINUTE, 'bench', 'bench-not-chained'
    FROM range({n_series}) a(s), range({months}) b(m);
INSERT INTO runs
    SELECT 'run-' || mo || '-' || o, 'model-' || mo, 'monthly', (DATE '2017-01-01' + INTERVAL ({history} + o) MONTH)::DATE,
           24204 + {history} + o, TIMESTAMP '2024-06-01' + INTERVAL (mo * 100 + o) SECOND, 'bench', NULL,
           'hash-' || mo || '-' || o, {n_series} * {horizons}, NULL
    FROM range({models}) a(mo), range({origins}) b(o);
CREATE TEMP TABLE _cells AS
    SELECT r.run_id, 'S' || lpad(s::VARCHAR, 7, '0') AS series, r.origin_index + h AS period_index, h AS horizon,
           round(100 + (s % 400) + 20 * sin((r.origin_index + h - 24204) / 1.9)
                 + 12 * ((hash(s * 31 + h * 131 + r.origin_index * 7 + length(r.model)) % 1000) / 1000.0 - 0.5), 2) AS point
    FROM runs r, range({n_series}) a(s), range(1, {horizons} + 1) b(h);
INSERT INTO forecasts
    SELECT run_id, series, (DATE '2017-01-01' + INTERVAL (period_index - 24204) MONTH)::DATE, period_index, horizon, point
    FROM _cells;
INSERT INTO bounds SELECT run_id, series, period_index, 80, point - 15, point + 15 FROM _cells;
DROP TABLE _cells;
"""

_COPY = {
    "forecasts": ("forecasts", "model, origin_year, origin_month"),
    "bounds": ("bounds", "model, origin_year, origin_month"),
}

_CHILD = r"""
import json, os, resource, sys, time
t0 = time.perf_counter()
engine, source, by = sys.argv[1], sys.argv[2], sys.argv[3].split(",")
jvm_peak = 0
if engine == "duckdb-lake":
    from ledger import Ledger
    from ledger.lake import open_lake
    book = Ledger(open_lake(source))
elif engine == "duckdb-file":
    from ledger import Ledger
    book = Ledger.open(source, read_only=True)
else:
    from ledger.scoring.spark import lake_ledger, session
    spark = session("local[2]", conf={"spark.driver.memory": "2g"})
    book = lake_ledger(spark, source)
t1 = time.perf_counter()
frame = book.scores(by=by)
t2 = time.perf_counter()
jvm_cpu = 0.0
if engine == "spark":
    pid = spark.sparkContext._jvm.java.lang.ProcessHandle.current().pid()
    for line in open(f"/proc/{pid}/status"):
        if line.startswith("VmHWM:"):
            jvm_peak = int(line.split()[1]) / 1024
    fields = open(f"/proc/{pid}/stat").read().rsplit(")", 1)[1].split()
    jvm_cpu = (int(fields[11]) + int(fields[12])) / os.sysconf("SC_CLK_TCK")   # utime + stime
use = resource.getrusage(resource.RUSAGE_SELF)
# VmHWM, not ru_maxrss: Linux keeps ru_maxrss across exec, so a child would report its parent's
# memory at the fork (the builder's 1.5 GB) as its own
own_peak = max(int(l.split()[1]) for l in open("/proc/self/status") if l.startswith("VmHWM:")) / 1024
print(json.dumps({"groups": len(frame), "open": t1 - t0, "score": t2 - t1, "total": t2 - t0,
                  "cpu": use.ru_utime + use.ru_stime + jvm_cpu, "rss": own_peak, "jvm": jvm_peak,
                  "load": os.getloadavg()[0]}))
"""


def build(folder: Path, cells: int) -> tuple[Path, Path, int]:
    """The ledger file and the lake of ``cells`` cells (rounded to whole series); returns the cell count."""
    import duckdb

    from ledger.manifest import ExportFile, Manifest, file_checksum, write_manifest
    from ledger.store import SCHEMA_VERSION, Store

    n_series = max(1, cells // (MODELS * ORIGINS * HORIZONS))
    path, lake = folder / "scale.duckdb", folder / "lake"
    path.unlink(missing_ok=True)
    shutil.rmtree(lake, ignore_errors=True)
    with Store.open(path) as store:
        with store.transaction() as con:
            con.execute(_BUILD.format(n_series=n_series, months=HISTORY + ORIGINS + HORIZONS, history=HISTORY,
                                      models=MODELS, origins=ORIGINS, horizons=HORIZONS))
        tables = [r[0] for r in store.con.execute("SELECT table_name FROM information_schema.tables").fetchall()]
        created = store.get_setting("created_at") or ""
    con = duckdb.connect(str(path), read_only=True)
    lake.mkdir(parents=True)
    for table, (name, parts) in _COPY.items():
        con.execute(f"""COPY (SELECT t.*, r.model, year(r.origin) AS origin_year,
                                     lpad(month(r.origin)::VARCHAR, 2, '0') AS origin_month
                              FROM {table} t JOIN runs r USING (run_id))
                        TO '{lake / name}' (FORMAT parquet, PARTITION_BY ({parts}), FILENAME_PATTERN 'part-00001')""")
    con.execute(f"""COPY (SELECT *, strftime(recorded_at, '%Y-%m') AS recorded_month FROM actuals)
                    TO '{lake / 'actuals'}' (FORMAT parquet, PARTITION_BY (recorded_month), FILENAME_PATTERN 'part-00001')""")
    for table in tables:
        if table not in _COPY and table != "actuals":
            (lake / table).mkdir()
            con.execute(f"COPY (SELECT * FROM {table}) TO '{lake / table / 'part-00001.parquet'}' (FORMAT parquet)")
    files = []
    for file in sorted(lake.rglob("*.parquet")):
        rel = file.relative_to(lake).as_posix()
        rows = con.execute(f"SELECT count(*) FROM read_parquet('{file}')").fetchone()[0]
        files.append(ExportFile(rel, rel.split("/")[0], rows, file.stat().st_size, file_checksum(file)))
    upto = con.execute("SELECT max(recorded_at) FROM runs").fetchone()[0]
    con.close()
    write_manifest(lake, Manifest(layout="partitioned", format="parquet", schema_version=SCHEMA_VERSION,
                                  ledger_created_at=created, recorded_up_to=upto.isoformat(), state_hash="(benchmark)",
                                  exports=1, files=tuple(files)))
    return path, lake, n_series * MODELS * ORIGINS * HORIZONS


def _time(engine: str, source: Path, by: str) -> dict:
    out = subprocess.run([sys.executable, "-c", _CHILD, engine, str(source), by], check=True,
                         capture_output=True, text=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("cells", nargs="*", type=int, default=[10_000_000])
    parser.add_argument("--keep", type=Path, default=None, help="build in this folder and keep it")
    parser.add_argument("--reuse", action="store_true", help="with --keep: use the ledger and lake built there before")
    parser.add_argument("--engines", default="duckdb-lake,duckdb-file,spark", help="which to time, in this order")
    parser.add_argument("--by", default="model,horizon;series,model", help="groupings, separated by ';'")
    args = parser.parse_args()
    for cells in args.cells:
        folder = (args.keep or Path(tempfile.mkdtemp(prefix="bench-scale-"))) / f"cells-{cells}"
        folder.mkdir(parents=True, exist_ok=True)
        t = time.perf_counter()
        if args.reuse and (folder / "lake" / "manifest.json").exists():
            path, lake = folder / "scale.duckdb", folder / "lake"
            n = (max(1, cells // (MODELS * ORIGINS * HORIZONS))) * MODELS * ORIGINS * HORIZONS
            what = "reused"
        else:
            path, lake, n = build(folder, cells)
            what = "built"
        size = sum(f.stat().st_size for f in lake.rglob("*.parquet")) / 1e6
        print(f"{n:,} cells: {what} ledger file ({path.stat().st_size / 1e6:,.0f} MB) and lake ({size:,.0f} MB, "
              f"{len(list(lake.rglob('*.parquet'))):,} files) in {time.perf_counter() - t:.1f} s", flush=True)
        sources = {"duckdb-lake": lake, "duckdb-file": path, "spark": lake}
        for by in args.by.split(";"):
            for engine in [e for e in args.engines.split(",") if e]:
                r = _time(engine, sources[engine], by)
                memory = f"{r['rss']:,.0f} MB" + (f" + JVM {r['jvm']:,.0f} MB" if r["jvm"] else "")
                print(f"  {engine:12s} by {by:14s} {r['groups']:>8,} groups: {r['total']:6.1f} s "
                      f"(open {r['open']:.1f} s, score {r['score']:.1f} s) = {r['total'] / (n / 1e6):.2f} s per M cells; "
                      f"CPU {r['cpu']:.1f} s; peak RSS {memory}; load average {r['load']:.1f}", flush=True)
        if args.keep is None:
            shutil.rmtree(folder, ignore_errors=True)


if __name__ == "__main__":
    main()
