"""Model comparison: pure functions over numpy arrays.

Convention of this module: model a is the incumbent (or reference), model b the challenger.
Loss differentials are d = loss_a - loss_b, so positive d means b was more accurate; relative
MAE is MAE_b / MAE_a, so a value below 1 means b is more accurate.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal

import numpy as np
from scipy import stats

from ..errors import InputError, UnknownName

__all__ = [
    "Alternative",
    "DMResult",
    "RelativeMAE",
    "WinShare",
    "dm_hln",
    "relative_mae",
    "win_share",
]

Alternative = Literal["two-sided", "less", "greater"]
_ALTERNATIVES = ("two-sided", "less", "greater")


@dataclass(frozen=True)
class DMResult:
    """Outcome of :func:`dm_hln`; ``note`` explains a fallback or why the test is undefined (NaN)."""

    statistic: float
    p_value: float
    n: int
    mean_differential: float
    h: int
    alternative: Alternative
    variance_fallback: bool
    note: str


def _autocovariances(d: np.ndarray, lags: int) -> np.ndarray:
    """gamma_k = (1/n) sum_{t=k+1..n} (d_t - dbar)(d_{t-k} - dbar), k = 0..lags."""
    dev = d - d.mean()
    n = d.size
    return np.array([np.dot(dev[k:], dev[: n - k]) / n for k in range(lags + 1)])


def _undefined(n: int, dbar: float, h: int, alternative: Alternative, note: str) -> DMResult:
    return DMResult(float("nan"), float("nan"), n, dbar, h, alternative, False, note)


def dm_hln(d, *, h: int, alternative: Alternative = "two-sided") -> DMResult:
    """Diebold-Mariano test of equal accuracy, with the Harvey-Leybourne-Newbold correction.

    Formula: d_t = loss_a,t - loss_b,t (t = 1..n, in period order; NaN cells are dropped);
    gamma_k = (1/n) sum_{t=k+1..n} (d_t - dbar)(d_{t-k} - dbar);
    V = (gamma_0 + 2 sum_{k=1..h-1} gamma_k) / n; DM = dbar / sqrt(V);
    DM* = DM * sqrt[(n + 1 - 2h + h(h-1)/n) / n]; p-value from Student t with n - 1 df.
    ``alternative``: "two-sided" (accuracies differ), "greater" (mean d > 0: b more accurate),
    "less" (mean d < 0: a more accurate).
    Fallback: when V <= 0 (negative autocovariances can outweigh gamma_0 for h > 1), V =
    gamma_0 / n is used and ``variance_fallback`` is True. Undefined (NaN, with a note): fewer
    than 2 differentials, a constant differential (gamma_0 = 0), or a correction factor <= 0
    (h too large for n).
    Returns a :class:`DMResult`. Orientation: positive statistic means b had the smaller loss.
    Reference: Diebold, F.X. & Mariano, R.S. (1995) "Comparing predictive accuracy", *Journal of
    Business & Economic Statistics* 13(3), 253-263; Harvey, D., Leybourne, S. & Newbold, P. (1997)
    "Testing the equality of prediction mean squared errors", *International Journal of
    Forecasting* 13(2), 281-291.
    """
    arr = np.asarray(d, dtype=float)
    if arr.ndim != 1:
        raise InputError("dm_hln", f"d must be one-dimensional, got shape {arr.shape}; pass one loss differential per period")
    if int(h) != h or h < 1:
        raise InputError("dm_hln", f"h = {h!r} must be an integer >= 1 (the forecast horizon)")
    if alternative not in _ALTERNATIVES:
        raise UnknownName(f"dm_hln: alternative {alternative!r} is unknown; use one of {', '.join(_ALTERNATIVES)}")
    h = int(h)
    arr = arr[~np.isnan(arr)]
    n = int(arr.size)
    dbar = float(arr.mean()) if n else float("nan")
    if n < 2:
        return _undefined(n, dbar, h, alternative, f"{n} loss differentials; the test needs at least 2")
    gamma = _autocovariances(arr, min(h - 1, n - 1))
    if not gamma[0] > 0:
        return _undefined(n, dbar, h, alternative, "the loss differential is constant; the test is undefined")
    variance = (gamma[0] + 2.0 * gamma[1:].sum()) / n
    fallback = not variance > 0
    if fallback:
        variance = gamma[0] / n
    factor = (n + 1 - 2 * h + h * (h - 1) / n) / n
    if not factor > 0:
        return _undefined(n, dbar, h, alternative, f"h = {h} is too large for {n} differentials")
    stat = dbar / math.sqrt(variance) * math.sqrt(factor)
    note = "long-run variance was not positive; used gamma_0 only" if fallback else ""
    return DMResult(stat, _t_pvalue(stat, n - 1, alternative), n, dbar, h, alternative, fallback, note)


def _t_pvalue(stat: float, df: int, alternative: Alternative) -> float:
    if alternative == "less":
        return float(stats.t.cdf(stat, df))
    if alternative == "greater":
        return float(stats.t.sf(stat, df))
    return float(2.0 * stats.t.sf(abs(stat), df))


@dataclass(frozen=True)
class RelativeMAE:
    """Outcome of :func:`relative_mae`: the weighted geometric mean and what went into it."""

    value: float
    series_used: int
    series_excluded: int
    cells_used: int


def relative_mae(mae_a, mae_b, n) -> RelativeMAE:
    """Relative MAE of b against a: weighted geometric mean of per-series MAE ratios.

    Formula: r_i = MAE_b,i / MAE_a,i; RelMAE = (prod_i r_i^{n_i})^{1 / sum n_i}
    = exp(sum n_i ln r_i / sum n_i), with n_i the number of cells of series i.
    Orientation: below 1 means b is more accurate (RelMAE = 0.9: b's errors about 10% smaller).
    Series where either MAE is 0 or missing, or n_i <= 0, are excluded and counted in
    ``series_excluded``; with none left the value is NaN.
    Returns a :class:`RelativeMAE`.
    Reference: Davydenko, A. & Fildes, R. (2013) "Measuring forecasting accuracy: the case of
    judgmental adjustments to SKU-level demand forecasts", *International Journal of
    Forecasting* 29(3), 510-522.
    """
    a, b, w = (np.asarray(x, dtype=float) for x in (mae_a, mae_b, n))
    if not (a.ndim == b.ndim == w.ndim == 1 and a.size == b.size == w.size):
        raise InputError("relative_mae", f"mae_a, mae_b and n must be 1-D of one length, got {a.shape}, {b.shape}, {w.shape}")
    if (a[~np.isnan(a)] < 0).any() or (b[~np.isnan(b)] < 0).any():
        raise InputError("relative_mae", "an MAE is negative; pass mean absolute errors")
    ok = (a > 0) & (b > 0) & (w > 0) & np.isfinite(a) & np.isfinite(b) & np.isfinite(w)
    used = int(ok.sum())
    if used == 0:
        return RelativeMAE(float("nan"), 0, int(a.size), 0)
    logs = np.log(b[ok] / a[ok])
    value = float(np.exp(np.sum(w[ok] * logs) / np.sum(w[ok])))
    return RelativeMAE(value, used, int(a.size) - used, int(np.sum(w[ok])))


@dataclass(frozen=True)
class WinShare:
    """Outcome of :func:`win_share`: b's share of wins (ties count half) and the counts."""

    share: float
    wins: int
    ties: int
    losses: int
    n: int


def win_share(loss_a, loss_b) -> WinShare:
    """Share of cells (or series, or periods) where b's loss is smaller than a's.

    Formula: share = (#{loss_b < loss_a} + 0.5 #{loss_b = loss_a}) / n over pairs where both
    losses are present (NaN pairs are dropped). A tie counts half, so two identical models
    score 0.5 and the share of a is exactly 1 - share of b.
    Orientation: above 0.5 means b wins more often than it loses.
    Returns a :class:`WinShare`; no pairs gives share NaN.
    Reference: win shares are common practice in forecast reviews, no source.
    """
    a, b = np.asarray(loss_a, dtype=float), np.asarray(loss_b, dtype=float)
    if a.shape != b.shape or a.ndim != 1:
        raise InputError("win_share", f"loss_a and loss_b must be 1-D of one length, got {a.shape} and {b.shape}")
    ok = ~(np.isnan(a) | np.isnan(b))
    a, b = a[ok], b[ok]
    wins, ties = int(np.sum(b < a)), int(np.sum(b == a))
    n = int(a.size)
    share = (wins + 0.5 * ties) / n if n else float("nan")
    return WinShare(share, wins, ties, n - wins - ties, n)
