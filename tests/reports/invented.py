"""The invented ledger of the report tests (no real company or series), with planted problems.

A biased, drifting incumbent on one series, intervals that are too narrow, a gap in the
actuals, a zero actual, and hostile series names. ``tests/reports/conftest.py`` builds it once
per session (``invented_ledger``) and renders its report once (``invented_site``).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from tests.helpers import record_invented

HOSTILE = ["<script>alert(1)</script>", "../../etc", "North/Hoses", "north/hoses"]
PLAIN = ["south/rakes & <b>shears</b>", "east/pots"]
MODELS = ["challenger-ets", "incumbent-hw", "snaive"]
INCUMBENT = "incumbent-hw"
# As-of after every recorded time (recorded_at is the wall clock when the test runs).
AS_OF = "2100-01-01"


def _signal(n: int, level: float, rng) -> np.ndarray:
    t = np.arange(n)
    return level * (1 + 0.25 * np.sin(2 * np.pi * t / 12)) + rng.normal(0, 0.06 * level, n)


def _forecast_rows(key: str, truth: np.ndarray, months: pd.PeriodIndex, level: float, rng) -> list[dict]:
    """Three models' runs at 36 monthly origins, horizons 1-6, with 80% and 95% intervals."""
    rows = []
    sd = 0.06 * level
    for o in range(12, 48):             # origins 2023-01 .. 2025-12; the last runs look ahead
        for h in range(1, 7):
            t = o + h
            mean = level * (1 + 0.25 * np.sin(2 * np.pi * t / 12))
            fc = {
                "challenger-ets": (mean + rng.normal(0, 0.3 * sd), 1.0 * sd),
                # planted: the incumbent's intervals are too narrow, and on North/Hoses it
                # drifts to forecasts far too low from origin 38 on (e = y - f > 0)
                "incumbent-hw": (mean + rng.normal(0, 0.8 * sd) + (-4 * sd if key == "North/Hoses" and o >= 38 else 0), 0.45 * sd),
                "snaive": (truth[t - 12], 1.6 * sd),   # h <= 6 < 12: last season's actual is known
            }
            for model, (point, spread) in fc.items():
                rows.append({"series": key, "model": model, "origin": str(months[o]), "period": str(months[t]),
                             "forecast": round(float(point), 3),
                             "lower_80": round(float(point - 1.2816 * spread), 3), "upper_80": round(float(point + 1.2816 * spread), 3),
                             "lower_95": round(float(point - 1.96 * spread), 3), "upper_95": round(float(point + 1.96 * spread), 3)})
    return rows


def build_ledger(path: Path, *, keys=tuple(HOSTILE + PLAIN), seed: int = 20261130) -> Path:
    """A seeded monthly ledger: 48 months of actuals (2022-01 to 2025-12), 3 models, 36 origins."""
    rng = np.random.default_rng(seed)
    months = pd.period_range("2022-01", periods=54, freq="M")   # actuals fill the first 48
    actuals, forecasts = [], []
    for i, key in enumerate(keys):
        level = 100.0 * (i + 1)
        truth = _signal(48, level, rng)
        forecasts += _forecast_rows(key, truth, months, level, rng)
        for t in range(48):
            if key == "east/pots" and t in (30, 31):      # planted gap: two months missing
                continue
            value = 0.0 if key.startswith("south/") and t == 40 else round(float(truth[t]), 3)
            actuals.append({"series": key, "period": str(months[t]), "actual": value})
    return record_invented(path, forecasts, actuals)
