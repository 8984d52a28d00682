"""Demand statistics: the demand pattern of a series (ADI, CV^2) and gaps in its record; pure functions."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

import numpy as np

from ..errors import InputError
from .arrays import vector

__all__ = ["DemandClass", "DemandStats", "demand_interval_stats", "gaps"]

DemandClass = Literal["smooth", "intermittent", "erratic", "lumpy", "too few demands"]


@dataclass(frozen=True)
class DemandStats:
    """Demand pattern of a series: see :func:`demand_interval_stats`."""

    adi: float
    cv2: float
    n: int
    nonzero: int
    classification: DemandClass


def demand_interval_stats(y, *, adi_cut: float = 1.32, cv2_cut: float = 0.49) -> DemandStats:
    """Average demand interval, CV^2 of demand sizes, and the demand-pattern class.

    Formula: with t_1 < ... < t_k the (1-based) positions of non-zero values, ADI = mean of the
    intervals t_1, t_2 - t_1, ..., t_k - t_{k-1} (the first counted from the start of the series,
    as in Croston's decomposition; equals t_k / k). CV^2 = (sd / mean)^2 of the non-zero values
    (sd with n - 1). Classes: ADI < 1.32 and CV^2 < 0.49 smooth; ADI >= 1.32 intermittent;
    CV^2 >= 0.49 erratic; both lumpy. Fewer than two non-zero values gives "too few demands"
    (CV^2 NaN). NaN values (missing actuals) are dropped first; report them as gaps.
    Reference: Syntetos, A.A., Boylan, J.E. & Croston, J.D. (2005) "On the categorization of
    demand patterns", *Journal of the Operational Research Society* 56, 495-503.
    """
    y = vector(y, "y", "demand_interval_stats", allow_nan=True)
    y = y[~np.isnan(y)]
    where = np.flatnonzero(y != 0) + 1
    k = where.size
    adi = float(where[-1] / k) if k else float("nan")
    if k < 2:
        return DemandStats(adi, float("nan"), int(y.size), int(k), "too few demands")
    sizes = y[where - 1]
    cv2 = float((sizes.std(ddof=1) / sizes.mean()) ** 2) if sizes.mean() != 0 else float("inf")
    label = {(False, False): "smooth", (True, False): "intermittent",
             (False, True): "erratic", (True, True): "lumpy"}[(adi >= adi_cut, cv2 >= cv2_cut)]
    return DemandStats(adi, cv2, int(y.size), int(k), label)


def gaps(period_index) -> list[tuple[int, int]]:
    """Missing periods inside the observed range, as runs (first missing index, run length).

    Input: integer period ordinals in any order, duplicates allowed. Returns runs sorted by
    start; an empty list when there are no gaps or fewer than two distinct periods. Gaps are
    reported, never filled in.
    """
    idx = np.asarray(period_index, dtype=float)
    if idx.ndim != 1 or (idx.size and (~np.isfinite(idx) | (idx != np.round(idx))).any()):
        raise InputError("gaps", "period_index must be a 1-D sequence of integer period ordinals")
    seen = np.unique(idx.astype(np.int64))
    step = np.diff(seen)
    at = np.flatnonzero(step > 1)
    return [(int(seen[i] + 1), int(step[i] - 1)) for i in at]
