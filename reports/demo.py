"""``backsight demo``: replay the invented scenario into a fresh ledger, render its report and
keep what the terminal summary shows (the report's advice sentence, the findings in flags' order)."""

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
    report: ReportResult            # report.advice: the advice sentence of the report's first screen
    flags: pd.DataFrame             # every finding at the end of the replay, in flags' order
    challenger: str                 # the model with the lowest MASE at horizon 1 other than the incumbent
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
        table = book.scores(by=["model"], horizons=[1])
    ranked = table[table["model"] != DEMO_INCUMBENT].dropna(subset=["mase"]).sort_values(["mase", "model"])
    challenger = str(ranked["model"].iloc[0]) if len(ranked) else DEMO_INCUMBENT
    return DemoResult(summary, report, flags, challenger)
