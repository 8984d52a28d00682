"""CLI command ``report``: render the static HTML report (a thin shell over :func:`reports.render_report`).

``reports`` is imported inside the command, so the ledger package never imports it at load
time (the dependency runs one way: reports imports ledger).
"""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer
from rich.console import Console
from rich.progress import (
    BarColumn,
    MofNCompleteColumn,
    Progress,
    TextColumn,
    TimeElapsedColumn,
)

from .common import AsOfOpt, IncludeExcludedOpt, app, say

__all__ = ["report"]


@app.command()
def report(
    ctx: typer.Context,
    out_dir: Annotated[Path, typer.Argument(metavar="OUTDIR", help="Folder for the site (created if missing); index.html is its entry page.")],
    as_of: AsOfOpt = None,
    since: Annotated[str | None, typer.Option("--since", metavar="PERIOD", help="First target period in the accuracy tables and charts.")] = None,
    until: Annotated[str | None, typer.Option("--until", metavar="PERIOD", help="Last target period in the accuracy tables and charts.")] = None,
    title: Annotated[str | None, typer.Option("--title", metavar="TEXT", help="Title of the report.")] = None,
    incumbent: Annotated[str | None, typer.Option("--incumbent", metavar="MODEL", help="The model in use; enables replacement advice (default: the ledger's stored incumbent).")] = None,
    benchmark: Annotated[str | None, typer.Option("--benchmark", metavar="MODEL", help="Benchmark model for the value-added findings.")] = None,
    horizon: Annotated[int | None, typer.Option("--horizon", min=1, metavar="N", help="Horizon of the headline sentences, standings and series charts (default: the smallest horizon of the newest runs, usually 1).")] = None,
    group_by: Annotated[str | None, typer.Option("--group-by", metavar="ATTR", help="Add groups.html: accuracy (unweighted and volume-weighted), group totals, findings and series per value of this series attribute (e.g. region).")] = None,
    include_excluded: IncludeExcludedOpt = False,
    series_pages: Annotated[str | None, typer.Option("--series-pages", metavar="N|all", help="Series pages to draw when the ledger has more series: the N with the largest total scaled error, plus every series an act or watch finding names (default 250; all: every series).")] = None,
    adjusts: Annotated[list[str] | None, typer.Option("--adjusts", metavar="OVERRIDE=BASE", help="Declare that model OVERRIDE adjusts model BASE (e.g. planner-override=incumbent-hw), so the forecast value added of that step is shown; repeatable; replaces the relation recorded with backsight adjusts.")] = None,
) -> None:
    """Render the static HTML report (overview, findings, a page per model and per series, methods; with --group-by a groups page) into OUTDIR."""
    from reports import render_report
    from reports.value_added import parse_overrides

    overrides = parse_overrides(adjusts) if adjusts else None      # None: the relation recorded in the ledger
    # the default (250) is reports.site.SERIES_PAGES; the help states it (tests/reports/test_report_cells.py)
    pages = {}
    if series_pages is not None:
        if series_pages != "all" and not (series_pages.isdigit() and int(series_pages) > 0):
            raise typer.BadParameter(f"{series_pages!r}: give a number of pages above 0, or all", param_hint="--series-pages")
        pages = {"series_pages": None if series_pages == "all" else int(series_pages)}

    console = Console(stderr=True, highlight=False)
    columns = (TextColumn("Rendering"), BarColumn(), MofNCompleteColumn(), TimeElapsedColumn(),
               TextColumn("{task.description}", markup=False))
    with Progress(*columns, console=console, transient=True, disable=not console.is_terminal) as bar:
        task = bar.add_task("", total=None)

        def progress(done: int, total: int, what: str) -> None:
            bar.update(task, completed=done, total=total, description=what[:40])

        result = render_report(ctx.obj["ledger"], out_dir, as_of=as_of, since=since, until=until, title=title,
                               incumbent=incumbent, benchmark=benchmark, horizon=horizon, progress=progress,
                               group_by=group_by, overrides=overrides, include_excluded=include_excluded,
                               **pages)
    say(str(result.index))
