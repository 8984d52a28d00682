"""CLI commands over the record itself: snapshot, actuals, scores, attributes, adjusts, runs."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

from ..lazy import pandas as pd
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
    say,
)
from .columns import choose_columns
from .engines import Engine, EngineOpt, LakeOpt, SparkMasterOpt, reading_ledger
from .filters import ModelOpt, selection, with_selection
from ..lazy import preload
from ..overrides import parse_overrides
from ..wording import plural
from ..scoring.totals import INTERVAL_NOTE

__all__ = ["snapshot", "actuals", "scores", "attributes", "adjusts", "runs"]


@app.command()
def snapshot(
    ctx: typer.Context,
    file: Annotated[Path, typer.Argument(help="Forecast file (CSV or Parquet): series, period, forecast, optional lower_L/upper_L, qNN, model, origin.")],
    model: Annotated[str | None, typer.Option("--model", metavar="MODEL", help="Model name, when the file has no model column.")] = None,
    origin: Annotated[str | None, typer.Option("--origin", metavar="PERIOD", help="Origin period (last actual the forecaster had), when the file has no origin column.")] = None,
    freq: FreqOpt = None,
    note: Annotated[str | None, typer.Option("--note", metavar="TEXT", help="A note kept with the run.")] = None,
    supersede: Annotated[bool, typer.Option("--supersede", help="Replace a different run of the same model and origin (the old one is kept).")] = False,
) -> None:
    """Record a forecast run (or a back-fill of many runs) in the ledger."""
    preload()   # pyarrow's conversions to NumPy import pandas; load it while DuckDB reads the file
    with open_ledger(ctx, create=True) as book, busy(f"Recording {file.name}") as step:
        result = book.snapshot(file, model=model, origin=origin, freq=freq, note=note, supersede=supersede,
                               progress=lambda done, total: step(read_share(done, total)))
    for w in result.warnings:
        notice(f"Warning: {w}")
    for run in result.runs:
        if run.status == "unchanged":
            notice(f"run {run.run_id} ({run.model} at {run.origin}) is already in the ledger; nothing written")
        else:
            extra = f"; {run.status}" if run.status.startswith("superseded") else ""
            say(f"run {run.run_id}  {run.model} at {run.origin}: {plural(run.cells, 'cell')} recorded{extra}")


@app.command()
def actuals(
    ctx: typer.Context,
    file: Annotated[Path, typer.Argument(help="Actuals file (CSV or Parquet): series, period, actual.")],
    freq: FreqOpt = None,
) -> None:
    """Record actuals; a changed value is kept as a new revision."""
    with open_ledger(ctx, create=True) as book, busy(f"Recording {file.name}") as step:
        result = book.record_actuals(file, freq=freq, progress=lambda done, total: step(read_share(done, total)))
    for w in result.warnings:
        notice(f"Warning: {w}")
    say(f"{result.new:,} new, {result.revised:,} revised, {result.unchanged:,} unchanged")


@app.command()
@with_selection()
def scores(
    ctx: typer.Context,
    by: Annotated[str | None, typer.Option("--by", metavar="KEYS", help="Comma list of series, model, horizon, origin, period, or attribute names (default model,horizon; with --totals: model).")] = None,
    chosen: dict | None = None,
    weight: Annotated[str | None, typer.Option("--weight", metavar="ATTR", help="Add weighted MAPE, bias, MASE, RMSSE: 'volume' or a numeric attribute (× volume).")] = None,
    totals: Annotated[str | None, typer.Option("--totals", metavar="ATTR", help="Score each group's total (sum of members) instead of cells, per --by.")] = None,
    metrics: Annotated[str | None, typer.Option("--metrics", metavar="LIST", help="Columns to show: a comma list (e.g. rmse,smape,width_80) or 'all'. Default for the table: n, MAE, MAPE, MASE, bias %, the first coverage level; csv/json: all.")] = None,
    include_excluded: IncludeExcludedOpt = False,
    quantile_detail: Annotated[bool, typer.Option("--quantile-detail", help="Add below_qNN (share of actuals below) and pinball_qNN per quantile level (csv and json show them; the table with --metrics).")] = False,
    as_of: AsOfOpt = None,
    fmt: FormatOpt = Format.table,
    engine: EngineOpt = Engine.duckdb,
    lake: LakeOpt = None,
    spark_master: SparkMasterOpt = None,
) -> None:
    """Accuracy per group: MAE, RMSE, MAPE, sMAPE, WAPE, MASE, RMSSE, bias, coverage, interval score, WIS."""
    preload()   # the result comes back as a data frame; load pandas while the queries run
    keys = [k.strip().lower() for k in (by or ("model" if totals else "model,horizon")).split(",") if k.strip()]
    with reading_ledger(ctx, engine, lake, spark_master) as book, busy("Scoring"):
        if totals is not None:
            if chosen["series"]:
                raise typer.BadParameter("a total has no series; use --where ATTR=VALUE to choose groups",
                                         param_hint="--series")
            del chosen["series"]
            frame = book.totals(totals, by=keys, as_of=as_of, **chosen)
            keys = [totals] + [c for c in frame.columns[1:] if c in keys] + ["forecast_of"]
        else:
            frame = book.scores(by=keys, as_of=as_of, weight=weight, quantile_detail=quantile_detail,
                                include_excluded=include_excluded, **chosen)
    if totals is not None:
        notice(f"totals by {totals}: {INTERVAL_NOTE}; target periods where a member lacks a forecast or an "
               "actual are left out (n_left_out)")
    if fmt is Format.table and frame.empty:
        notice("no scored cells: the selection is valid but no forecast in it has an actual yet")
        return
    if fmt is Format.table and "weighting" in frame.columns:
        notice(f"weighting: {frame['weighting'].iloc[0]}")
        frame = frame.drop(columns="weighting")
    frame = choose_columns(frame, keys, metrics, compact=fmt is Format.table)
    emit(frame, fmt, title="Scores (e = actual − forecast; positive bias: forecasts too low)", keep=keys)


@app.command()
def attributes(
    ctx: typer.Context,
    file: Annotated[Path, typer.Argument(help="CSV or Parquet: series plus one column per attribute (region, family, unit_price…).")],
    total_of: Annotated[str | None, typer.Option("--total-of", metavar="ATTR=VALUE", help="The file's series are direct forecasts of this group's total.")] = None,
) -> None:
    """Record series attributes; a changed value is kept as a new version (as-of reproduces old groupings)."""
    with open_ledger(ctx, create=True) as book:
        result = book.record_attributes(file, total_of=total_of)
    say(f"{plural(result.series, 'series', 'series')}: {plural(result.changed, 'value')} recorded, {result.unchanged:,} unchanged "
               f"({', '.join(result.names)})")


@app.command()
def adjusts(
    ctx: typer.Context,
    pairs: Annotated[list[str] | None, typer.Argument(metavar="OVERRIDE=BASE", help="Model OVERRIDE adjusts model BASE (e.g. planner-override=incumbent-hw). Without any: list the relation in force.")] = None,
    withdraw: Annotated[list[str] | None, typer.Option("--withdraw", metavar="MODEL", help="MODEL no longer adjusts another model; repeatable.")] = None,
    as_of: AsOfOpt = None,
    fmt: FormatOpt = Format.table,
) -> None:
    """Record which model is an override of which (versioned); the report and the value findings use it."""
    if not pairs and not withdraw:
        with open_ledger(ctx) as book:
            relation = book.overrides(as_of=as_of)
        if fmt is Format.table and not relation:
            notice("no override recorded; record one with backsight adjusts OVERRIDE=BASE")
            return
        emit(pd.DataFrame({"override": list(relation), "base": list(relation.values())}, dtype=object), fmt,
             title="Overrides in force (override adjusts base)")
        return
    wanted: dict[str, str | None] = dict(parse_overrides(pairs or ()))
    wanted.update({name: None for name in withdraw or ()})
    with open_ledger(ctx, create=True) as book:
        result = book.record_overrides(wanted, source="backsight adjusts")
    say(f"{plural(result.changed, 'change')} recorded, {result.unchanged:,} unchanged")


@app.command()
def runs(ctx: typer.Context, model: ModelOpt = None, fmt: FormatOpt = Format.table) -> None:
    """List the runs in the ledger: id, model, origin, recorded at, cells, hash, superseded."""
    with open_ledger(ctx) as book:
        frame = book.runs(**{k: v for k, v in selection(model=model).items() if k == "models"})
    cols = ["run_id", "model", "origin", "recorded_at", "cells", "content_hash", "superseded_by"]
    if fmt is Format.table:
        # The run id is the first 16 hex digits of the content hash: the table shows it once.
        cols.remove("content_hash")
        frame = frame.assign(recorded_at=frame["recorded_at"].dt.strftime("%Y-%m-%d %H:%M"))
        if frame.empty:
            notice("no runs in the selection")
            return
    emit(frame[cols], fmt, title=f"Runs ({len(frame):,})")
