"""Seeded ledgers with planted problems, for the findings, standings and CLI tests.

Invented data. Honest forecasts are simulated directly as actual - e with e ~ N(0, sigma^2) iid
(no model is fitted), so an honest model's errors are unbiased and its intervals f -/+ z sigma
have exactly their nominal coverage. Monthly series; 36 months of history precede the first
origin, so every cell has a seasonal scale and three seasons of history.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from scipy import stats

from ledger import Ledger
from ledger.periods import index_start, period_label

FIRST = 12 * 2020  # January 2020: first month of history
HISTORY = 36


def month(i: int) -> str:
    """Label of month FIRST + i."""
    return period_label(index_start(FIRST + i, "monthly"), "monthly")


def actuals(n_series: int, n_periods: int, seed: int) -> np.ndarray:
    """Seasonal series around 100 with noise; shape (series, periods)."""
    rng = np.random.default_rng(seed)
    t = np.arange(n_periods)
    season = 10 * np.sin(2 * np.pi * t / 12)
    return 100 + season[None, :] + rng.normal(0, 5, (n_series, n_periods))


def names(n_series: int) -> list[str]:
    return [f"s{i:02d}" for i in range(n_series)]


def actual_frame(y: np.ndarray) -> pd.DataFrame:
    s, t = y.shape
    return pd.DataFrame({"series": np.repeat(names(s), t), "period": np.tile([month(i) for i in range(t)], s),
                         "actual": y.ravel()})


def run_frame(y: np.ndarray, *, origins, horizons, sigma, seed: int, shift=None, width: float = 1.0,
              levels=(80,)) -> pd.DataFrame:
    """Forecasts f = y - e for every origin (index into y) and horizon, with L% intervals.

    sigma: scalar, {horizon: sd} or one sd per series (an array). shift: array like y added to e (a planted bias: positive
    means forecasts too low). width: interval half-width as a multiple of the honest one.
    """
    rng = np.random.default_rng(seed)
    s = y.shape[0]
    parts = []
    for o in origins:
        for h in horizons:
            t = o + h
            if t >= y.shape[1]:
                continue
            sd = sigma[h] if isinstance(sigma, dict) else sigma
            e = rng.normal(0, sd, s) + (shift[:, t] if shift is not None else 0.0)
            f = y[:, t] - e
            part = {"series": names(s), "period": month(t), "origin": month(o), "forecast": f}
            for level in levels:
                half = stats.norm.ppf(0.5 + level / 200) * sd * width
                part[f"lower_{level}"], part[f"upper_{level}"] = f - half, f + half
            parts.append(pd.DataFrame(part))
    return pd.concat(parts, ignore_index=True)


def build(path, *, n_series: int, n_targets: int = 36, horizons=(1,), seed: int = 0, models=None) -> Ledger:
    """A ledger with actuals for HISTORY + n_targets months and one run per origin and model.

    models: {name: dict of run_frame keyword arguments (sigma, shift, width, levels)}; each
    model gets its own noise stream. Origins are HISTORY - 1 .. so that the first target at
    horizon 1 is month HISTORY.
    """
    total = HISTORY + n_targets
    y = actuals(n_series, total, seed)
    book = Ledger.open(path)
    book.record_actuals(actual_frame(y))
    origins = range(HISTORY - 1, total - 1)
    for k, (model, spec) in enumerate((models or {"m": {"sigma": 5.0}}).items()):
        frame = run_frame(y, origins=origins, horizons=horizons, seed=seed * 100 + k + 1, **spec)
        book.snapshot(frame, model=model)
    return book
