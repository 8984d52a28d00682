"""CLI command ``backtest``: reference forecasts from a history file, recorded as ``ref-METHOD`` runs.

A thin shell over :meth:`ledger.api.Ledger.backtest`; the progress bar (with an ETA) is drawn on
stderr only when stderr is a terminal.
"""

from __future__ import annotations

import enum
from collections import Counter
from pathlib import Path
from typing import Annotated

import typer
from rich.console import Console
from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeRemainingColumn

from .common import FreqOpt, app, notice, open_ledger, say, split
from ..wording import plural
from ..methods.names import FILL_HELP, FILL_METHODS, METHODS_HELP
from ..methods.recorded import check_options

__all__ = ["backtest"]


Fill = enum.Enum("Fill", {name: name for name in FILL_METHODS}, type=str)


def _numbers(text: str, option: str, example: str) -> list[float]:
    try:
        return [float(v) for v in split([text])]
    except ValueError:
        raise typer.BadParameter(f"{text!r} is not a comma list of numbers, e.g. {example}",
                                 param_hint=option) from None


@app.command()
def backtest(
    ctx: typer.Context,
    file: Annotated[Path, typer.Argument(help="History file (CSV or Parquet): series, period, actual; recorded as actuals.")],
    methods: Annotated[str, typer.Option("--methods", metavar="LIST", help=METHODS_HELP)],
    horizon: Annotated[int | None, typer.Option("--horizon", metavar="N", help="Periods ahead (default: one season of the file's frequency).")] = None,
    holdout: Annotated[int | None, typer.Option("--holdout", metavar="K", help="One origin per series, K periods before its last actual.")] = None,
    origins: Annotated[str | None, typer.Option("--origins", metavar="FIRST:LAST[:STEP]", help="Every origin in this range of period labels.")] = None,
    levels: Annotated[str, typer.Option("--levels", metavar="LIST", help="Comma list of interval levels in percent.")] = "80,95",
    quantiles: Annotated[str | None, typer.Option("--quantiles", metavar="LIST", help="Comma list of quantile levels in (0, 1) to record as q<NN> columns, e.g. 0.05,0.1,0.5,0.9,0.95.")] = None,
    freq: FreqOpt = None,
    jobs: Annotated[int | None, typer.Option("--jobs", metavar="N", help="Worker processes (default: all cores).")] = None,
    fill: Annotated[Fill | None, typer.Option("--fill", metavar="METHOD", help=FILL_HELP)] = None,
    supersede: Annotated[bool, typer.Option("--supersede", help="Replace different runs already recorded at the same model and origin (the old ones are kept).")] = False,
) -> None:
    """Backtest reference methods on a history file and record the forecasts as ref-METHOD runs."""
    options = dict(methods=split([methods]), horizon=horizon, holdout=holdout, origins=origins,
                   levels=_numbers(levels, "--levels", "80,95"),
                   quantiles=_numbers(quantiles, "--quantiles", "0.1,0.5,0.9") if quantiles else [],
                   jobs=jobs, fill=None if fill is None else fill.value)
    check_options(**options)  # before the ledger file is created
    console = Console(stderr=True, highlight=False)
    columns = (TextColumn("backtest"), BarColumn(), MofNCompleteColumn(), TextColumn("series, ETA"),
               TimeRemainingColumn())
    with open_ledger(ctx, create=True) as book, \
            Progress(*columns, console=console, transient=True, disable=not console.is_terminal) as bar:
        task = bar.add_task("backtest", total=None)
        result = book.backtest(file, freq=freq, supersede=supersede,
                               progress=lambda done, total: bar.update(task, completed=done, total=total),
                               **options)
    _report(result)


def _report(result) -> None:
    for w in result.warnings:
        notice(f"Warning: {w}")
    a = result.actuals
    say(f"actuals: {a.new:,} new, {a.revised:,} revised, {a.unchanged:,} unchanged")
    recorded = Counter(r.model for r in result.recorded)
    unchanged = Counter(r.model for r in result.unchanged)
    for model in sorted(set(recorded) | set(unchanged)):
        say(f"{model}: {plural(recorded[model], 'run')} recorded, {unchanged[model]} unchanged")
    say(f"{plural(len(result.recorded), 'run')} recorded ({plural(result.cells, 'cell')}), "
        f"{len(result.unchanged)} already in the ledger; horizon {result.horizon}")
    for note in result.notes:
        notice(f"Note: {note}")
