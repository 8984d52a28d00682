"""A small synthetic ledger (invented data, fixed seed) with what parity checks need to cover:
three frequencies (monthly, quarterly, weekly), a gap in one series' actuals, zero actuals
(one series zero throughout its first season, so its early cells have no scale), revised
actuals, a superseded run, bounds at two levels, quantiles for one model, attributes
(a region and a numeric unit price), and write times spread over a year for ``--as-of``.
"""

from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd

from ledger import Ledger

START = dt.datetime(2024, 1, 1)
#: An as-of inside the history: after the first half of the runs and before the revisions.
MIDWAY = "2024-07-01"


def _labels(freq: str, n: int, first: str) -> list[str]:
    return [str(p) for p in pd.period_range(first, periods=n, freq=freq)]


def _history() -> pd.DataFrame:
    rng = np.random.default_rng(17)
    rows = []
    for s in range(6):
        level, labels = 100 + 40 * s, _labels("M", 36, "2022-01")
        for i, p in enumerate(labels):
            value = level + 10 * np.sin(2 * np.pi * i / 12) + rng.normal(0, 5)
            if s == 2 and i % 7 == 3:
                value = 0.0                                   # zeros inside the history
            if s == 3 and i < 14:
                value = 0.0                                   # zero for more than a season: no scale
            if s == 1 and i in (17, 18):
                continue                                      # a gap
            rows.append((f"m{s}", p, round(value, 3)))
    for s in range(3):
        for i, p in enumerate(_labels("Q-DEC", 14, "2021Q1")):
            rows.append((f"q{s}", p, round(500 + 50 * s + 20 * (i % 4) + rng.normal(0, 8), 3)))
    for s in range(2):
        for i in range(80):
            week = (dt.date(2023, 1, 2) + dt.timedelta(weeks=i)).isocalendar()
            rows.append((f"w{s}", f"{week.year}-W{week.week:02d}", round(30 + 5 * s + rng.normal(0, 3), 3)))
    return pd.DataFrame(rows, columns=["series", "period", "actual"])


def _forecasts(hist: pd.DataFrame, model: str, bias: float, spread: float, *, quantiles: bool,
               seed: int) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    rows = []
    plans = {"m": ("M", "2022-12", 18, 6), "q": ("Q-DEC", "2022Q4", 5, 4)}
    for prefix, (freq, first, n_origins, horizons) in plans.items():
        names = sorted(hist.loc[hist["series"].str.startswith(prefix), "series"].unique())
        for origin in pd.period_range(first, periods=n_origins, freq=freq):
            for s in names:
                for h in range(1, horizons + 1):
                    rows.append((s, str(origin + h), str(origin), h))
    for s in ("w0", "w1"):
        for o in range(40, 70, 3):
            for h in range(1, 5):
                origin = (dt.date(2023, 1, 2) + dt.timedelta(weeks=o)).isocalendar()
                target = (dt.date(2023, 1, 2) + dt.timedelta(weeks=o + h)).isocalendar()
                rows.append((s, f"{target.year}-W{target.week:02d}", f"{origin.year}-W{origin.week:02d}", h))
    frame = pd.DataFrame(rows, columns=["series", "period", "origin", "h"])
    truth = hist.set_index(["series", "period"])["actual"]
    base = truth.reindex(list(zip(frame["series"], frame["period"]))).to_numpy()
    base = np.where(np.isnan(base), 100.0, base)
    point = base + bias + rng.normal(0, spread, len(frame)) * np.sqrt(frame["h"].to_numpy())
    frame["forecast"] = np.round(point, 3)
    for level, z in ((80, 1.2816), (95, 1.96)):
        width = z * spread * np.sqrt(frame["h"].to_numpy())
        frame[f"lower_{level}"] = np.round(point - width, 3)
        frame[f"upper_{level}"] = np.round(point + width, 3)
    if quantiles:
        frame["q10"] = frame["lower_80"]
        frame["q90"] = frame["upper_80"]
    frame["model"] = model
    return frame.drop(columns="h")


def _by_frequency(frame: pd.DataFrame) -> list[pd.DataFrame]:
    """One frame per frequency (series m*, q*, w*): a file holds one frequency."""
    parts = [frame[frame["series"].str.startswith(p)].reset_index(drop=True) for p in "mqw"]
    return [p for p in parts if len(p)]


def build(path) -> None:
    """Write the synthetic ledger to ``path`` (a new file)."""
    hist = _history()
    stamps = iter(START + dt.timedelta(days=3 * i) for i in range(10_000))
    with Ledger.open(path) as book:
        book.store.clock = lambda: next(stamps)
        attrs = pd.DataFrame({"series": ["m0", "m1", "m2", "m3", "m4", "m5", "q0", "q1", "q2", "w0", "w1"],
                              "region": ["north", "north", "south", "south", "south", "north",
                                         "west", "west", "west", "east", "east"],
                              "unit_price": ["2.5", "4", "1.25", "3", "10", "0.5", "7", "7", "8", "1", "2"]})
        book.record_attributes(attrs, name="attributes.csv")
        for part in _by_frequency(hist):
            book.record_actuals(part, name="actuals.csv")
        a = _forecasts(hist, "alpha", 2.0, 6.0, quantiles=True, seed=1)
        b = _forecasts(hist, "beta", -4.0, 9.0, quantiles=False, seed=2)
        origins = sorted(a["origin"].unique())
        for half in (origins[: len(origins) // 2], origins[len(origins) // 2:]):
            for frame, name in ((a, "alpha.csv"), (b, "beta.csv")):
                for part in _by_frequency(frame[frame["origin"].isin(half)]):
                    book.snapshot(part, name=name)
        book.store.clock = lambda: dt.datetime(2024, 9, 1)
        redo = a[(a["origin"] == "2023-06")].assign(forecast=lambda f: f["forecast"] + 7.5)
        book.snapshot(redo.reset_index(drop=True), supersede=True, name="alpha-redo.csv")
        book.store.clock = lambda: dt.datetime(2024, 10, 1)
        revised = hist[hist["series"].isin(["m0", "q1"])].iloc[::5].assign(actual=lambda f: f["actual"] * 1.1)
        for part in _by_frequency(revised):
            book.record_actuals(part, name="revisions.csv")
