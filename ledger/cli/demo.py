"""CLI command ``demo``: the whole job in one command on a fresh install (over :func:`reports.demo.build_demo`)."""

from __future__ import annotations

import shlex
from pathlib import Path
from typing import Annotated

import typer
from rich.console import Console
from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn

from .common import app, say
from .terminal import command_lines, out_width
from ..findings.summary import finding_counts
from ..wording import plural

__all__ = ["demo", "print_summary", "summary_lines"]

#: Findings the summary lists (the report's first screen lists more).
TOP = 3
#: How each command to try next begins.
_TRY = "  backsight "


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
    print_summary(result)


def print_summary(result) -> None:
    """Print :func:`summary_lines` fitted to the width: sentences wrapped, each list item's
    lines hanging under it, a command to copy broken with shell continuations, never shortened."""
    for line in summary_lines(result):
        if line.startswith(_TRY):
            for part in command_lines(line, out_width()):
                typer.echo(part)
        else:
            say(line)


def summary_lines(result) -> list[str]:
    """What ``backsight demo`` prints after building (a :class:`reports.demo.DemoResult`): what was
    replayed, the count of findings, the report's advice sentence, the top three findings (act or
    watch, in flags' order), three commands to try next on this ledger and the report's path."""
    r = result.replay
    flags = result.flags
    lines = [f"Replayed {r.scenario}: {plural(r.runs, 'run')} ({plural(r.cells, 'forecast')}), "
             f"{plural(r.actual_values, 'actual')}, {plural(r.revisions, 'revision')}, "
             f"{plural(r.superseded, 'superseded run')}, into {r.ledger_path}",
             f"Findings: {finding_counts(flags)}" if len(flags) else "Findings: none",
             f"Advice: {result.report.advice}"]
    top = flags[flags["severity"] != "note"].head(TOP) if len(flags) else flags
    if len(top):
        lines.append(f"Top {plural(len(top), 'finding')}:" if len(top) > 1 else "Top finding:")
        lines += [f"  {i}. {_one_line(row)}" for i, row in enumerate(top.to_dict("records"), start=1)]
    ledger = f"--ledger {shlex.quote(str(r.ledger_path))}"
    lines += ["Try next:",
              f"{_TRY}{ledger} flags --severity act",
              f"{_TRY}{ledger} scores --by model --horizon 1",
              f"{_TRY}{ledger} compare {shlex.quote(result.incumbent)} {shlex.quote(result.challenger)} --horizon 1"]
    return lines + [f"Report: {result.report.index}"]


def _one_line(row: dict) -> str:
    """A finding in one line: severity, kind, what it is about and its evidence up to the first ';'."""
    where = " ".join(x for x in (row["model"], row["series"]) if x)
    return f"{row['severity']} {row['kind']} {where}: {str(row['evidence']).split(';', 1)[0]}"
