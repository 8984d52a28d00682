"""CLI commands for findings and comparisons: flags, compare, standings, advise.

Thin shells over :meth:`ledger.Ledger.flags`, :meth:`~ledger.Ledger.compare`,
:meth:`~ledger.Ledger.standings` and :meth:`~ledger.Ledger.advise`; every threshold is an
option whose default is the library's. ``advise --save`` stores the incumbent in the ledger
(setting "incumbent"), so later ``advise`` calls may omit ``--incumbent``.
"""

from __future__ import annotations

import functools

import enum
from typing import Annotated

import typer

from ..api import Ledger
from .common import (
    AsOfOpt,
    Format,
    FormatOpt,
    app,
    busy,
    emit,
    notice,
    open_ledger,
    split,
)
from ..findings.base import FlagOptions
from .common import IncludeExcludedOpt
from .cycle import FailOnOpt, check_fail_on, gate

__all__ = ["flags", "compare", "standings", "advise"]

_D = FlagOptions()


class Kind(str, enum.Enum):
    drift = "drift"
    calibration = "calibration"
    value = "value"
    data = "data"


class CorrectionOpt(str, enum.Enum):
    bh = "bh"
    holm = "holm"


HorizonOpt = Annotated[list[int] | None, typer.Option("--horizon", help="Only this horizon (repeatable).")]
AlphaOpt = Annotated[float, typer.Option("--alpha", help="Significance level of the DM-HLN test (two-sided).")]
_FLAG_TABLE = ["kind", "severity", "series", "model", "horizons", "level", "since", "figure", "check"]


@app.command()
def flags(
    ctx: typer.Context,
    kind: Annotated[list[Kind] | None, typer.Option("--kind", help="Only findings of this kind (repeatable).")] = None,
    model: Annotated[list[str] | None, typer.Option("--model", help="Only findings about this model (repeatable).")] = None,
    as_of: AsOfOpt = None,
    drift_k: Annotated[float, typer.Option("--drift-k", help="CUSUM allowance k, in reference sd.")] = _D.drift_k,
    drift_h: Annotated[float, typer.Option("--drift-h", help="CUSUM decision interval h, in reference sd.")] = _D.drift_h,
    reference: Annotated[int | None, typer.Option("--reference", help="Reference-window cells (default: two seasons, at least 8).")] = None,
    ts_window: Annotated[int | None, typer.Option("--ts-window", help="Tracking-signal window (default: one season, at least 6).")] = None,
    trigg_alpha: Annotated[float, typer.Option("--trigg-alpha", help="Smoothing constant of Trigg's signal.")] = _D.trigg_alpha,
    fdr: Annotated[float, typer.Option("--fdr", help="False-finding level across all calibration tests.")] = _D.fdr,
    correction: Annotated[CorrectionOpt, typer.Option("--correction", help="bh (Benjamini-Hochberg) or holm.")] = CorrectionOpt.bh,
    min_cells: Annotated[int, typer.Option("--min-cells", help="Fewer cells: not enough data to judge calibration.")] = _D.min_cells,
    series_calibration: Annotated[bool, typer.Option("--series-calibration/--no-series-calibration", help="Also test each series' intervals.")] = _D.series_calibration,
    buckets: Annotated[str, typer.Option("--buckets", help="Lower edges of the horizon buckets, comma list.")] = ",".join(map(str, _D.buckets)),
    zone_watch: Annotated[float, typer.Option("--zone-watch", help="Cumulative binomial probability that starts the watch zone.")] = _D.zone_watch,
    zone_out: Annotated[float, typer.Option("--zone-out", help="Cumulative binomial probability that starts out of tolerance.")] = _D.zone_out,
    benchmark: Annotated[str | None, typer.Option("--benchmark", help="Benchmark model for value added (default: one named like ref-snaive).")] = None,
    recent: Annotated[int, typer.Option("--recent", help="Evaluation periods in the recent window (value added).")] = _D.recent,
    value_alpha: Annotated[float, typer.Option("--value-alpha", help="Significance for series-level value findings.")] = _D.value_alpha,
    seasons: Annotated[int, typer.Option("--seasons", help="Report origins with less history than this many seasons.")] = _D.seasons,
    adi: Annotated[float, typer.Option("--adi", help="Average demand interval from which demand is intermittent.")] = _D.adi,
    by: Annotated[str | None, typer.Option("--by", metavar="ATTR", help="Count findings per value of this series attribute and kind.")] = None,
    include_excluded: IncludeExcludedOpt = False,
    fail_on: FailOnOpt = None,
    fmt: FormatOpt = Format.table,
) -> None:
    """Findings: drifting models, miscalibrated intervals, no value added, data problems."""
    if fail_on is not None and by is not None:
        raise typer.BadParameter("--fail-on needs the findings themselves; leave out --by", param_hint="--fail-on")
    check_fail_on(fail_on)
    parts = split([buckets])
    if not all(p.isdigit() for p in parts):
        raise typer.BadParameter(f"{buckets!r} is not a comma list of horizons such as 1,2,4,7,13", param_hint="--buckets")
    edges = [int(p) for p in parts]
    with open_ledger(ctx) as book, busy("Checking"):
        call = book.flags if by is None else functools.partial(book.flag_counts, by)
        frame = call(kinds=[k.value for k in kind or []], models=model or (), as_of=as_of,
                           drift_k=drift_k, drift_h=drift_h, reference=reference, ts_window=ts_window,
                           trigg_alpha=trigg_alpha, fdr=fdr, correction=correction.value, min_cells=min_cells,
                           series_calibration=series_calibration, buckets=tuple(edges), zone_watch=zone_watch,
                           zone_out=zone_out, benchmark=benchmark, recent=recent, value_alpha=value_alpha,
                           seasons=seasons, adi=adi, include_excluded=include_excluded)
    if by is not None:
        emit(frame, fmt, title=f"Findings by {by} and kind")
        return
    if fmt is Format.table:
        if frame.empty:
            notice("no findings")
            return
        table = frame[_FLAG_TABLE].copy()
        table.insert(0, "#", range(1, len(frame) + 1))
        emit(table, fmt, title="Findings (e = actual − forecast)")
        for i, row in enumerate(frame.itertuples(index=False), start=1):
            where = " ".join(x for x in (row.model, row.series) if x)
            typer.echo(f"{i}. {row.kind} {where}: {row.evidence}")
    else:
        emit(frame, fmt)
    gate(frame, fail_on)


@app.command()
def compare(
    ctx: typer.Context,
    a: Annotated[str, typer.Argument(help="Model a: the incumbent or reference.")],
    b: Annotated[str, typer.Argument(help="Model b: the challenger.")],
    horizon: HorizonOpt = None,
    as_of: AsOfOpt = None,
    alpha: AlphaOpt = 0.05,
    fmt: FormatOpt = Format.table,
) -> None:
    """Compare two models per horizon on common cells: MAE, MASE, relative MAE, win share, DM-HLN."""
    with open_ledger(ctx) as book, busy("Comparing"):
        frame = book.compare(a, b, horizons=horizon or (), as_of=as_of, alpha=alpha)
    verdict = frame.attrs.get("verdict", "")
    if fmt is Format.table:
        if not frame.empty:
            emit(frame, fmt, title=f"a = {a}, b = {b} (relative MAE = MAE_b / MAE_a; positive DM: b more accurate)")
        typer.echo(f"Verdict: {verdict}")
        return
    emit(frame, fmt)


@app.command()
def standings(
    ctx: typer.Context,
    horizon: HorizonOpt = None,
    model: Annotated[list[str] | None, typer.Option("--model", help="Only this model (repeatable).")] = None,
    as_of: AsOfOpt = None,
    fmt: FormatOpt = Format.table,
) -> None:
    """Per evaluation period: each model's MASE, rank and share of series won, on common cells."""
    with open_ledger(ctx) as book, busy("Ranking"):
        frame = book.standings(horizons=horizon or (), models=model or (), as_of=as_of)
    if fmt is Format.table and frame.empty:
        notice("no common scored cells with a scale: nothing to rank")
        return
    emit(frame, fmt, title="Standings (rank 1 = lowest MASE)")


@app.command()
def advise(
    ctx: typer.Context,
    incumbent: Annotated[str | None, typer.Option("--incumbent", help="The model in use (default: the stored incumbent).")] = None,
    save: Annotated[bool, typer.Option("--save", help="Store --incumbent in the ledger for later calls.")] = False,
    challenger: Annotated[list[str] | None, typer.Option("--challenger", help="Only this challenger (repeatable; default all).")] = None,
    window: Annotated[int, typer.Option("--window", help="Evaluation periods in the recent window.")] = 12,
    horizon: Annotated[list[int] | None, typer.Option("--horizon", help="A horizon that matters (repeatable; default all).")] = None,
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
        frame = book.advise(incumbent, challengers=challenger or (), window=window,
                            horizons=horizon or (), alpha=alpha, as_of=as_of)
    if fmt is not Format.table:
        emit(frame, fmt)
        return
    if frame.empty:
        notice("no challenger shares scored cells with the incumbent")
        return
    emit(frame[["incumbent", "challenger", "recommend", "reason", "periods", "rel_mae", "series_won"]], fmt,
         title="Replacement advice (recent window; relative MAE = challenger / incumbent)")
    for line in frame["advice"]:
        typer.echo(line)
