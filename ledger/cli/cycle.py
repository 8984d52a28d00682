"""CLI commands of the monthly cycle: review, changes, events, stability (thin shells over the Ledger API).

``review`` renders the report, so it imports ``reports`` inside the command (the ledger package
never imports it at load time).
"""

from __future__ import annotations

import json
import sys
from pathlib import Path
from typing import Annotated

from ..lazy import pandas as pd
import typer

from ..cycle.gate import GATE_EXIT, GATE_LEVELS, at_or_above
from .filters import ModelOpt, SeriesOpt, SinceOpt, UntilOpt
from .common import AsOfOpt, Format, FormatOpt, IncludeExcludedOpt, app, busy, emit, notice, open_ledger

__all__ = ["review", "changes", "events", "stability", "FailOnOpt", "check_fail_on", "gate"]

FailOnOpt = Annotated[str | None, typer.Option(
    "--fail-on", metavar="SEVERITY",
    help=f"Exit with code {GATE_EXIT} when findings at or above this severity exist ({' or '.join(GATE_LEVELS)}).")]
_CHANGE_TABLE = ["status", "kind", "model", "series", "level", "severity_then", "severity_now",
                 "figure_then", "figure_now"]


def check_fail_on(fail_on: str | None) -> None:
    """Refuse a bad --fail-on name before any work is done."""
    if fail_on is not None:
        at_or_above(pd.DataFrame({"severity": []}), fail_on)


def gate(findings: pd.DataFrame, fail_on: str | None) -> None:
    """Close the gate (exit GATE_EXIT) when findings at or above ``fail_on`` exist."""
    if fail_on is None:
        return
    hits = at_or_above(findings, fail_on)
    if len(hits):
        notice(f"gate: {len(hits):,} finding(s) at or above {fail_on}; exit code {GATE_EXIT}")
        raise typer.Exit(GATE_EXIT)


@app.command()
def review(
    ctx: typer.Context,
    inbox: Annotated[Path, typer.Argument(metavar="INBOX", help="Inbox folder: actuals files anywhere, forecast files as MODEL/ORIGIN.csv (or with model and origin columns).")],
    out: Annotated[Path, typer.Option("--out", metavar="REPORT_DIR", help="Folder for the report of this review.")],
    incumbent: Annotated[str | None, typer.Option("--incumbent", metavar="MODEL", help="The model in use, for the report's replacement advice.")] = None,
    benchmark: Annotated[str | None, typer.Option("--benchmark", metavar="MODEL", help="Benchmark model for the value-added findings.")] = None,
    include_excluded: IncludeExcludedOpt = False,
    fail_on: FailOnOpt = None,
    fmt: FormatOpt = Format.table,
) -> None:
    """The monthly cycle in one command: record what is new in INBOX, run the findings, store the review, write the report."""
    from reports.cycle import review_and_report

    check_fail_on(fail_on)
    with busy("Reviewing"):
        done = review_and_report(ctx.obj["ledger"], inbox, out, wait=ctx.obj["wait"], include_excluded=include_excluded,
                                 incumbent=incumbent, benchmark=benchmark)
    result = done.review
    for w in result.warnings:
        notice(f"Warning: {w}")
    if fmt is not Format.table:
        emit(result.findings, fmt)
    elif result.stored:
        typer.echo(f"review {result.review_id}: {result.runs_new:,} run(s) and {result.actuals_new:,} actual(s) recorded "
                   f"from {len(result.files):,} file(s); as-of {result.as_of:%Y-%m-%d %H:%M:%S} UTC, "
                   f"state {result.state_hash[:12]}")
    else:
        typer.echo(f"nothing new in {inbox} since review {result.review_id}; nothing stored")
    if fmt is Format.table:
        found = result.findings[result.findings["severity"] != "note"]
        typer.echo(f"{len(found):,} finding(s); report {done.report.index}")
    gate(result.findings, fail_on)


@app.command()
def changes(
    ctx: typer.Context,
    since_review: Annotated[int | None, typer.Option("--since-review", metavar="N", help="Compare the latest review with review N (default: the one before it).")] = None,
    mase_change: Annotated[float | None, typer.Option("--mase-change", metavar="X", help="List a model when its recent MASE moved by more than this (default 0.1).")] = None,
    models: Annotated[bool, typer.Option("--models", help="With --format csv: the models' MASE moves instead of the findings.")] = False,
    fmt: FormatOpt = Format.table,
) -> None:
    """What changed since the last review: findings new, resolved and persisting; models whose recent MASE moved."""
    with open_ledger(ctx) as book:
        diff = book.changes(since_review=since_review, mase_change=mase_change)
    if fmt is Format.json:
        body = {"review": diff.now, "since_review": diff.then, "mase_change": diff.mase_change,
                "findings": json.loads(diff.findings.to_json(orient="records", double_precision=15)),
                "models": json.loads(diff.models.to_json(orient="records", double_precision=15))}
        sys.stdout.write(json.dumps(body, indent=1, ensure_ascii=False) + "\n")
        return
    if fmt is Format.csv:
        emit(diff.models if models else diff.findings, fmt)
        return
    against = f"review {diff.then}" if diff.then is not None else "nothing (the first review)"
    typer.echo(f"review {diff.now} against {against}: {diff.count('new'):,} new, {diff.count('resolved'):,} resolved, "
               f"{diff.count('persisting'):,} persisting finding(s)")
    if len(diff.findings):
        emit(diff.findings[_CHANGE_TABLE], fmt, title="Findings")
    moved = diff.models[diff.models["moved"]]
    typer.echo(f"{len(moved):,} model(s) whose recent MASE moved by more than {diff.mase_change:g}")
    if len(moved):
        emit(moved.drop(columns="moved"), fmt, title="Recent MASE, then and now")


@app.command()
def events(
    ctx: typer.Context,
    file: Annotated[Path | None, typer.Argument(metavar="FILE", help="CSV or Parquet: series (a key, * or ATTR=VALUE), first, last, label, exclude (yes/no). Without it: list the events in force.")] = None,
    as_of: AsOfOpt = None,
    fmt: FormatOpt = Format.table,
) -> None:
    """Record events (stock-outs, promotions, shutdowns) as versions; those with exclude yes leave their cells out of scoring."""
    if file is None:
        with open_ledger(ctx) as book:
            frame = book.events(as_of=as_of)
        if fmt is Format.table and frame.empty:
            notice("no events recorded")
            return
        emit(frame.drop(columns=["first_day", "end_day"]), fmt, title="Events in force")
        return
    with open_ledger(ctx, create=True) as book:
        result = book.record_events(file)
    typer.echo(f"{result.events:,} event(s): {result.changed:,} recorded, {result.unchanged:,} unchanged")


@app.command()
def stability(
    ctx: typer.Context,
    by: Annotated[str, typer.Option("--by", metavar="KEYS", help="Comma list of series, model, horizon (the later run's) or attribute names.")] = "series,model",
    model: ModelOpt = None,
    series: SeriesOpt = None,
    since: SinceOpt = None,
    until: UntilOpt = None,
    as_of: AsOfOpt = None,
    include_excluded: IncludeExcludedOpt = False,
    fmt: FormatOpt = Format.table,
) -> None:
    """How much forecasts of the same target period change from run to run: scaled revision, share toward the actual, nervousness."""
    with open_ledger(ctx) as book, busy("Measuring"):
        frame = book.stability(by=by.split(","), as_of=as_of, models=model or (), series=series or (),
                               since=since, until=until, include_excluded=include_excluded)
    if fmt is Format.table and frame.empty:
        notice("no target period has two runs yet: nothing to compare")
        return
    emit(frame, fmt, title="Stability (revision: mean |change| / q; nervousness: share of up-then-down pairs, 0.5 if revisions were independent)")
