"""Figures behind the actions of findings; pure, array in, number out: the half-width factor that
recalibrates an interval, the coverage it would have given out of sample, the cost of the
excess misses, and the MAE of a constant bias correction fitted on earlier cells.

Recalibration is split-conformal in spirit (Vovk, Gammerman & Shafer 2005, *Algorithmic
Learning in a Random World*; Angelopoulos & Bates 2021, "A gentle introduction to conformal
prediction and distribution-free uncertainty quantification", section 1): with
r_i = |e_i| / w_i, w_i the half-width on the side where the actual fell, the factor is the
ceil((n + 1) L) / n empirical quantile of r (L the stated level); scaling every half-width by it
covers at least L of those n cells, and about L of new exchangeable ones.
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["conformal_factor", "recalibration", "excess_miss_cost", "corrected_mae"]


def conformal_factor(ratio, level: float) -> float:
    """The half-width factor that makes intervals at ``level`` percent cover the cells of ``ratio``.

    Formula: the k-th smallest r, k = ceil((n + 1) L / 100), capped at n (then the largest r);
    NaN for no finite ratio. Orientation: above 1, intervals too narrow; below 1, too wide.
    """
    r = np.sort(np.asarray(ratio, dtype=float)[np.isfinite(np.asarray(ratio, dtype=float))])
    if r.size == 0:
        return math.nan
    k = min(r.size, math.ceil((r.size + 1) * level / 100))
    return float(r[k - 1])


def recalibration(ratio, periods, level: float, recent_from: int) -> tuple[float, float, float, int]:
    """(factor on the recent window, factor fitted before it, its coverage on the recent window, n recent).

    The first factor is what reaches the stated level over the recent window (periods >=
    ``recent_from``); the second is fitted on the earlier cells only and its coverage is
    measured on the recent ones, out of sample. NaN where a part has no cells.
    """
    ratio = np.asarray(ratio, dtype=float)
    recent = np.asarray(periods) >= recent_from
    now = conformal_factor(ratio[recent], level)
    before = conformal_factor(ratio[~recent], level)
    judged = ratio[recent]
    judged = judged[np.isfinite(judged)]
    cover = float(np.mean(judged <= before)) if judged.size and math.isfinite(before) else math.nan
    return now, before, cover, int(judged.size)


def excess_miss_cost(dist, missed, level: float) -> float:
    """Sum of the scaled miss distances attributable to misses beyond the nominal rate.

    Formula: sum(dist) x max(0, 1 - p / p_hat), p = 1 - L/100 the nominal miss rate, p_hat the
    observed one; 0 when the intervals miss no more often than stated.
    """
    dist = np.asarray(dist, dtype=float)
    missed = np.asarray(missed, dtype=bool)
    if missed.size == 0 or not missed.any():
        return 0.0
    p_hat = missed.mean()
    p = 1 - level / 100
    return float(np.nansum(dist) * max(0.0, 1 - p / p_hat))


def corrected_mae(e) -> tuple[float, float, int]:
    """(MAE after correction, MAE without, cells judged) of a constant correction fitted on earlier cells.

    For cell i >= 2 of e (the errors since a change, in period order) the correction is the mean
    of e[0..i-1], fitted only on cells before i, so the figure is out of sample:
    MAE_fixed = mean_i |e_i - mean(e_0..e_{i-1})|, MAE_plain = mean_i |e_i|. NaN with fewer than
    two cells to judge.
    """
    e = np.asarray(e, dtype=float)
    if e.size < 4:
        return float("nan"), float("nan"), 0
    running = np.cumsum(e)[:-1] / np.arange(1, e.size)
    later = e[2:]
    fixed = np.abs(later - running[1:])
    return float(fixed.mean()), float(np.abs(later).mean()), int(later.size)
