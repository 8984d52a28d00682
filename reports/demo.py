"""``backsight demo``: replay the invented scenario into a fresh ledger, render its report and
summarise what a reviewer will find (findings by kind, the best model by horizon)."""

from __future__ import annotations

import dataclasses
from pathlib import Path

import pandas as pd

from ledger import Ledger
from ledger.demo import DEMO_INCUMBENT, ReplaySummary, find_history, replay

from .site import ReportResult, render_report

__all__ = ["DemoResult", "build_demo"]


@dataclasses.dataclass(frozen=True)
class DemoResult:
    replay: ReplaySummary
    report: ReportResult
    findings: dict[str, int]        # kind -> count
    best_by_horizon: pd.DataFrame   # horizon, model, mase, n (lowest MASE on common cells' scores)
    advice: tuple[str, ...] = ()    # Ledger.advise(DEMO_INCUMBENT) sentences, one per challenger
    top_findings: pd.DataFrame | None = None   # the first three act/watch findings, in flags' order
    incumbent: str = DEMO_INCUMBENT


def build_demo(out_dir, *, ledger_path=None, progress=None) -> DemoResult:
    """Build the demo ledger (default ``OUT/demo.duckdb``) and its report (``OUT/report``)."""
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    path = Path(ledger_path) if ledger_path is not None else out / "demo.duckdb"
    summary = replay(find_history(), path,
                     progress=None if progress is None else lambda i, n, step: progress(i, n, "replaying"))
    report = render_report(path, out / "report", incumbent=DEMO_INCUMBENT, title="Fernhollow Garden Supply "
                           "(invented demo): forecast accuracy review",
                           progress=None if progress is None else lambda i, n, what: progress(i, n, what))
    with Ledger.open(path, create=False, read_only=True) as book:
        flags = book.flags()
        table = book.scores(by=["model", "horizon"])
        advice = tuple(book.advise(DEMO_INCUMBENT)["advice"])
    counts = flags["kind"].value_counts().to_dict() if len(flags) else {}
    best = (table.dropna(subset=["mase"]).sort_values(["horizon", "mase"]).groupby("horizon").head(1)
            [["horizon", "model", "mase", "n"]].reset_index(drop=True))
    ranked = flags[flags["severity"] != "note"]
    if "impact" in ranked.columns:
        ranked = ranked.sort_values("impact", ascending=False, kind="stable")
    return DemoResult(summary, report, counts, best, advice, ranked.head(3).reset_index(drop=True))
