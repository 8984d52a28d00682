"""Benchmark: render the static HTML report of a large ledger built through the public API.

    python tests/benchmarks/bench_report.py [--series 1000] [--models 4] [--origins 36]
                                            [--horizons 12] [--keep DIR] [--workers N]

Builds (or, with --keep DIR, reuses) a monthly ledger of SERIES x MODELS x ORIGINS x HORIZONS
forecast cells with 80% and 95% intervals (invented data), then renders the report and prints
the render time, the page count, the size of index.html and the largest page.
Target (issue 5, 2 cores): 1,000 x 4 x 36 x 12 renders in under 60 s with index.html < 2 MB.
"""

from __future__ import annotations

import argparse
import resource
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from ledger import Ledger
from reports import render_report


def _labels(months: np.ndarray) -> np.ndarray:
    return np.array([f"{m // 12}-{m % 12 + 1:02d}" for m in months])


def build(path: Path, n_series: int, n_models: int, n_origins: int, n_horizons: int, seed: int = 5) -> None:
    """Actuals for 36 months before the first origin up to the last origin + 6; runs per model."""
    rng = np.random.default_rng(seed)
    first = 12 * 2022
    months = np.arange(first - 36, first + n_origins + n_horizons)
    last_actual = first + n_origins + 6          # later targets stay pending
    keys = np.array([f"region-{i % 7}/item-{i:05d}" for i in range(n_series)])
    level = rng.uniform(50, 500, n_series)
    season = 1 + 0.2 * np.sin(2 * np.pi * months / 12)
    truth = level[:, None] * season[None, :] * (1 + 0.08 * rng.standard_normal((n_series, months.size)))
    keep = months <= last_actual
    labels = _labels(months)
    with Ledger.open(path) as book:
        book.record_actuals(pd.DataFrame({
            "series": np.repeat(keys, keep.sum()), "period": np.tile(labels[keep], n_series),
            "actual": truth[:, keep].ravel().round(2)}), name="bench-actuals")
        for mi in range(n_models):
            book.snapshot(_runs(rng, keys, level, season, months, first, n_origins, n_horizons, mi),
                          name=f"bench-model-{mi}")


def _runs(rng, keys, level, season, months, first, n_origins, n_horizons, mi) -> pd.DataFrame:
    o = np.arange(n_origins)
    h = np.arange(1, n_horizons + 1)
    s, oo, hh = np.meshgrid(np.arange(keys.size), o, h, indexing="ij")
    s, oo, hh = s.ravel(), oo.ravel(), hh.ravel()
    target = first + oo + hh - months[0]
    point = level[s] * season[target] * (1 + (0.05 + 0.02 * mi) * rng.standard_normal(s.size))
    spread = level[s] * (0.06 + 0.02 * mi)
    labels = _labels(months)
    return pd.DataFrame({
        "series": keys[s], "model": f"model-{mi}", "origin": labels[first + oo - months[0]],
        "period": labels[target], "forecast": point.round(2),
        "lower_80": (point - 1.2816 * spread).round(2), "upper_80": (point + 1.2816 * spread).round(2),
        "lower_95": (point - 1.96 * spread).round(2), "upper_95": (point + 1.96 * spread).round(2)})


def _cpu() -> float:
    """User + system CPU seconds of this process and its finished children (the page workers)."""
    me, kids = resource.getrusage(resource.RUSAGE_SELF), resource.getrusage(resource.RUSAGE_CHILDREN)
    return me.ru_utime + me.ru_stime + kids.ru_utime + kids.ru_stime


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--series", type=int, default=1000)
    ap.add_argument("--models", type=int, default=4)
    ap.add_argument("--origins", type=int, default=36)
    ap.add_argument("--horizons", type=int, default=12)
    ap.add_argument("--keep", type=Path, help="folder to keep (and reuse) the ledger and the site in")
    ap.add_argument("--workers", type=int, default=None, help="series-page processes (default: automatic)")
    args = ap.parse_args()
    folder = args.keep or Path(tempfile.mkdtemp(prefix="backsight-bench-report-"))
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / f"bench-{args.series}x{args.models}x{args.origins}x{args.horizons}.duckdb"
    if not path.exists():
        t = time.perf_counter()
        build(path, args.series, args.models, args.origins, args.horizons)
        print(f"built ledger {path} in {time.perf_counter() - t:.1f} s")
    cells = args.series * args.models * args.origins * args.horizons
    marks: dict[str, float] = {}

    def progress(done: int, total: int, what: str) -> None:
        marks.setdefault("overview" if what == "overview" else "series" if what.startswith("series") else what,
                         time.perf_counter() - t)

    cpu0 = _cpu()
    t = time.perf_counter()
    result = render_report(path, folder / "site", incumbent="model-0", workers=args.workers, progress=progress)
    seconds = time.perf_counter() - t
    cpu = _cpu() - cpu0
    sizes = sorted((p.stat().st_size, p.name) for p in result.out_dir.iterdir())
    print(f"forecast cells in ledger: {cells:,}; scored: {result.cells_scored:,}")
    print(f"render time: {seconds:.1f} s (target < 60 s on 2 cores); CPU time {cpu:.1f} s (all processes)")
    print(f"  reading the ledger and findings, overview written: {marks.get('overview', float('nan')):.1f} s; "
          f"first series chunk done: {marks.get('series', float('nan')):.1f} s")
    print(f"pages: {result.pages:,} ({result.model_pages} model, {result.series_pages:,} series); findings: {result.findings:,}")
    print(f"index.html: {result.index_bytes / 1e6:.2f} MB (target < 2 MB); largest page: {sizes[-1][1]} "
          f"{sizes[-1][0] / 1e6:.2f} MB; site total {sum(s for s, _ in sizes) / 1e6:.1f} MB")
    print(f"site: {result.index}")


if __name__ == "__main__":
    main()
