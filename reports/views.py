"""View-models of the overview, model, findings and series-index pages, built from :class:`LedgerData`.

Each page's data is a small frozen dataclass of plain values (text, numbers, lists), prepared
apart from the templates that render it; the gold-file test serialises them to JSON. Numbers
are kept as numbers (percentages on a 0–100 scale, coverage as a percentage); sentences carry
their sample sizes. Sign convention: e = actual − forecast, so positive bias is "too low".
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Sequence

import pandas as pd

from ledger.wording import format_level, num, pct, plural

from . import charts
from .coverage import CoverageCell, coverage_cell
from .data import LedgerData
from .matrix import Matrix, build_matrix
from .review import Review, build_review, rank_flags
from .trends import fva_chart, fva_table, trend_charts
from .value_added import FvaRow, default_benchmark
from .text import (
    bias_words,
    coverage_words,
    is_small,
    sample_note,
    tolerance_band,
)

__all__ = [
    "INDEX_FINDINGS",
    "AdviceRow",
    "CompareRow",
    "ComparisonView",
    "Context",
    "CoverageCell",
    "FindingRow",
    "Footer",
    "Link",
    "MetricRow",
    "ModelView",
    "Overview",
    "SeriesIndexRow",
    "build_model",
    "build_overview",
    "build_series_index",
    "coverage_cell",
    "finding_rows",
    "levels_of",
]

#: Findings rows shown on the overview; the findings page lists them all.
INDEX_FINDINGS = 40


@dataclasses.dataclass(frozen=True)
class Link:
    text: str
    href: str


@dataclasses.dataclass(frozen=True)
class Footer:
    as_of: str
    state_hash: str
    version: str
    generated_at: str
    selection: str


@dataclasses.dataclass(frozen=True)
class Context:
    """What every page shares: title, footer, navigation, page names and chart styles."""

    title: str
    footer: Footer
    models: list[Link]
    model_href: dict[str, str]
    series_href: dict[str, str]
    styles: dict[str, dict]
    levels: list[float]
    horizon: int
    findings_note: str | None    # shown above findings when --since/--until narrow the tables only


@dataclasses.dataclass(frozen=True)
class MetricRow:
    model: str
    href: str
    horizon: int | None
    n: int
    mae: float
    rmse: float
    mape: float
    smape: float
    wape: float
    mase: float
    rmsse: float
    bias_pct: float
    bias_text: str
    n_zero_actual: int
    n_unscaled: int
    coverage: list[CoverageCell]
    best: bool
    small: bool


@dataclasses.dataclass(frozen=True)
class FindingRow:
    kind: str
    severity: str
    series: str
    series_href: str
    model: str
    model_href: str
    horizon: str
    level: str
    since: str
    figure: float
    evidence: str


@dataclasses.dataclass(frozen=True)
class CompareRow:
    horizon: int
    n: int
    mae_a: float
    mae_b: float
    rel_mae: float
    win_share_b: float
    dm_statistic: float
    p_value: float
    better: str
    verdict: str
    small: bool


@dataclasses.dataclass(frozen=True)
class ComparisonView:
    a: Link
    b: Link
    verdict: str
    rows: list[CompareRow]


@dataclasses.dataclass(frozen=True)
class AdviceRow:
    challenger: str
    recommend: bool
    reason: str
    advice: str
    periods: int
    rel_mae: float
    mase_incumbent: float
    mase_challenger: float
    series_won: float


@dataclasses.dataclass(frozen=True)
class Overview:
    title: str
    as_of: str
    period_first: str
    period_last: str
    counts: dict[str, int]
    review: Review
    matrix: Matrix
    headlines: list[str]
    horizon: int
    levels: list[float]
    trend_charts: list[charts.Chart]
    charts: list[charts.Chart]
    chart_notes: list[str]
    benchmark: str | None
    fva: list[FvaRow]
    fva_chart: charts.Chart | None
    fva_note: str
    findings: list[FindingRow]
    findings_total: int
    findings_by_kind: dict[str, int]
    incumbent: str | None
    advice: list[AdviceRow]
    advice_note: str


@dataclasses.dataclass(frozen=True)
class ModelView:
    name: str
    href: str
    summary: list[str]
    by_horizon: list[MetricRow]
    levels: list[float]
    chart: charts.Chart | None
    findings: list[FindingRow]
    findings_total: int
    comparisons: list[ComparisonView]


@dataclasses.dataclass(frozen=True)
class SeriesIndexRow:
    key: str
    href: str
    frequency: str
    n: int
    best_model: str
    best_mase: float
    findings: int


# ---------------------------------------------------------------- shared pieces


def _f(x) -> float:
    """A plain float (NaN for missing), whatever pandas gave."""
    return float(x) if x is not None and not pd.isna(x) else math.nan


def levels_of(frame: pd.DataFrame) -> list[float]:
    """Interval levels present as coverage_L columns, ascending."""
    return sorted(float(c.split("_", 1)[1]) for c in frame.columns if c.startswith("coverage_"))


def _coverage(counts: pd.DataFrame, levels: Sequence[float]) -> list[CoverageCell]:
    out = []
    for level in levels:
        hit = counts[counts["level"] == level]
        n, misses = (int(hit["n"].sum()), int(hit["misses"].sum())) if len(hit) else (0, 0)
        out.append(coverage_cell(level, n, misses))
    return out


def metric_row(r, href: str, counts: pd.DataFrame, levels: Sequence[float], *, best: bool = False) -> MetricRow:
    """One row of accuracy figures (a row of ``Ledger.scores``) with its interval coverage."""
    return MetricRow(
        model=str(r["model"]), href=href, horizon=int(r["horizon"]) if "horizon" in r else None,
        n=int(r["n"]), mae=_f(r["mae"]), rmse=_f(r["rmse"]), mape=_f(r["mape"]), smape=_f(r["smape"]),
        wape=_f(r["wape"]), mase=_f(r["mase"]), rmsse=_f(r["rmsse"]), bias_pct=_f(r["bias_pct"]),
        bias_text=bias_words(_f(r["bias_pct"])), n_zero_actual=int(r["n_zero_actual"]),
        n_unscaled=int(r["n_unscaled"]), coverage=_coverage(counts, levels), best=best, small=is_small(int(r["n"])))


def _text(v) -> str:
    return "" if v is None or (not isinstance(v, str) and pd.isna(v)) else str(v)


def finding_rows(flags: pd.DataFrame, ctx: Context) -> list[FindingRow]:
    """Flags as table rows, with links to the series and model pages."""
    rows = []
    has_sev = "severity" in flags.columns
    for r in flags.to_dict("records"):
        series, model = _text(r["series"]), _text(r["model"])
        horizon = "" if pd.isna(r["horizon"]) else str(int(r["horizon"]))
        if not horizon and _text(r.get("horizons")):
            horizon = _text(r.get("horizons"))
        level = "" if pd.isna(r["level"]) else f"{format_level(r['level'])}%"
        rows.append(FindingRow(
            kind=_text(r["kind"]), severity=_text(r["severity"]) if has_sev else "", series=series,
            series_href=ctx.series_href.get(series, ""), model=model, model_href=ctx.model_href.get(model, ""),
            horizon=horizon, level=level, since=_text(r["since"]), figure=_f(r["figure"]),
            evidence=_text(r["evidence"])))
    return rows


# ---------------------------------------------------------------- overview


def build_overview(data: LedgerData, ctx: Context) -> Overview:
    """The overview page: the review first, then the matrix, trends, value added, findings, advice."""
    all_periods = _scored_period_range(data)
    counts = {"series": len(data.series), "models": len(data.models), "runs": len(data.runs),
              "cells_scored": int(data.by_model_h["n"].sum()) if len(data.by_model_h) else 0,
              "cells_pending": data.pending,
              "cells_excluded": int(data.by_model_h["n_excluded"].sum()) if "n_excluded" in data.by_model_h else 0}
    flag_rows = finding_rows(rank_flags(data.findings.flags), ctx)
    chart_list, notes = _overview_charts(data, ctx)
    trends, trend_notes = trend_charts(data.by_model_period, data.findings.standings, data.findings.flags,
                                       data.models, ctx.styles, data.horizon)
    benchmark = default_benchmark(data.models, data.benchmark)
    return Overview(
        title=ctx.title, as_of=ctx.footer.as_of, period_first=all_periods[0], period_last=all_periods[1],
        counts=counts, review=build_review(data, ctx, counts, all_periods),
        matrix=build_matrix(data.by_model_h, data.intervals, ctx.levels, ctx.model_href),
        headlines=_headlines(data, ctx, counts), horizon=data.horizon,
        levels=ctx.levels, trend_charts=trends, charts=chart_list, chart_notes=trend_notes + notes,
        benchmark=benchmark, fva=fva_table(data.findings.value_added),
        fva_chart=fva_chart(data.findings.value_added, ctx.styles), fva_note=_fva_note(data, benchmark),
        findings=flag_rows[:INDEX_FINDINGS], findings_total=len(flag_rows),
        findings_by_kind=_count_kinds(flag_rows), incumbent=data.incumbent, advice=_advice_rows(data),
        advice_note=_advice_note(data))


def _fva_note(data: LedgerData, benchmark: str | None) -> str:
    if benchmark is None and not data.overrides:
        return ("No benchmark in the ledger: record a seasonal-naive reference (backsight backtest … --methods snaive) "
                "or name one with --benchmark MODEL; declare overrides with --adjusts OVERRIDE=BASE.")
    if data.findings.value_added.empty:
        return "The benchmark and the models share no scored cell with a scale yet, so no value added can be measured."
    return ""


def _scored_period_range(data: LedgerData) -> tuple[str, str]:
    """First and last target period scored (at the chosen horizon; '–' when none)."""
    p = data.by_model_period["period"] if len(data.by_model_period) else []
    return (str(min(p)), str(max(p))) if len(p) else ("–", "–")


def _count_kinds(rows: list[FindingRow]) -> dict[str, int]:
    out: dict[str, int] = {}
    for r in rows:
        out[r.kind] = out.get(r.kind, 0) + 1
    return dict(sorted(out.items()))


def _headlines(data: LedgerData, ctx: Context, counts: dict) -> list[str]:
    """The figures in words: scope, then each model's recent accuracy, bias and coverage."""
    return [_scope_sentence(counts)] + _model_sentences(data, ctx)


def _scope_sentence(counts: dict) -> str:
    return (f"The ledger holds {plural(counts['series'], 'series', 'series')}, "
            f"{plural(counts['models'], 'model')} and {plural(counts['runs'], 'live run')}; "
            f"{counts['cells_scored']:,} forecasts have been scored against actuals and "
            f"{counts['cells_pending']:,} await their actuals.")


def _model_sentences(data: LedgerData, ctx: Context) -> list[str]:
    w = data.window
    if not len(data.headline) or w.first is None:
        return ["No forecast has been scored yet: no actual has arrived for any forecast in the selection."]
    span = f"Over the last {plural(w.length, w.unit.rstrip('s'), w.unit)} ({w.first} to {w.last})"
    order = list(data.headline.sort_values(["mase", "model"], na_position="last")["model"])
    if data.incumbent in order:
        order = [data.incumbent] + [m for m in order if m != data.incumbent]
    out = []
    for model in order[:6]:
        r = data.headline[data.headline["model"] == model].iloc[0]
        who = f"{model}'s (the incumbent)" if model == data.incumbent else f"{model}'s"
        acc = (f"{data.horizon}-step MAPE was {pct(_f(r['mape']))}" if not pd.isna(r["mape"])
               else f"{data.horizon}-step WAPE was {pct(_f(r['wape']))}")
        text = f"{span}, {who} {acc} and MASE {num(_f(r['mase']))} ({sample_note(int(r['n']))}), {bias_words(_f(r['bias_pct']))}"
        text += _coverage_clause(data, model) + "."
        out.append(text)
    return out


def _coverage_clause(data: LedgerData, model: str) -> str:
    counts = data.headline_intervals[data.headline_intervals["model"] == model]
    if counts.empty:
        return "; it has no prediction intervals"
    level = 80.0 if (counts["level"] == 80).any() else float(counts["level"].iloc[0])
    cell = coverage_cell(level, int(counts.loc[counts["level"] == level, "n"].sum()),
                         int(counts.loc[counts["level"] == level, "misses"].sum()))
    scored = data.headline.loc[data.headline["model"] == model, "n"]
    of = int(scored.iloc[0]) if len(scored) else cell.n
    over = f", over {cell.n:,} of {of:,} scored cells" if cell.n < of else ""
    return (f"; its {format_level(level)}% intervals {coverage_words(cell.observed, level, cell.direction, cell.zone)} "
            f"({sample_note(cell.n)}{over})")


def _advice_rows(data: LedgerData) -> list[AdviceRow]:
    if data.findings.advice is None:
        return []
    return [AdviceRow(challenger=str(r["challenger"]), recommend=bool(r["recommend"]), reason=_text(r["reason"]),
                      advice=_text(r["advice"]), periods=int(r["periods"]), rel_mae=_f(r["rel_mae"]),
                      mase_incumbent=_f(r["mase_incumbent"]), mase_challenger=_f(r["mase_challenger"]),
                      series_won=_f(r["series_won"])) for r in data.findings.advice.to_dict("records")]


def _advice_note(data: LedgerData) -> str:
    if not data.incumbent:
        return "No incumbent model was named (--incumbent MODEL), so no replacement advice is given."
    if data.findings.advice is None:
        return f"{data.incumbent} is the only scored model; there is no challenger to compare it with."
    return ("Advice is a statistical summary for the people accountable for the decision; "
            "it does not make the decision.")


# ---------------------------------------------------------------- overview charts


def _pivot(frame: pd.DataFrame, index: str, column: str, models: Sequence[str]) -> tuple[list, dict]:
    table = frame.pivot_table(index=index, columns="model", values=column, aggfunc="first", sort=True)
    keys = [str(k) for k in table.index]
    return keys, {m: [float(v) for v in table[m]] for m in models if m in table.columns}


def _overview_charts(data: LedgerData, ctx: Context) -> tuple[list[charts.Chart], list[str]]:
    """MASE by horizon and interval calibration (the trends are :func:`reports.trends.trend_charts`)."""
    out, notes = [], []
    scaled = data.by_model_h[data.by_model_h["mase"].notna()] if len(data.by_model_h) else data.by_model_h
    if len(scaled):
        hs, values = _pivot(scaled, "horizon", "mase", data.models)
        out.append(charts.horizon_chart(
            "c-horizon", "MASE by horizon, all scored periods",
            f"One line per model across horizons {hs[0]} to {hs[-1]}; errors usually grow with the horizon. "
            + "; ".join(f"{m}: {num(v[0])} at h={hs[0]}, {num(v[-1])} at h={hs[-1]}" for m, v in values.items()) + ".",
            [int(x) for x in hs], values, ctx.styles, ylabel="MASE (lower is better)"))
    if len(data.intervals):
        out.append(_calibration(data, ctx))
    return out, notes


def _calibration(data: LedgerData, ctx: Context) -> charts.Chart:
    pooled = data.intervals.groupby(["model", "level"], as_index=False)[["n", "misses"]].sum()
    points, words = [], []
    for r in pooled.to_dict("records"):
        cell = coverage_cell(float(r["level"]), int(r["n"]), int(r["misses"]))
        low, high = tolerance_band(cell.n, cell.level)
        points.append(charts.CalibrationPoint(str(r["model"]), cell.level, cell.observed, low, high, cell.n))
        words.append(f"{r['model']} {format_level(cell.level)}%: {cell.observed:.0f}% observed ({cell.direction}, {sample_note(cell.n)})")
    return charts.calibration_chart(
        "c-calibration", "Interval coverage: observed against nominal, all horizons",
        "Markers are observed coverage; grey bars are the range a model with honest intervals would stay "
        "within 90% of the time (binomial, given its number of cells); the dashed line is coverage as stated. "
        + "; ".join(words) + ".", points, ctx.styles)


# ---------------------------------------------------------------- model pages


def build_model(data: LedgerData, ctx: Context, model: str) -> ModelView:
    """A model's page: metrics and coverage by horizon, its findings, its comparisons."""
    part = data.by_model_h[data.by_model_h["model"] == model]
    counts = data.intervals[data.intervals["model"] == model]
    rows = [metric_row(r, ctx.model_href[model], counts[counts["horizon"] == r["horizon"]], ctx.levels)
            for r in part.to_dict("records")]
    flags = data.findings.flags
    mine = finding_rows(rank_flags(flags[flags["model"] == model]), ctx)
    return ModelView(
        name=model, href=ctx.model_href[model], summary=_model_summary(data, model, rows),
        by_horizon=rows, levels=ctx.levels, chart=_coverage_chart(model, rows, ctx),
        findings=mine[:200], findings_total=len(mine), comparisons=_comparisons(data, ctx, model))


def _model_summary(data: LedgerData, model: str, rows: list[MetricRow]) -> list[str]:
    if not rows:
        return [f"No forecast of {model} has been scored yet."]
    n = sum(r.n for r in rows)
    runs = int((data.runs["model"] == model).sum())
    lines = [f"{model}: {plural(runs, 'live run')}, {n:,} scored forecasts over horizons "
             f"{rows[0].horizon} to {rows[-1].horizon}."]
    first = rows[0]
    lines.append(f"At horizon {first.horizon}: MAPE {pct(first.mape)}, MASE {num(first.mase)}, "
                 f"{first.bias_text} ({sample_note(first.n)}).")
    return lines


def _coverage_chart(model: str, rows: list[MetricRow], ctx: Context) -> charts.Chart | None:
    if not rows or not ctx.levels or all(c.n == 0 for r in rows for c in r.coverage):
        return None
    hs = [r.horizon for r in rows]
    names = {lv: f"{format_level(lv)}% interval" for lv in ctx.levels}
    values = {names[lv]: [r.coverage[i].observed for r in rows] for i, lv in enumerate(ctx.levels)}
    styles = charts.level_styles(list(values))
    words = "; ".join(f"{name}: {num(v[0])}% at h={hs[0]}, {num(v[-1])}% at h={hs[-1]}" for name, v in values.items())
    return charts.horizon_chart(
        "c-coverage",
        f"{model}: interval coverage by horizon",
        f"One line per interval level; dotted lines mark the stated levels. {words}.",
        hs, values, styles, ylabel="Coverage (% of actuals inside)", references=ctx.levels)


def _comparisons(data: LedgerData, ctx: Context, model: str) -> list[ComparisonView]:
    out = []
    for (a, b), frame in data.findings.comparisons.items():
        if model not in (a, b):
            continue
        rows = [CompareRow(horizon=int(r["horizon"]), n=int(r["n"]), mae_a=_f(r["mae_a"]), mae_b=_f(r["mae_b"]),
                           rel_mae=_f(r["rel_mae"]), win_share_b=_f(r["win_share_b"]),
                           dm_statistic=_f(r["dm_statistic"]), p_value=_f(r["p_value"]),
                           better=_text(r["better"]), verdict=_text(r["verdict"]), small=is_small(int(r["n"])))
                for r in frame.to_dict("records")]
        out.append(ComparisonView(Link(a, ctx.model_href.get(a, "")), Link(b, ctx.model_href.get(b, "")),
                                  _text(frame.attrs.get("verdict", "")), rows))
    return out


# ---------------------------------------------------------------- series index


def build_series_index(data: LedgerData, ctx: Context) -> list[SeriesIndexRow]:
    """One row per series: frequency, scored cells, best model by MASE, number of findings."""
    per = data.by_series_model
    n = per.groupby("series")["n"].sum() if len(per) else pd.Series(dtype="int64")
    ranked = per[per["mase"].notna()].sort_values(["series", "mase", "model"]) if len(per) else per
    best = ranked.drop_duplicates("series").set_index("series") if len(ranked) else pd.DataFrame()
    flags = data.findings.flags
    fcount = flags[flags["series"] != ""].groupby("series").size() if len(flags) else {}
    rows = []
    for r in data.series.to_dict("records"):
        key = r["series"]
        b = best.loc[key] if key in best.index else None
        rows.append(SeriesIndexRow(key, ctx.series_href.get(key, ""), r["frequency"], int(n.get(key, 0)),
                                   str(b["model"]) if b is not None else "", _f(b["mase"]) if b is not None else math.nan,
                                   int(fcount.get(key, 0)) if len(fcount) else 0))
    return rows
