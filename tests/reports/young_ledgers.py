"""Young and odd ledgers (issue 14, item 6): builders of the invented ledgers of the test matrix.

Each builder writes a small ledger with one oddity (a single cell, no actuals, no scale, one
model, intervals or quantiles missing, no horizon 1, a long series, mixed frequencies, superseded runs) and
returns the phrases the report must say about what is missing. Invented data throughout.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from ledger import Ledger

NO_SCALE = "not enough history to scale errors yet"
NO_ACTUALS = "no actual has arrived"
NO_FORECASTS = "no forecast has been recorded"


def _months(first: str, n: int) -> list[str]:
    return [str(p) for p in pd.period_range(first, periods=n, freq="M")]


def _seasonal(n: int, level: float = 100.0, seed: int = 7) -> np.ndarray:
    rng = np.random.default_rng(seed)
    t = np.arange(n)
    return np.round(level * (1 + 0.2 * np.sin(2 * np.pi * t / 12)) + rng.normal(0, 3, n), 3)


def _runs(keys, periods: list[str], values: np.ndarray, models=("model-a", "model-b"), origins=range(12, 24),
          horizons=(1, 2, 3), intervals=True, quantiles=False) -> pd.DataFrame:
    rows = []
    for key in keys:
        for o in origins:
            for h in horizons:
                t = o + h
                if t >= len(periods):
                    continue
                for k, model in enumerate(models):
                    point = float(values[t - 12] if t >= 12 else values[0]) + 2.0 * k
                    row = {"series": key, "model": model, "origin": periods[o], "period": periods[t], "forecast": point}
                    if intervals:
                        row |= {"lower_80": point - 6, "upper_80": point + 6, "lower_95": point - 10, "upper_95": point + 10}
                    if quantiles:
                        row |= {"q10": point - 5, "q50": point, "q90": point + 5}
                    rows.append(row)
    return pd.DataFrame(rows)


def _actuals(keys, periods: list[str], values: np.ndarray, upto: int) -> pd.DataFrame:
    return pd.DataFrame([{"series": k, "period": periods[t], "actual": float(values[t])}
                         for k in keys for t in range(upto)])


def _write(path: Path, runs: pd.DataFrame | None = None, actuals: pd.DataFrame | None = None) -> None:
    with Ledger.open(path) as book:
        if runs is not None and len(runs):
            book.snapshot(runs, name="invented-runs.csv")
        if actuals is not None and len(actuals):
            book.record_actuals(actuals, name="invented-actuals.csv")


def single_cell(path: Path) -> list[str]:
    runs = pd.DataFrame([{"series": "only", "model": "model-a", "origin": "2026-01", "period": "2026-02", "forecast": 10.0}])
    _write(path, runs, pd.DataFrame([{"series": "only", "period": "2026-02", "actual": 12.0}]))
    return [NO_SCALE]


def forecasts_no_actuals(path: Path) -> list[str]:
    periods, values = _months("2024-01", 36), _seasonal(36)
    _write(path, _runs(["a", "b"], periods, values))
    return [NO_ACTUALS]


def actuals_no_forecasts(path: Path) -> list[str]:
    periods, values = _months("2024-01", 36), _seasonal(36)
    _write(path, None, _actuals(["a", "b"], periods, values, 30))
    return [NO_FORECASTS]


def no_scale(path: Path) -> list[str]:
    """History shorter than a season: 8 monthly actuals, forecasts for months 3 to 8."""
    periods, values = _months("2026-01", 10), _seasonal(10)
    _write(path, _runs(["a", "b"], periods, values, origins=range(2, 7)), _actuals(["a", "b"], periods, values, 8))
    return [NO_SCALE]


def one_model(path: Path) -> list[str]:
    periods, values = _months("2023-01", 36), _seasonal(36)
    _write(path, _runs(["a", "b"], periods, values, models=("model-a",)), _actuals(["a", "b"], periods, values, 30))
    return ["only one model"]


def intervals_no_quantiles(path: Path) -> list[str]:
    periods, values = _months("2023-01", 36), _seasonal(36)
    _write(path, _runs(["a"], periods, values), _actuals(["a"], periods, values, 30))
    return []


def quantiles_no_intervals(path: Path) -> list[str]:
    periods, values = _months("2023-01", 36), _seasonal(36)
    _write(path, _runs(["a"], periods, values, intervals=False, quantiles=True), _actuals(["a"], periods, values, 30))
    return ["no prediction intervals"]


def neither(path: Path) -> list[str]:
    periods, values = _months("2023-01", 36), _seasonal(36)
    _write(path, _runs(["a"], periods, values, intervals=False), _actuals(["a"], periods, values, 30))
    return ["no prediction intervals"]


def no_horizon_one(path: Path) -> list[str]:
    """Forecasts for horizons 3 to 6 only: the default headline horizon (1 elsewhere) adapts."""
    periods, values = _months("2023-01", 36), _seasonal(36)
    _write(path, _runs(["a", "b"], periods, values, horizons=(3, 4, 5, 6)), _actuals(["a", "b"], periods, values, 30))
    return ["headline horizon 3"]


def one_model_no_intervals(path: Path) -> list[str]:
    periods, values = _months("2023-01", 36), _seasonal(36)
    _write(path, _runs(["a", "b"], periods, values, models=("model-a",), intervals=False),
           _actuals(["a", "b"], periods, values, 30))
    return ["only one model", "no prediction intervals"]


def long_series(path: Path) -> list[str]:
    periods, values = _months("2001-01", 300), _seasonal(300)
    _write(path, _runs(["long"], periods, values, origins=range(12, 299)), _actuals(["long"], periods, values, 300))
    return []


def weekly_and_quarterly(path: Path) -> list[str]:
    weeks = [f"{p.start_time.isocalendar().year}-W{p.start_time.isocalendar().week:02d}"
             for p in pd.period_range("2022-01-03", periods=120, freq="W-SUN")]
    quarters = [str(p) for p in pd.period_range("2016Q1", periods=40, freq="Q")]
    wv, qv = _seasonal(120, 50.0, 3), _seasonal(40, 500.0, 4)
    # one file holds one frequency: each series is recorded from its own files
    _write(path, _runs(["weekly"], weeks, wv, origins=range(60, 110)), _actuals(["weekly"], weeks, wv, 115))
    _write(path, _runs(["quarterly"], quarters, qv, origins=range(12, 36)), _actuals(["quarterly"], quarters, qv, 38))
    return []


def all_superseded(path: Path) -> list[str]:
    periods, values = _months("2023-01", 36), _seasonal(36)
    runs = _runs(["a", "b"], periods, values)
    _write(path, runs, _actuals(["a", "b"], periods, values, 30))
    with Ledger.open(path) as book:
        book.snapshot(runs.assign(forecast=runs["forecast"] + 1.0), name="invented-runs-again.csv", supersede=True)
    return []


MATRIX = {f.__name__: f for f in (single_cell, forecasts_no_actuals, actuals_no_forecasts, no_scale, one_model,
                                   intervals_no_quantiles, quantiles_no_intervals, neither, no_horizon_one,
                                   one_model_no_intervals, long_series,
                                   weekly_and_quarterly, all_superseded)}
