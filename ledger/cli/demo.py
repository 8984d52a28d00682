"""CLI command ``demo``: the whole job in one command on a fresh install (over :func:`reports.demo.build_demo`)."""

from __future__ import annotations

import shlex
from pathlib import Path
from typing import Annotated

import typer
from rich.console import Console
from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn

from .common import app, say
from ..wording import plural

__all__ = ["demo", "summary_lines"]


@app.command()
def demo(
    out: Annotated[Path, typer.Option("--out", metavar="DIR", help="Folder for the demo ledger and its report.")] = Path("backsight-demo"),
    ledger: Annotated[Path | None, typer.Option("--ledger", metavar="FILE", help="Demo ledger file (default OUT/demo.duckdb); "
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
        say(line)


def summary_lines(result) -> list[str]:
    """What ``backsight demo`` prints after building (a :class:`reports.demo.DemoResult`)."""
    r = result.replay
    found = ", ".join(f"{n} {kind}" for kind, n in sorted(result.findings.items())) or "none"
    lines = [f"Replayed {r.scenario}: {plural(r.runs, 'run')} ({plural(r.cells, 'forecast')}), "
             f"{plural(r.actual_values, 'actual')}, {plural(r.revisions, 'revision')}, "
             f"{plural(r.superseded, 'superseded run')}, into {r.ledger_path}",
             f"Findings: {found}",
             "Lowest MASE by horizon (an estimate from past errors, not a promise):"]
    lines += [f"  h={row.horizon:<2} {row.model:<20} MASE {row.mase:.2f}  ({plural(row.n, 'cell')})"
              for row in result.best_by_horizon.itertuples(index=False)]
    lines += [f"Advice: {a}" for a in result.advice]
    top = result.top_findings
    if top is not None and len(top):
        lines.append("Top findings:")
        for i, row in enumerate(top.itertuples(index=False), start=1):
            where = "".join(f" {x}" for x in (row.model, row.series) if x)
            lines.append(f"  {i}. {row.kind}{where}: {row.evidence}")
    ledger = f"--ledger {shlex.quote(str(r.ledger_path))}"
    lines += ["Try next:",
              f"  backsight {ledger} flags --severity act",
              f"  backsight {ledger} scores --by model --horizon 1",
              f"  backsight {ledger} compare {shlex.quote(result.incumbent)} {shlex.quote(_challenger(result))} --horizon 1"]
    return lines + [f"Report: {result.report.index}"]


def _challenger(result) -> str:
    """The model with the lowest MASE at horizon 1 other than the incumbent (the one to compare)."""
    best = result.best_by_horizon
    others = [m for m in best["model"] if m != result.incumbent]
    return others[0] if others else "MODEL"
