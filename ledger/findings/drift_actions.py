"""Ledger-side figures of findings: the model that was more accurate since a change, and impact
as a share of the ledger (the pure correction figure is :func:`ledger.stats.recalibration.corrected_mae`).
"""

from __future__ import annotations

import numpy as np
from ..lazy import pandas as pd

__all__ = ["best_other", "share", "SeriesIndex"]


class SeriesIndex:
    """Row positions of each series in a cells frame, computed once for many look-ups."""

    def __init__(self, cells: pd.DataFrame):
        self.cells = cells
        self.rows = cells.groupby("series", sort=False).indices

    def of(self, series: str) -> pd.DataFrame:
        return self.cells.iloc[self.rows.get(series, np.empty(0, dtype=int))]


def best_other(index: SeriesIndex, model: str, series: str, horizons, since: int) -> tuple | None:
    """(model, its MAE, this model's MAE, common cells) of the most accurate other model on the
    common cells of ``series`` at ``horizons`` with target period >= ``since``; None when no
    other model has a lower MAE there."""
    part = index.of(series)
    part = part[part["horizon"].isin(list(horizons)) & (part["period_index"] >= since)]
    keys = ["period_index", "horizon"]
    mine = part.loc[part["model"] == model, keys + ["e"]]
    best = None
    for other, g in part[part["model"] != model].groupby("model", sort=True):
        common = mine.merge(g[keys + ["e"]], on=keys, suffixes=("", "_o"))
        if len(common) < 2:
            continue
        own, theirs = float(common["e"].abs().mean()), float(common["e_o"].abs().mean())
        if theirs < own and (best is None or theirs / own < best[1] / best[2]):
            best = (str(other), theirs, own, len(common))
    return best


def share(excess: float, total: float) -> float:
    """Impact in percent: 100 x excess / total (0 when either is missing or total is 0)."""
    if not (np.isfinite(excess) and np.isfinite(total) and total > 0):
        return 0.0
    return float(100.0 * excess / total)
