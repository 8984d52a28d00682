"""The view-model of a series page, built from one series' slice of the report data.

The site splits the ledger's frames by series once (one sort, not a query per series) into
:class:`SeriesInput` objects; :func:`build_series` turns one into a :class:`SeriesView`, chart
included. Inputs are plain, picklable values (NumPy columns, not small data frames: indexing
a thousand small frames took a tenth of the series pages' time), so series pages can be built
in worker processes.
Gaps in the actuals are kept as NaN slots: the chart breaks the line there and the page lists
them; nothing is filled in.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Sequence

import numpy as np
import pandas as pd

from ledger.stats.demand import demand_interval_stats, gaps
from ledger.wording import label, num, plural

from . import charts
from .text import SMALL_SAMPLE, bias_words, is_small

__all__ = ["HISTORY_SHOWN", "Columns", "LatestRow", "SeriesInput", "SeriesMetric", "SeriesView", "build_series", "metrics_for"]

#: Periods of history drawn before the latest forecasts (tables keep every scored cell).
HISTORY_SHOWN = 72

#: Columns of one series' slice of a frame: column name -> NumPy array (all of one length).
Columns = dict[str, np.ndarray]


@dataclasses.dataclass(frozen=True)
class SeriesMetric:
    model: str
    href: str
    n: int
    mape: float
    mase: float
    wape: float
    bias_pct: float
    bias_text: str
    coverage: dict[str, float]   # level label -> observed coverage in %
    cells: dict[str, int]        # level label -> n_L, the cells with that level's bounds
    n_unscaled: int
    small: bool


@dataclasses.dataclass(frozen=True)
class LatestRow:
    period: str
    horizon: int
    points: dict[str, float]                   # model -> point forecast
    bounds: dict[str, tuple[float, float]]     # level label -> (lower, upper) of the fan model


@dataclasses.dataclass
class SeriesInput:
    """One series' slice of the report data (see :mod:`reports.site`)."""

    key: str
    href: str
    frequency: str
    season_length: int
    horizon: int
    models: list[str]
    styles: dict[str, dict]
    model_href: dict[str, str]
    fan_preference: list[str]
    actual_index: np.ndarray
    actual_value: np.ndarray
    cells: Columns             # model, period_index, point, e (at the chosen horizon)
    latest: Columns            # model, origin_index, period_index, horizon, point, lower_L, upper_L
    metrics: list[SeriesMetric]
    findings: list             # FindingRow
    with_chart: bool = True
    cycle: object = None       # reports.cycle_views.SeriesCycle: events and forecast paths, or None


@dataclasses.dataclass(frozen=True)
class SeriesView:
    key: str
    href: str
    frequency: str
    season_length: int
    n_actuals: int
    first: str
    last: str
    horizon: int
    metrics: list[SeriesMetric]
    levels: list[str]
    fan_model: str
    fan_origin: str
    latest_models: list[str]
    latest: list[LatestRow]
    chart: charts.Chart | None
    legend: list[dict]          # label, color, line (CSS style), kind (line or band)
    findings: list
    notes: list[str]


def build_series(inp: SeriesInput) -> SeriesView:
    """Everything the series page shows, chart included (unless ``with_chart`` is False)."""
    freq = inp.frequency
    fan_model = _fan_model(inp)
    fan_rows = _rows(inp.latest, inp.latest["model"] == fan_model)
    levels = sorted({c.split("_", 1)[1] for c in fan_rows if c.startswith("lower_")
                     and pd.notna(fan_rows[c]).any()}, key=float)
    first = label(inp.actual_index[0], freq) if len(inp.actual_index) else "–"
    last = label(inp.actual_index[-1], freq) if len(inp.actual_index) else "–"
    fan_origin = label(int(fan_rows["origin_index"][0]), freq) if len(fan_rows["model"]) else "–"
    cell_models = set(inp.cells["model"].tolist())
    return SeriesView(
        key=inp.key, href=inp.href, frequency=freq, season_length=inp.season_length,
        n_actuals=len(inp.actual_index), first=first, last=last, horizon=inp.horizon,
        metrics=inp.metrics, levels=levels, fan_model=fan_model or "", fan_origin=fan_origin,
        latest_models=sorted(set(inp.latest["model"].tolist()), key=inp.models.index),
        latest=_latest_rows(inp, fan_rows, levels), chart=_chart(inp, fan_model, fan_rows, levels) if inp.with_chart else None,
        legend=charts.legend_entries([m for m in inp.models if m in cell_models], inp.styles, inp.horizon,
                                     fan_model if len(fan_rows["model"]) else None, levels),
        findings=inp.findings, notes=_notes(inp))


def _rows(columns: Columns, mask: np.ndarray) -> Columns:
    return {c: v[mask] for c, v in columns.items()}


def _fan_model(inp: SeriesInput) -> str | None:
    """The model whose latest run is drawn as a fan: the preferred model (incumbent, else best), else the first."""
    present = set(inp.latest["model"].tolist())
    for m in inp.fan_preference + inp.models:
        if m in present:
            return m
    return None


def _latest_rows(inp: SeriesInput, fan_rows: Columns, levels: list[str]) -> list[LatestRow]:
    """One row per target period of the latest runs: each model's point, the fan model's bounds."""
    points: dict[int, dict[str, float]] = {}
    horizons: dict[int, int] = {}
    for model, idx, hz, point in zip(inp.latest["model"].tolist(), inp.latest["period_index"].tolist(),
                                     inp.latest["horizon"].tolist(), inp.latest["point"].tolist()):
        points.setdefault(int(idx), {})[model] = float(point)
        horizons[int(idx)] = min(horizons.get(int(idx), int(hz)), int(hz))
    bounds: dict[int, dict[str, tuple[float, float]]] = {}
    pairs = {lv: (fan_rows[f"lower_{lv}"].tolist(), fan_rows[f"upper_{lv}"].tolist()) for lv in levels}
    for j, (idx, hz) in enumerate(zip(fan_rows["period_index"].tolist(), fan_rows["horizon"].tolist())):
        horizons[int(idx)] = int(hz)
        bounds[int(idx)] = {lv: (float(low[j]), float(high[j])) for lv, (low, high) in pairs.items()
                            if not pd.isna(low[j])}
    return [LatestRow(period=label(i, inp.frequency), horizon=horizons[i],
                      points=dict(sorted(points[i].items(), key=lambda kv: inp.models.index(kv[0]))),
                      bounds=bounds.get(i, {})) for i in sorted(points)]


def _chart(inp: SeriesInput, fan_model: str | None, fan_rows: Columns, levels: list[str]) -> charts.Chart:
    freq, h = inp.frequency, inp.horizon
    ends = [a for a in (inp.actual_index, inp.cells["period_index"], fan_rows["period_index"]) if len(a)]
    hi = int(max(a.max() for a in ends)) if ends else 0
    lo = int(min(a.min() for a in ends)) if ends else 0
    last_hist = int(inp.actual_index.max()) if len(inp.actual_index) else hi
    lo = max(lo, last_hist - HISTORY_SHOWN + 1)
    slots = np.arange(lo, hi + 1)
    actual = _aligned(slots, inp.actual_index, inp.actual_value)
    forecasts, errors = {}, {}
    names = inp.cells["model"]
    idx_all = inp.cells["period_index"].astype("int64")
    point_all, e_all = inp.cells["point"].astype(float), inp.cells["e"].astype(float)
    for model in inp.models:
        mask = names == model
        if mask.any():
            forecasts[model] = _aligned(slots, idx_all[mask], point_all[mask])
            errors[model] = _aligned(slots, idx_all[mask], e_all[mask])
    order = [m for m in inp.models if m in forecasts]
    fan = None
    if fan_model and len(fan_rows["model"]):
        fan = charts.Fan(fan_model, fan_rows["period_index"].astype(float), fan_rows["point"].astype(float),
                         {float(lv): (fan_rows[f"lower_{lv}"].astype(float), fan_rows[f"upper_{lv}"].astype(float))
                          for lv in levels})
    title = f"Actuals, {h}-step forecasts and the latest run"
    return charts.series_chart(
        "c-series", title, _chart_summary(inp, slots, actual, order, fan, levels),
        x=slots, labels=[label(i, freq) for i in slots], actual=actual,
        forecasts={m: forecasts[m] for m in order}, errors={m: errors[m] for m in order},
        fan=fan, styles=inp.styles, horizon=h, season=inp.season_length, spans=_event_spans(inp, slots))


def _event_spans(inp: SeriesInput, slots: np.ndarray) -> list[tuple[float, float]]:
    """The series' events (reports.cycle_views.SeriesCycle) clipped to the chart's periods."""
    if inp.cycle is None or not len(slots):
        return []
    lo, hi = int(slots[0]), int(slots[-1])
    return [(max(a, lo), min(b, hi)) for a, b, _, _ in inp.cycle.events if b >= lo and a <= hi]


def _aligned(slots: np.ndarray, idx: np.ndarray, values: np.ndarray) -> np.ndarray:
    out = np.full(slots.size, np.nan)
    keep = (idx >= slots[0]) & (idx <= slots[-1]) if slots.size else np.zeros(idx.size, bool)
    out[(idx[keep] - slots[0]).astype(int)] = values[keep]
    return out


def _chart_summary(inp: SeriesInput, slots, actual, order, fan, levels) -> str:
    freq = inp.frequency
    shown = int(np.isfinite(actual).sum())
    span = f"The chart spans {label(slots[0], freq)} to {label(slots[-1], freq)}. " if len(slots) else ""
    parts = [f"{span}Actual values for {shown} periods"]
    if order:
        parts.append(f"{inp.horizon}-step forecasts of {', '.join(order)}")
    if fan is not None:
        parts.append(f"the latest run of {fan.model} for {len(fan.x)} periods"
                     + (f" with {', '.join(lv + '%' for lv in levels)} intervals" if levels else ""))
    breaks = len(gaps(inp.actual_index)) if len(inp.actual_index) > 1 else 0
    text = "; ".join(parts) + "."
    if breaks:
        text += f" {plural(breaks, 'gap')} in the actuals shown as breaks."
    names, e = inp.cells["model"], inp.cells["e"].astype(float)
    mean_e = {m: float(e[names == m].mean()) for m in order}
    if mean_e:
        text += " Mean error (actual − forecast): " + ", ".join(f"{m} {num(v)}" for m, v in mean_e.items()) + "."
    return text


def _notes(inp: SeriesInput) -> list[str]:
    freq, m = inp.frequency, inp.season_length
    notes = []
    for start, length in (gaps(inp.actual_index) if len(inp.actual_index) > 1 else []):
        span = label(start, freq) if length == 1 else f"{label(start, freq)} to {label(start + length - 1, freq)}"
        notes.append(f"Missing actual{'s' if length > 1 else ''}: {span} ({plural(length, 'period')}); "
                     "shown as a break in the chart, not filled in.")
    zeros = int(np.sum(inp.actual_value == 0))
    if zeros:
        notes.append(f"{plural(zeros, 'actual')} equal to zero: MAPE leaves those periods out.")
    if len(inp.actual_value) < 3 * m:
        notes.append(f"History of {len(inp.actual_value)} actuals is shorter than three seasons ({3 * m}): "
                     "seasonal scales and checks are less reliable (common practice, no source).")
    if len(inp.actual_value) >= 2:
        d = demand_interval_stats(inp.actual_value)
        if d.classification not in ("smooth", "too few demands"):
            notes.append(f"Demand pattern {d.classification} (ADI {num(d.adi)}, CV² {num(d.cv2)}; Syntetos, "
                         "Boylan & Croston 2005): percentage errors are unreliable here.")
    unscaled = {s.model: s.n_unscaled for s in inp.metrics if s.n_unscaled}
    if unscaled:
        notes.append("Cells without a scale (fewer than m + 1 actuals before their origin, or q = 0), left out of MASE: "
                     + ", ".join(f"{k} {v}" for k, v in unscaled.items()) + ".")
    small = [s.model for s in inp.metrics if s.n < SMALL_SAMPLE]
    if small:
        notes.append(f"Small samples (fewer than {SMALL_SAMPLE} scored cells): {', '.join(small)}; read their figures with care.")
    return notes


def metrics_for(frame: pd.DataFrame, model_href: dict[str, str], levels: Sequence[str]) -> list[SeriesMetric]:
    """Series metric rows from a slice of ``Ledger.scores(by=['series', 'model'])``."""
    out = []
    for r in frame.to_dict("records"):
        def f(k, r=r) -> float:
            return float(r[k]) if k in r and not pd.isna(r[k]) else math.nan
        out.append(SeriesMetric(
            model=str(r["model"]), href=model_href.get(r["model"], ""), n=int(r["n"]), mape=f("mape"),
            mase=f("mase"), wape=f("wape"), bias_pct=f("bias_pct"), bias_text=bias_words(f("bias_pct")),
            coverage={lv: 100 * f(f"coverage_{lv}") for lv in levels},
            cells={lv: int(r[f"n_{lv}"]) if not pd.isna(r.get(f"n_{lv}")) else 0 for lv in levels}, n_unscaled=int(r["n_unscaled"]),
            small=is_small(int(r["n"]))))
    return out
