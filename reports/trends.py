"""Who wins over time, and the value each forecasting step adds: the overview's charts.

Rolling figures pool the last ``ROLLING`` evaluation periods (fewer at the start of the
ledger): rolling MASE = Σ MASE_t·s_t / Σ s_t with s_t the scaled cells of period t, which is
the mean |e|/q over the window's cells; the rolling share of series won weighs each period by
its number of series compared. The raw per-period values are drawn faint behind.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np
import pandas as pd

from ledger.wording import num, plural

from . import charts
from .value_added import FvaRow, fva_rows

__all__ = ["ROLLING", "fva_chart", "rolling", "trend_charts"]

#: Evaluation periods in a rolling window (one monthly season; common practice, no source).
ROLLING = 12


def rolling(values: pd.DataFrame, weights: pd.DataFrame, window: int = ROLLING) -> pd.DataFrame:
    """Weighted rolling mean per column over ``window`` rows (at least one row with weight)."""
    w = weights.where(values.notna(), 0.0).fillna(0.0)
    num_ = (values.fillna(0.0) * w).rolling(window, min_periods=1).sum()
    den = w.rolling(window, min_periods=1).sum()
    return num_ / den.where(den > 0)


def _wide(frame: pd.DataFrame, column: str, models: Sequence[str]) -> pd.DataFrame:
    table = frame.pivot_table(index="period", columns="model", values=column, aggfunc="first", sort=True)
    return table[[m for m in models if m in table.columns]]


def _change_points(flags: pd.DataFrame, horizon: int, periods: list[str], models: Sequence[str]) -> dict[str, list[int]]:
    if flags.empty:
        return {}
    drift = flags[(flags["kind"] == "drift") & (flags["horizon"] == horizon)]
    where = {p: i for i, p in enumerate(periods)}
    out = {}
    for model in models:
        since = sorted({where[s] for s in drift.loc[drift["model"] == model, "since"] if s in where})
        if since:
            out[model] = since
    return out


def trend_charts(by_period: pd.DataFrame, standings: pd.DataFrame, flags: pd.DataFrame, models: Sequence[str],
                 styles: dict, horizon: int) -> tuple[list[charts.Chart], list[str]]:
    """Rolling MASE per model and rolling share of series won, raw values faint, drift change points marked."""
    out, notes = [], []
    frame = by_period[by_period["mase"].notna()] if len(by_period) else by_period
    if len(frame):
        mase = _wide(frame, "mase", models)
        scaled = _wide(frame.assign(s=frame["n"] - frame["n_unscaled"]), "s", models).astype(float)
        smooth = rolling(mase, scaled)
        periods = [str(p) for p in mase.index]
        marks = _change_points(flags, horizon, periods, list(mase.columns))
        last = "; ".join(f"{m} {num(smooth[m].iloc[-1])}" for m in smooth.columns)
        n_marks = sum(len(v) for v in marks.values())
        out.append(charts.trend_chart(
            "c-mase", f"Rolling MASE per model, horizon {horizon}",
            f"Bold lines pool the last {ROLLING} evaluation periods (fewer at the start); faint lines are each "
            f"period's own MASE, over {plural(len(periods), 'period')}. 1 is the in-sample seasonal-naive error; "
            f"lower is better. In {periods[-1]}: {last}. "
            + (f"Ticks on the time axis mark {plural(n_marks, 'drift change point')} at this horizon." if n_marks else ""),
            periods, {m: mase[m].tolist() for m in mase.columns}, {m: smooth[m].tolist() for m in smooth.columns},
            styles, ylabel="MASE (lower is better)", marks=marks, reference=1.0))
    else:
        notes.append("Rolling MASE: no evaluation period has a scaled error yet.")
    if len(standings) and standings["series_won"].notna().any():
        won = _wide(standings, "series_won", models)
        weight = _wide(standings, "n_series", models).astype(float)
        smooth = rolling(won, weight)
        periods = [str(p) for p in won.index]
        last = "; ".join(f"{m} {num(100 * smooth[m].iloc[-1])}%" for m in smooth.columns)
        out.append(charts.trend_chart(
            "c-won", f"Rolling share of series won, horizon {horizon}",
            f"The share of series where each model had the lowest scaled error (ties count half), pooled over "
            f"the last {ROLLING} evaluation periods; faint lines are single periods. In {periods[-1]}: {last}.",
            periods, {m: won[m].tolist() for m in won.columns}, {m: smooth[m].tolist() for m in smooth.columns},
            styles, ylabel="Series won (% of series)", percent=True))
    else:
        notes.append("Share of series won over time: no evaluation period has common cells of two models yet.")
    return out, notes


def fva_chart(steps: pd.DataFrame, styles: dict) -> charts.Chart | None:
    """Forecast value added by horizon, one line per step (positive: the step lowers the error)."""
    if steps.empty:
        return None
    horizons = sorted(int(h) for h in steps["horizon"].unique())
    if len(horizons) < 2:
        return None
    values, step_styles = {}, {}
    for row in fva_rows(steps):
        label = f"{row.model} vs {row.reference}"
        by_h = {h: fva_rows(steps[(steps["model"] == row.model) & (steps["reference"] == row.reference)], [h])
                for h in horizons}
        values[label] = [r[0].fva if r else math.nan for r in by_h.values()]
        style = styles.get(row.model, charts.model_styles([label])[label])
        # a model's override step shares its colour with its benchmark step: hollow markers tell them apart
        step_styles[label] = style if row.step == "against the benchmark" else {**style, "fill": "white"}
    words = "; ".join(f"{k}: {num(v[0])}% at h={horizons[0]}, {num(v[-1])}% at h={horizons[-1]}"
                      for k, v in values.items() if not (np.isnan(v[0]) and np.isnan(v[-1])))
    return charts.horizon_chart(
        "c-fva", "Forecast value added by horizon",
        f"One line per step: 100·(1 − MASE of the model / MASE of its reference) on common cells; above 0 the step "
        f"adds value, below 0 it makes the forecast worse. {words}.",
        horizons, values, step_styles, ylabel="Value added (% lower MASE)", references=[0.0],
        legend_cols=2)    # "model vs reference" labels: two columns keep them whole


def fva_table(steps: pd.DataFrame) -> list[FvaRow]:
    """The steps pooled over all horizons, benchmark steps first, then overrides."""
    return sorted(fva_rows(steps), key=lambda r: (r.step != "against the benchmark", r.model))
