"""The ``backsight`` command line: each command parses options, calls one public function, prints.

Errors: library errors (:class:`ledger.errors.LedgerError`) become ``Error: <message>`` on stderr
and exit code 1, in one place (:class:`_Group`); usage errors keep exit code 2. Data goes to
stdout; notices, warnings and progress go to stderr.
"""

from __future__ import annotations

import contextlib
import enum
import json
import sys
from pathlib import Path
from typing import Annotated, Any

import pandas as pd
import typer
from rich.console import Console
from rich.table import Table
from typer.core import TyperGroup

from . import __version__
from .api import DEFAULT_PATH, Ledger
from .errors import LedgerError

__all__ = ["app", "main"]

EXIT_ERROR = 1


class _Group(TyperGroup):
    """Turns every LedgerError into one ``Error:`` line and exit code 1."""

    def invoke(self, ctx):
        try:
            return super().invoke(ctx)
        except LedgerError as exc:
            typer.echo(f"Error: {exc}", err=True)
            raise typer.Exit(EXIT_ERROR) from None


app = typer.Typer(
    cls=_Group,
    add_completion=False,
    no_args_is_help=True,
    rich_markup_mode=None,
    help="Backsight: a ledger of forecast runs, scored as actuals arrive.",
)

_stderr = Console(stderr=True, highlight=False, soft_wrap=True)


class Format(str, enum.Enum):
    table = "table"
    csv = "csv"
    json = "json"


FormatOpt = Annotated[Format, typer.Option("--format", help="table (for people), csv or json (full precision, stdout only).")]
AsOfOpt = Annotated[str | None, typer.Option("--as-of", help="Score with what the ledger held at this time (ISO 8601; default now).")]
FreqOpt = Annotated[str | None, typer.Option("--freq", help="yearly, quarterly, monthly, weekly or daily; needed when periods are bare dates of a new series.")]


def _print_version(value: bool) -> None:
    if value:
        typer.echo(f"backsight {__version__}")
        raise typer.Exit(0)


@app.callback()
def _root(
    ctx: typer.Context,
    ledger: Annotated[Path, typer.Option("--ledger", envvar="BACKSIGHT_LEDGER",
                                         help="The ledger file.")] = Path(DEFAULT_PATH),
    version: Annotated[bool, typer.Option("--version", callback=_print_version, is_eager=True,
                                          help="Print the version and exit.")] = False,
) -> None:
    ctx.obj = {"ledger": ledger}


def _open(ctx: typer.Context, *, create: bool = False) -> Ledger:
    return Ledger.open(ctx.obj["ledger"], create=create, read_only=not create)


@contextlib.contextmanager
def _busy(message: str):
    """A spinner on stderr while slow work runs (only on a terminal)."""
    if _stderr.is_terminal:
        with _stderr.status(message):
            yield
    else:
        yield


def _note(text: str) -> None:
    typer.echo(text, err=True)


def _emit(frame: pd.DataFrame, fmt: Format, *, title: str | None = None) -> None:
    """Print a frame: csv/json on stdout with full precision; table for people."""
    if fmt is Format.csv:
        sys.stdout.write(frame.to_csv(index=False, lineterminator="\n"))
    elif fmt is Format.json:
        records = json.loads(frame.to_json(orient="records", double_precision=15, date_format="iso"))
        sys.stdout.write(json.dumps(records, indent=1, ensure_ascii=False) + "\n")
    else:
        out = Console(highlight=False)
        if not out.is_terminal:
            out = Console(highlight=False, width=max(100, 12 * len(frame.columns)))
        out.print(_table(frame, title))


def _table(frame: pd.DataFrame, title: str | None) -> Table:
    table = Table(title=title, show_lines=False, header_style="bold")
    for col in frame.columns:
        numeric = pd.api.types.is_numeric_dtype(frame[col])
        table.add_column(str(col), justify="right" if numeric else "left", overflow="fold")
    for row in frame.itertuples(index=False):
        table.add_row(*[_cell(v) for v in row])
    return table


def _cell(value: Any) -> str:
    if value is None or (isinstance(value, float) and value != value):
        return "–"
    if isinstance(value, float):
        return f"{value:,.4g}" if abs(value) < 1e5 else f"{value:,.0f}"
    return str(value)


def _split(values: list[str] | None) -> list[str]:
    out: list[str] = []
    for v in values or []:
        out += [p.strip() for p in v.split(",") if p.strip()]
    return out


@app.command()
def snapshot(
    ctx: typer.Context,
    file: Annotated[Path, typer.Argument(help="Forecast file (CSV or Parquet): series, period, forecast, optional lower_L/upper_L, qNN, model, origin.")],
    model: Annotated[str | None, typer.Option("--model", help="Model name, when the file has no model column.")] = None,
    origin: Annotated[str | None, typer.Option("--origin", help="Origin period (last actual the forecaster had), when the file has no origin column.")] = None,
    freq: FreqOpt = None,
    note: Annotated[str | None, typer.Option("--note", help="A note kept with the run.")] = None,
    supersede: Annotated[bool, typer.Option("--supersede", help="Replace a different run of the same model and origin (the old one is kept).")] = False,
) -> None:
    """Record a forecast run (or a back-fill of many runs) in the ledger."""
    with _open(ctx, create=True) as book, _busy(f"Recording {file.name}"):
        result = book.snapshot(file, model=model, origin=origin, freq=freq, note=note, supersede=supersede)
    for w in result.warnings:
        _note(f"Warning: {w}")
    for run in result.runs:
        if run.status == "unchanged":
            _note(f"run {run.run_id} ({run.model} at {run.origin}) is already in the ledger; nothing written")
        else:
            extra = f"; {run.status}" if run.status.startswith("superseded") else ""
            typer.echo(f"run {run.run_id}  {run.model} at {run.origin}: {run.cells} cells recorded{extra}")


@app.command()
def actuals(
    ctx: typer.Context,
    file: Annotated[Path, typer.Argument(help="Actuals file (CSV or Parquet): series, period, actual.")],
    freq: FreqOpt = None,
) -> None:
    """Record actuals; a changed value is kept as a new revision."""
    with _open(ctx, create=True) as book, _busy(f"Recording {file.name}"):
        result = book.record_actuals(file, freq=freq)
    for w in result.warnings:
        _note(f"Warning: {w}")
    typer.echo(f"{result.new} new, {result.revised} revised, {result.unchanged} unchanged")


@app.command()
def scores(
    ctx: typer.Context,
    by: Annotated[str, typer.Option("--by", help="Comma list of series, model, horizon, origin, period.")] = "model,horizon",
    model: Annotated[list[str] | None, typer.Option("--model", help="Only this model (repeatable).")] = None,
    series: Annotated[list[str] | None, typer.Option("--series", help="Only this series (repeatable).")] = None,
    horizon: Annotated[list[int] | None, typer.Option("--horizon", help="Only this horizon (repeatable).")] = None,
    since: Annotated[str | None, typer.Option("--since", help="First target period to score.")] = None,
    until: Annotated[str | None, typer.Option("--until", help="Last target period to score.")] = None,
    as_of: AsOfOpt = None,
    fmt: FormatOpt = Format.table,
) -> None:
    """Accuracy per group: MAE, RMSE, MAPE, sMAPE, WAPE, MASE, RMSSE, bias, coverage, interval score."""
    with _open(ctx) as book, _busy("Scoring"):
        frame = book.scores(by=by.split(","), as_of=as_of, models=model or (), series=series or (),
                            horizons=horizon or (), since=since, until=until)
    if fmt is Format.table and frame.empty:
        _note("no scored cells: no forecast in the selection has an actual yet")
        return
    _emit(frame, fmt, title="Scores (e = actual − forecast; positive bias: forecasts too low)")


@app.command()
def runs(ctx: typer.Context, fmt: FormatOpt = Format.table) -> None:
    """List the runs in the ledger: id, model, origin, recorded at, cells, hash, superseded."""
    with _open(ctx) as book:
        frame = book.runs()
    cols = ["run_id", "model", "origin", "recorded_at", "cells", "content_hash", "superseded_by"]
    if fmt is Format.table:
        frame = frame.assign(content_hash=frame["content_hash"].str.slice(0, 12),
                             recorded_at=frame["recorded_at"].dt.strftime("%Y-%m-%d %H:%M:%S"))
    _emit(frame[cols], fmt, title="Runs")


def main() -> None:
    """Console-script entry point."""
    app()
