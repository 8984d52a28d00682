"""CLI command ``demo``: the whole job in one command on a fresh install (over :func:`reports.demo.build_demo`)."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer
from rich.console import Console
from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn

from .common import app

__all__ = ["demo", "summary_lines"]


@app.command()
def demo(
    out: Annotated[Path, typer.Option("--out", help="Folder for the demo ledger and its report.")] = Path("backsight-demo"),
    ledger: Annotated[Path | None, typer.Option("--ledger", help="Demo ledger file (default OUT/demo.duckdb); "
                                                 "an existing file is replaced only if it is a demo ledger.")] = None,
) -> None:
    """Replay the invented demo scenario month by month into a fresh ledger and render its report."""
    from reports.demo import build_demo

    console = Console(stderr=True, highlight=False)
    columns = (TextColumn("{task.description:<12}", markup=False), BarColumn(), TimeElapsedColumn())
    with Progress(*columns, console=console, transient=True, disable=not console.is_terminal) as bar:
        task = bar.add_task("replaying", total=None)

        def progress(done: int, total: int, what: str) -> None:
            bar.update(task, completed=done, total=total, description=what[:12])

        result = build_demo(out, ledger_path=ledger, progress=progress)
    for line in summary_lines(result):
        typer.echo(line)


def summary_lines(result) -> list[str]:
    """What ``backsight demo`` prints after building (a :class:`reports.demo.DemoResult`)."""
    r = result.replay
    found = ", ".join(f"{n} {kind}" for kind, n in sorted(result.findings.items())) or "none"
    lines = [f"Replayed {r.scenario}: {r.runs} runs ({r.cells:,} forecasts), {r.actual_values:,} actuals, "
             f"{r.revisions} revision(s), {r.superseded} superseded run(s), into {r.ledger_path}",
             f"Findings: {found}",
             f"Advice: {result.report.advice}",
             "Lowest MASE by horizon (an estimate from past errors, not a promise; the advice above says why "
             "the lowest is not always the one to use):"]
    lines += [f"  h={row.horizon:<2} {row.model:<20} MASE {row.mase:.2f}  ({row.n} cells)"
              for row in result.best_by_horizon.itertuples(index=False)]
    return lines + [f"Report: {result.report.index}"]
