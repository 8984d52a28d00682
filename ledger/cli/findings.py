"""CLI commands for findings and comparisons: flags, compare, standings, advise.

Thin shells over :meth:`ledger.Ledger.flags`, :meth:`~ledger.Ledger.compare`,
:meth:`~ledger.Ledger.standings` and :meth:`~ledger.Ledger.advise`; every threshold is an
option whose default is the library's. ``advise --save`` stores the incumbent in the ledger
(setting "incumbent"), so later ``advise`` calls may omit ``--incumbent``.
"""

from __future__ import annotations

import enum
from typing import Annotated

import typer

from ..api import Ledger
from .common import (
    AsOfOpt,
    Format,
    IncludeExcludedOpt,
    FormatOpt,
    app,
    busy,
    emit,
    notice,
    open_ledger,
    say,
)
from .engines import Engine, EngineOpt, LakeOpt, SparkMasterOpt, reading_ledger
from .filters import with_selection
from .thresholds import with_thresholds
from ..findings.summary import finding_counts
from .cycle import FailOnOpt, check_fail_on, gate

__all__ = ["flags", "compare", "standings", "advise"]

class Kind(str, enum.Enum):
    drift = "drift"
    calibration = "calibration"
    quantiles = "quantiles"
    value = "value"
    data = "data"


class SeverityOpt(str, enum.Enum):
    act = "act"
    watch = "watch"
    note = "note"


def _either(choices: type[enum.Enum]) -> str:
    """'a, b or c' from an option's choices, so that the help cannot fall behind them."""
    names = [c.value for c in choices]
    return f"{', '.join(names[:-1])} or {names[-1]}"


AlphaOpt = Annotated[float, typer.Option("--alpha", metavar="X", help="Significance level of the DM-HLN test (two-sided).")]
# One row per finding in the table; impact and action when the findings carry them.
_FLAG_TABLE = ["kind", "severity", "series", "model", "horizons", "level", "since", "figure", "impact", "check", "action"]


@app.command()
@with_thresholds
@with_selection()
def flags(
    ctx: typer.Context,
    kind: Annotated[list[Kind] | None, typer.Option("--kind", metavar="KIND", help=f"Only findings of this kind: {_either(Kind)} (repeatable).")] = None,
    severity: Annotated[list[SeverityOpt] | None, typer.Option("--severity", metavar="SEVERITY", help=f"Only findings of this severity: {_either(SeverityOpt)} (repeatable).")] = None,
    chosen: dict | None = None,
    by: Annotated[str | None, typer.Option("--by", metavar="ATTR", help="Count findings per value of this series attribute and kind.")] = None,
    long: Annotated[bool, typer.Option("--long", help="After the table, each finding's evidence as a sentence.")] = False,
    include_excluded: IncludeExcludedOpt = False,
    fail_on: FailOnOpt = None,
    as_of: AsOfOpt = None,
    fmt: FormatOpt = Format.table,
    engine: EngineOpt = Engine.duckdb,
    lake: LakeOpt = None,
    spark_master: SparkMasterOpt = None,
    thresholds: dict | None = None,
) -> None:
    """Findings: drifting models, miscalibrated intervals, no value added, data problems."""
    if fail_on is not None and by is not None:
        raise typer.BadParameter("--fail-on needs the findings themselves; leave out --by", param_hint="--fail-on")
    check_fail_on(fail_on)
    chosen = dict(chosen, kinds=[k.value for k in kind or []], severities=[s.value for s in severity or []],
                  include_excluded=include_excluded)
    with reading_ledger(ctx, engine, lake, spark_master) as book, busy("Checking"):
        if by is not None:
            frame = book.flag_counts(by, as_of=as_of, **chosen, **thresholds)
        else:
            frame = book.flags(as_of=as_of, **chosen, **thresholds)
    if by is not None:
        emit(frame, fmt, title=f"Findings by {by} and kind")
        return
    if fmt is not Format.table:
        emit(frame, fmt)
    elif frame.empty:
        notice("no findings in the selection")
    else:
        _print_findings(frame, fmt, long)
    gate(frame, fail_on)


def _print_findings(frame, fmt: Format, long: bool) -> None:
    say(finding_counts(frame))
    table = frame[[c for c in _FLAG_TABLE if c in frame.columns]].copy()
    table.insert(0, "#", range(1, len(frame) + 1))
    emit(table, fmt, title="Findings (e = actual − forecast)")
    if long:
        for i, row in enumerate(frame.itertuples(index=False), start=1):
            where_ = "".join(f" {x}" for x in (row.model, row.series) if x)   # no empty name in the sentence
            say(f"{i}. {row.kind}{where_}: {row.evidence}")


@app.command()
@with_selection(models=False)
def compare(
    ctx: typer.Context,
    a: Annotated[str, typer.Argument(metavar="MODEL_A", help="Model a: the incumbent or reference.")],
    b: Annotated[str, typer.Argument(metavar="MODEL_B", help="Model b: the challenger.")],
    chosen: dict | None = None,
    as_of: AsOfOpt = None,
    alpha: AlphaOpt = 0.05,
    fmt: FormatOpt = Format.table,
) -> None:
    """Compare two models per horizon on common cells: MAE, MASE, relative MAE, win share, DM-HLN."""
    with open_ledger(ctx) as book, busy("Comparing"):
        frame = book.compare(a, b, as_of=as_of, alpha=alpha, **chosen)
    verdict = frame.attrs.get("verdict", "")
    if fmt is Format.table:
        if not frame.empty:
            emit(frame, fmt, title=f"a = {a}, b = {b} (relative MAE = MAE_b / MAE_a; positive DM: b more accurate)")
        say(f"Verdict: {verdict}")
        return
    emit(frame, fmt)


@app.command()
@with_selection()
def standings(
    ctx: typer.Context,
    chosen: dict | None = None,
    periods: Annotated[bool, typer.Option("--periods", help="The per-period table (each period's MASE, rank, share of series won) instead of the per-model summary.")] = False,
    recent: Annotated[int, typer.Option("--recent", metavar="N", min=1, help="Evaluation periods behind the summary's recent MASE.")] = 12,
    as_of: AsOfOpt = None,
    fmt: FormatOpt = Format.table,
) -> None:
    """Who ranks first how often: a per-model summary, or per evaluation period with --periods."""
    with open_ledger(ctx) as book, busy("Ranking"):
        frame = book.standings(as_of=as_of, **chosen) if periods else \
            book.standings_summary(recent=recent, as_of=as_of, **chosen)
    if fmt is Format.table and frame.empty:
        notice("no common scored cells with a scale in the selection: nothing to rank")
        return
    if periods:
        emit(frame, fmt, title="Standings per period (rank 1 = lowest MASE)")
        return
    emit(frame, fmt, title=f"Standings: periods ranked first, median rank, MASE over the last {recent} "
                           "periods (rank 1 = lowest MASE; --periods for each period)")


# advise's --horizon says what a horizon means to the advice
_AdviseHorizonOpt = Annotated[list[int] | None, typer.Option("--horizon", metavar="N", help="A horizon that matters (repeatable; default all).")]


@app.command()
@with_selection(models=False, horizon=_AdviseHorizonOpt)
def advise(
    ctx: typer.Context,
    incumbent: Annotated[str | None, typer.Option("--incumbent", metavar="MODEL", help="The model in use (default: the stored incumbent).")] = None,
    save: Annotated[bool, typer.Option("--save", help="Store --incumbent in the ledger for later calls.")] = False,
    challenger: Annotated[list[str] | None, typer.Option("--challenger", metavar="MODEL", help="Only this challenger (repeatable; default all).")] = None,
    window: Annotated[int, typer.Option("--window", metavar="N", help="Evaluation periods in the recent window.")] = 12,
    chosen: dict | None = None,
    alpha: AlphaOpt = 0.05,
    as_of: AsOfOpt = None,
    fmt: FormatOpt = Format.table,
) -> None:
    """Should a challenger replace the incumbent? A recommendation only when the evidence holds."""
    if save:
        if not incumbent:
            raise typer.BadParameter("--save needs --incumbent MODEL", param_hint="--save")
        with Ledger.open(ctx.obj["ledger"], create=False) as book:
            book.set_incumbent(incumbent)
        notice(f"incumbent set to {incumbent}")
    with open_ledger(ctx) as book, busy("Advising"):
        frame = book.advise(incumbent, challengers=challenger or (), window=window, alpha=alpha, as_of=as_of,
                            **chosen)
    if fmt is not Format.table:
        emit(frame, fmt)
        return
    if frame.empty:
        notice("no challenger shares scored cells with the incumbent in the selection")
        return
    emit(frame[["incumbent", "challenger", "recommend", "reason", "periods", "rel_mae", "series_won"]], fmt,
         title="Replacement advice (recent window; relative MAE = challenger / incumbent)")
    for line in frame["advice"]:
        say(line)
