"""CLI commands over the record itself: snapshot, actuals, scores, attributes, runs."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from .common import (
    AsOfOpt,
    IncludeExcludedOpt,
    read_share,
    Format,
    FormatOpt,
    FreqOpt,
    app,
    busy,
    emit,
    notice,
    open_ledger,
)
from ..scoring.totals import INTERVAL_NOTE

__all__ = ["snapshot", "actuals", "scores", "attributes", "runs"]


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
    with open_ledger(ctx, create=True) as book, busy(f"Recording {file.name}") as say:
        result = book.snapshot(file, model=model, origin=origin, freq=freq, note=note, supersede=supersede,
                               progress=lambda done, total: say(read_share(done, total)))
    for w in result.warnings:
        notice(f"Warning: {w}")
    for run in result.runs:
        if run.status == "unchanged":
            notice(f"run {run.run_id} ({run.model} at {run.origin}) is already in the ledger; nothing written")
        else:
            extra = f"; {run.status}" if run.status.startswith("superseded") else ""
            typer.echo(f"run {run.run_id}  {run.model} at {run.origin}: {run.cells:,} cells recorded{extra}")


@app.command()
def actuals(
    ctx: typer.Context,
    file: Annotated[Path, typer.Argument(help="Actuals file (CSV or Parquet): series, period, actual.")],
    freq: FreqOpt = None,
) -> None:
    """Record actuals; a changed value is kept as a new revision."""
    with open_ledger(ctx, create=True) as book, busy(f"Recording {file.name}") as say:
        result = book.record_actuals(file, freq=freq, progress=lambda done, total: say(read_share(done, total)))
    for w in result.warnings:
        notice(f"Warning: {w}")
    typer.echo(f"{result.new} new, {result.revised} revised, {result.unchanged} unchanged")


@app.command()
def scores(
    ctx: typer.Context,
    by: Annotated[str, typer.Option("--by", help="Comma list of series, model, horizon, origin, period, or attribute names.")] = "model,horizon",
    model: Annotated[list[str] | None, typer.Option("--model", help="Only this model (repeatable).")] = None,
    series: Annotated[list[str] | None, typer.Option("--series", help="Only this series (repeatable).")] = None,
    horizon: Annotated[list[int] | None, typer.Option("--horizon", help="Only this horizon (repeatable).")] = None,
    since: Annotated[str | None, typer.Option("--since", help="First target period to score.")] = None,
    until: Annotated[str | None, typer.Option("--until", help="Last target period to score.")] = None,
    where: Annotated[list[str] | None, typer.Option("--where", metavar="ATTR=VALUE", help="Only series with this attribute value (repeatable).")] = None,
    weight: Annotated[str | None, typer.Option("--weight", help="Add weighted MAPE, bias, MASE, RMSSE: 'volume' or a numeric attribute (× volume).")] = None,
    totals: Annotated[str | None, typer.Option("--totals", metavar="ATTR", help="Score each group's total (sum of members) instead of cells.")] = None,
    include_excluded: IncludeExcludedOpt = False,
    as_of: AsOfOpt = None,
    fmt: FormatOpt = Format.table,
) -> None:
    """Accuracy per group: MAE, RMSE, MAPE, sMAPE, WAPE, MASE, RMSSE, bias, coverage, interval score."""
    with open_ledger(ctx) as book, busy("Scoring"):
        if totals is not None:
            frame = book.totals(totals, as_of=as_of, models=model or (), horizons=horizon or (),
                                since=since, until=until)
        else:
            frame = book.scores(by=by.split(","), as_of=as_of, models=model or (), series=series or (),
                                horizons=horizon or (), since=since, until=until, where=where or (), weight=weight,
                                include_excluded=include_excluded)
    if totals is not None:
        notice(f"totals by {totals}: {INTERVAL_NOTE}; target periods where a member lacks a forecast or an "
               "actual are left out (n_left_out)")
    if fmt is Format.table and frame.empty:
        notice("no scored cells: no forecast in the selection has an actual yet")
        return
    if fmt is Format.table and "weighting" in frame.columns:
        notice(f"weighting: {frame['weighting'].iloc[0]}")
        frame = frame.drop(columns="weighting")
    emit(frame, fmt, title="Scores (e = actual − forecast; positive bias: forecasts too low)")


@app.command()
def attributes(
    ctx: typer.Context,
    file: Annotated[Path, typer.Argument(help="CSV or Parquet: series plus one column per attribute (region, family, unit_price…).")],
    total_of: Annotated[str | None, typer.Option("--total-of", metavar="ATTR=VALUE", help="The file's series are direct forecasts of this group's total.")] = None,
) -> None:
    """Record series attributes; a changed value is kept as a new version (as-of reproduces old groupings)."""
    with open_ledger(ctx, create=True) as book:
        result = book.record_attributes(file, total_of=total_of)
    typer.echo(f"{result.series} series: {result.changed} values recorded, {result.unchanged} unchanged "
               f"({', '.join(result.names)})")


@app.command()
def runs(ctx: typer.Context, fmt: FormatOpt = Format.table) -> None:
    """List the runs in the ledger: id, model, origin, recorded at, cells, hash, superseded."""
    with open_ledger(ctx) as book:
        frame = book.runs()
    cols = ["run_id", "model", "origin", "recorded_at", "cells", "content_hash", "superseded_by"]
    if fmt is Format.table:
        frame = frame.assign(content_hash=frame["content_hash"].str.slice(0, 12),
                             recorded_at=frame["recorded_at"].dt.strftime("%Y-%m-%d %H:%M:%S"))
    emit(frame[cols], fmt, title="Runs")
