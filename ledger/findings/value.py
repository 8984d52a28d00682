"""Value-added findings: is a model more accurate than a simple benchmark?

Value added of a model over the benchmark (seasonal naive by default), on common cells of the
recent window (the last ``recent`` common evaluation periods, default 12):
VA = 1 - MAE_model / MAE_benchmark. Positive: the model's errors are smaller; VA <= 0: the
model adds no value, and that is a finding. Orientation: higher is better.

Significance statement: Diebold-Mariano with the Harvey-Leybourne-Newbold correction
(:func:`ledger.stats.comparison.dm_hln`) on the per-period mean of absolute scaled loss differentials
(benchmark minus model; positive: the model more accurate), pooled over horizons. The pooled
series carries overlap up to the longest horizon H, but a 12-period window cannot support
H - 1 autocovariances, so the test uses h = min(H, max(1, floor(n / 3))) with n periods; a
bandwidth cap, common practice, no source.

Per series: noise alone puts many series of a good model at or below zero over 12 periods, so
a series-level finding needs VA <= 0 *and* the benchmark significantly more accurate on that
series (one-sided DM-HLN, Benjamini-Hochberg across the model's series, level ``value_alpha``).

One problem, one finding: where the model as a whole adds no value, its significant series go
into that finding's evidence; otherwise each is a finding of its own (``watch``). Severity of a
model-level finding: ``act`` when the benchmark is significantly more accurate, else ``watch``.
Action: use the benchmark instead, with the number of series on which the model's recent MAE
was above the benchmark's (its figure). Impact: sum over the recent common cells of
(|e_model| - |e_benchmark|) / q, in percent of the ledger's total (:mod:`ledger.findings.base`).

Overrides (:mod:`ledger.overrides`): a model that adjusts another (a planner's override of the
incumbent) is also judged against the model it adjusts, its base, by the same rule at model level
(check "no value added over its base"): the value each step of the forecasting process adds.
An override that adds no value over either is one finding, the step's, with the benchmark's
evidence appended.

Default benchmark: a model named "ref-snaive" (the seasonal-naive reference that Backsight's
backtests record), else the first model, alphabetically, whose name contains "snaive",
"seasonal-naive" or "seasonal_naive" (case-insensitive). With none, the check is skipped with a
note.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Mapping, Sequence

import numpy as np
from ..lazy import pandas as pd

from ..stats.intervals import benjamini_hochberg
from ..stats.comparison import DMResult, dm_hln
from .base import OVER_BASE, Finding, FlagOptions
from ..wording import label, pval, severity_rank, short_num as num
from .drift_actions import share
from .standings import paired, period_differential

__all__ = ["default_benchmark", "value_findings", "BENCHMARK_HINTS"]

BENCHMARK_HINTS = ("snaive", "seasonal-naive", "seasonal_naive")


def default_benchmark(models: Sequence[str]) -> str | None:
    """The benchmark used when none is given: see the module docstring."""
    exact = [m for m in models if m.lower() == "ref-snaive"]
    if exact:
        return exact[0]
    hits = sorted(m for m in models if any(h in m.lower() for h in BENCHMARK_HINTS))
    return hits[0] if hits else None


def value_findings(cells: pd.DataFrame, subjects: Sequence[str], known: Sequence[str],
                   options: FlagOptions, *, total: float = math.nan,
                   overrides: Mapping[str, str] | None = None) -> list[Finding]:
    """Value-added findings for each model in ``subjects`` against the benchmark, and for each
    override in ``subjects`` against the model it adjusts (``overrides``: {override: base});
    ``total`` is the denominator of impact."""
    if cells.empty:
        return []
    out = _override_value(cells, subjects, overrides or {}, options, total)
    bench = options.benchmark or default_benchmark(known)
    if bench is None:
        return out + [_no_benchmark_note()]
    for model in subjects:
        if model == bench or not (cells["model"] == model).any():
            continue
        pairs = paired(cells, bench, model)
        if pairs.empty:
            out.append(_no_common_note(model, bench))
            continue
        periods = np.sort(pairs["period_index"].unique())
        recent = pairs[pairs["period_index"].isin(periods[-options.recent:])]
        whole = _model_value(recent, model, bench, options, total)
        series = _series_value(recent, model, bench, options, total)
        if whole and series:
            names = ", ".join(f.series for f in series)
            whole = [dataclasses.replace(whole[0], evidence=f"{whole[0].evidence}; significantly worse than "
                                         f"{bench} on {len(series):,} series: {names}")]
            series = []
        out += whole + series
    return _one_per_override(out)


def _one_per_override(found: list[Finding]) -> list[Finding]:
    """An override that adds no value over its base nor over the benchmark is one problem: the
    benchmark's finding goes into the step's evidence (impact the larger of the two, not their
    sum, since both count the same excess errors; severity the more severe)."""
    steps = {f.model: f for f in found if f.check == OVER_BASE and f.severity != "note"}
    folded = {f.model: f for f in found if f.model in steps and f.series == "" and f.check == "no value added"}
    out = []
    for f in found:
        if f.check == OVER_BASE and f.model in folded:
            other = folded[f.model]
            f = dataclasses.replace(f, evidence=f"{f.evidence}; and {other.evidence}",
                                    impact=max(f.impact, other.impact),
                                    severity=min(f.severity, other.severity, key=severity_rank))
        elif f.model in folded and f is folded[f.model]:
            continue
        out.append(f)
    return out


def _dm(pairs: pd.DataFrame, alternative: str) -> DMResult:
    d = period_differential(pairs)
    h = min(int(pairs["horizon"].max()), max(1, d.size // 3))
    return dm_hln(d, h=h, alternative=alternative)


def _window_text(recent: pd.DataFrame, bench: str, where: str) -> tuple[str, str]:
    freq = str(recent["frequency"].iloc[0])
    since = label(int(recent["period_index"].min()), freq)
    k = int(recent["period_index"].nunique())
    return since, f"no value added over {bench}{where} in the last {k} evaluation periods (since {since})"


def _figures(recent: pd.DataFrame) -> tuple[float, float, float]:
    mae_model, mae_bench = float(recent["e_b"].abs().mean()), float(recent["e_a"].abs().mean())
    va = 1 - mae_model / mae_bench if mae_bench > 0 else math.nan
    return mae_model, mae_bench, va


def _excess(recent: pd.DataFrame) -> float:
    """Sum of (|e_model| - |e_benchmark|) / q over the common cells with a scale."""
    return float(np.nansum(recent["loss_b"].to_numpy(dtype=float) - recent["loss_a"].to_numpy(dtype=float)))


def _worse_series(recent: pd.DataFrame) -> tuple[int, int]:
    per = recent.assign(a=recent["e_a"].abs(), b=recent["e_b"].abs()).groupby("series")[["a", "b"]].mean()
    return int((per["b"] > per["a"]).sum()), len(per)


def _override_value(cells: pd.DataFrame, subjects: Sequence[str], overrides: Mapping[str, str],
                    options: FlagOptions, total: float) -> list[Finding]:
    """Each override against the model it adjusts, on their recent common cells (model level only:
    the step is one decision for all series)."""
    out: list[Finding] = []
    for model, base in overrides.items():
        if model not in subjects or not (cells["model"] == model).any() or not (cells["model"] == base).any():
            continue
        pairs = paired(cells, base, model)
        if pairs.empty:
            out.append(_no_common_note(model, base, OVER_BASE))
            continue
        periods = np.sort(pairs["period_index"].unique())
        recent = pairs[pairs["period_index"].isin(periods[-options.recent:])]
        out += _model_value(recent, model, base, options, total, role="base")
    return out


def _model_value(recent: pd.DataFrame, model: str, bench: str, options: FlagOptions, total: float,
                 role: str = "benchmark") -> list[Finding]:
    """``role``: what ``bench`` is to ``model``, "benchmark" or "base" (the model an override adjusts)."""
    mae_model, mae_bench, va = _figures(recent)
    if not va <= 0:
        return []
    dm = _dm(recent, "two-sided")
    if not math.isfinite(dm.p_value):
        statement = "too few periods to test the difference"
    elif dm.p_value < options.value_alpha:
        statement = (f"the {role} is significantly more accurate (DM-HLN {pval(dm.p_value)})" if dm.statistic < 0
                     else f"though on scaled errors the model is significantly more accurate (DM-HLN {pval(dm.p_value)})")
    else:
        statement = f"the difference is not significant (DM-HLN {pval(dm.p_value)})"
    since, head = _window_text(recent, bench if role == "benchmark" else f"its base {bench}", "")
    text = f"{head}: MAE {num(mae_model)} vs {num(mae_bench)}, value added {va:+.0%}; {statement}"
    worse, n_series = _worse_series(recent)
    significant = math.isfinite(dm.p_value) and dm.p_value < options.value_alpha and dm.statistic < 0
    action = (f"use {bench} instead of {model}: over the same window {model} had the higher MAE on {worse} of "
              f"{n_series:,} series")
    return [Finding(kind="value", series="", model=model, horizon=None, level=None, since=since,
                    figure=va, evidence=text, check="no value added" if role == "benchmark" else OVER_BASE,
                    horizons="all", severity="act" if significant else "watch",
                    measure=f"value added (1 - MAE / {role} MAE)", p_value=dm.p_value, n=len(recent),
                    impact=share(max(0.0, _excess(recent)), total), action=action, action_figure=float(worse),
                    action_measure=f"series where the {role} was more accurate")]


def _series_value(recent: pd.DataFrame, model: str, bench: str, options: FlagOptions, total: float) -> list[Finding]:
    groups = [(str(s), g) for s, g in recent.groupby("series", sort=True)]
    figures = [_figures(g) for _, g in groups]
    # Every series is tested, not only those at or below zero, so that the family (and BH's m)
    # is not chosen after looking at the data.
    tests = [_dm(g, "less") for _, g in groups]
    raw = np.array([t.p_value for t in tests])
    if not np.isfinite(raw).any():
        return []
    adjusted = benjamini_hochberg(raw)
    out = []
    for (series, g), (mae_model, mae_bench, va), t, adj in zip(groups, figures, tests, adjusted):
        if not (va <= 0 and adj <= options.value_alpha):
            continue
        since, head = _window_text(g, bench, " on this series")
        text = (f"{head}: MAE {num(mae_model)} vs {num(mae_bench)}, value added {va:+.0%}; the benchmark is "
                f"significantly more accurate (DM-HLN one-sided {pval(t.p_value)}, adjusted {pval(adj)})")
        action = f"use {bench} for {series}: MAE {num(mae_bench)} against {num(mae_model)} over the window"
        out.append(Finding(kind="value", series=series, model=model, horizon=None, level=None, since=since,
                           figure=va, evidence=text, check="no value added", horizons="all", severity="watch",
                           measure="value added (1 - MAE / benchmark MAE)", p_value=float(adj), n=len(g),
                           impact=share(max(0.0, _excess(g)), total), action=action, action_figure=mae_bench,
                           action_measure=f"MAE of {bench}"))
    return out


def _no_benchmark_note() -> Finding:
    text = ("value added not judged: no benchmark model (none is named like a seasonal-naive reference "
            "such as ref-snaive); pass --benchmark MODEL")
    return Finding(kind="value", series="", model="", horizon=None, level=None, since="", figure=math.nan,
                   evidence=text, check="no benchmark", severity="note")


def _no_common_note(model: str, bench: str, check: str = "not enough data") -> Finding:
    text = f"value added not judged: {model} and {bench} share no scored cells"
    return Finding(kind="value", series="", model=model, horizon=None, level=None, since="", figure=math.nan,
                   evidence=text, check=check, severity="note")
