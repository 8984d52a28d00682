"""Retrospective change-point tests for error sequences; pure, vectorised over rows.

Each function takes a 2-D array, one row per sequence (one series x model x horizon, errors
ordered by target period), all rows of one length; callers stack sequences of equal length so
thousands of them are tested at once.

Two tests, each over the whole record (no reference window, so no blind spot at the start):

* :func:`bias_scan` -- a shift of the mean error away from zero, the target of an unbiased
  forecast, starting at an unknown cell k (k = 0: biased from the first cell). Statistic
  max_k |sum_{t>=k} e_t| / sqrt((n - k) * lrv), the Gaussian likelihood-ratio scan for "mean 0
  before k, mean mu from k on" (Csorgo & Horvath 1997, "Limit Theorems in Change-Point
  Analysis", ch. 1, for the LR form; from memory). The maximising k dates the change.
* :func:`size_shift` -- an increase in error size: the one-sided CUSUM of deviations of
  g_t = sqrt(|e_t| / q_t), max_k -(S_k - k/n S_n) / sqrt(n * lrv), whose limit under no change
  is the supremum of a Brownian bridge, P(sup B > x) = exp(-2 x^2) (Csorgo & Horvath 1997,
  Theorem 1.5.1 type results; the Kolmogorov-Smirnov one-sided limit; from memory, checked by
  simulation in the tests). The square root makes |e| roughly symmetric, as in Hawkins's scale
  CUSUM (from memory).

In-control estimates are robust and taken about the fitted change, so a shift does not inflate
its own yardstick: residuals are the errors minus the fitted segment means, their spread is
1.4826 x MAD (floored at half the classical standard deviation, so discrete errors with a
zero MAD keep a spread), and the long-run variance widens that spread for autocorrelation with
an AR(1) plug-in (:func:`long_run_variance`; Andrews 1991), because multi-step errors from
consecutive origins overlap and wander.

p-values: the statistics are studentised with estimated spreads, so their small-sample null
is simulated once per record length (iid N(0, 1) errors through the same estimators, fixed seed,
:data:`NULL_DRAWS` draws) and cached; beyond the simulated range the tail is extrapolated with
the shape of the limit (normal tail for the scan, exp(-2x^2) for the bridge) matched at the
0.5% point. Under iid normal errors the p-values are exact up to simulation error; under
AR(1) errors they rest on the long-run variance (measured in tests/benchmarks/bench_findings.py).

Sign convention: e = actual - forecast; a positive shift means forecasts too low.
"""

from __future__ import annotations

import functools
from dataclasses import dataclass

import numpy as np
from scipy import stats

from ..errors import InputError

__all__ = [
    "NULL_DRAWS",
    "MIN_SEGMENT",
    "ScanResult",
    "long_run_variance",
    "lag1",
    "robust_spread",
    "bridge_sup_sf",
    "bias_scan",
    "size_shift",
    "bonferroni_pair",
    "corrected_phi",
    "residual_phi",
    "PHI_GRID",
    "N_GRID",
]

#: Draws of the simulated null per record length (p-values resolve to about 1 / NULL_DRAWS
#: before the tail extrapolation takes over).
NULL_DRAWS = 2000
#: Shortest segment after a change the scan considers (common practice, no source: fewer than
#: three cells cannot tell a shift from one large error).
MIN_SEGMENT = 3
_SEED = 20261202
_TAIL_AT = 0.005
_PHI_MAX = 0.8  # largest autocorrelation allowed for in the long-run variance (common practice, no source)
_FITTED_BIAS = 2.4  # see long_run_variance: autocorrelation lost to a fitted change point (simulated)
_MAD_TO_SD = 1.4826  # 1 / Phi^-1(3/4): MAD of a normal sample to its sd (standard constant)


@dataclass(frozen=True)
class ScanResult:
    """Per-row outcome of :func:`bias_scan` or :func:`size_shift` (arrays of one entry per row).

    ``statistic`` the studentised maximum; ``start`` the 0-based cell where the change begins
    (the maximiser); ``p_value`` from the simulated null; ``shift`` the mean of the row from
    ``start`` on minus the reference (0 for the scan, the mean before ``start`` for the size
    test); ``lrv`` the long-run variance used; ``phi`` the autocorrelation behind it.
    """

    statistic: np.ndarray
    start: np.ndarray
    p_value: np.ndarray
    shift: np.ndarray
    lrv: np.ndarray
    phi: np.ndarray


def _rows(x, name: str, fn: str, minimum: int) -> np.ndarray:
    x = np.asarray(x, dtype=float)
    if x.ndim == 1:
        x = x[None, :]
    if x.ndim != 2:
        raise InputError(fn, f"{name} must be one sequence or a 2-D array of sequences, got {x.ndim} dimensions")
    if x.shape[1] < minimum:
        raise InputError(fn, f"{name} has {x.shape[1]} cells per sequence; the test needs at least {minimum}")
    if not np.isfinite(x).all():
        raise InputError(fn, f"{name} holds missing or infinite values; pass complete sequences")
    return x


def robust_spread(r: np.ndarray, *, clip: float = 2.5) -> np.ndarray:
    """Per row: the standard deviation of r winsorised at median +- clip x 1.4826 MAD.

    The MAD (Hampel 1974; 1.4826 makes it estimate the normal sd) sets the fences, so a few
    wild errors cannot inflate the spread; inside them the plain standard deviation keeps
    nearly full efficiency on normal errors, where the MAD alone would waste most of a short
    record (Huber 1981, winsorised scale; from memory). When more than half the values are
    equal (zero MAD) the fences fall back to the plain standard deviation.
    """
    r = np.asarray(r, dtype=float)
    med = np.median(r, axis=-1, keepdims=True)
    mad = _MAD_TO_SD * np.median(np.abs(r - med), axis=-1, keepdims=True)
    fence = clip * np.where(mad > 0, mad, r.std(axis=-1, ddof=1, keepdims=True))
    return np.clip(r, med - fence, med + fence).std(axis=-1, ddof=1)


def long_run_variance(r, *, method: str = "ar1", bandwidth: int | None = None, robust: bool = True,
                      fitted_bias: float = 1.0) -> np.ndarray:
    """Long-run variance per row of residuals r (mean removed by the caller).

    lrv = lim n Var(mean r) = gamma_0 + 2 sum_{j>=1} gamma_j.
    ``method="ar1"`` (default): the AR(1) plug-in of Andrews (1991) "Heteroskedasticity and
    autocorrelation consistent covariance matrix estimation", *Econometrica* 59, 817-858:
    lrv = s^2 (1 + phi) / (1 - phi), with phi the lag-1 autocorrelation, bias-corrected for a
    short record as phi~ = (n phi^ + c) / (n - 3c), c = ``fitted_bias`` (c = 1: Kendall 1954,
    E phi^ ~ phi - (1 + 3 phi)/n for residuals about a mean, from memory; residuals about a
    fitted change point lose more autocorrelation, and the tests here use c = 2.4, measured by
    simulation of AR(1) records of 24-48 cells with phi 0-0.5) and clipped to [0, 0.8] (negative autocorrelation is not used to narrow the
    limits). s is :func:`robust_spread` (``robust=True``) or the plain standard deviation.
    ``method="bartlett"``: Newey & West (1987) "A simple, positive semi-definite,
    heteroskedasticity and autocorrelation consistent covariance matrix", *Econometrica* 55,
    703-708: gamma_0 + 2 sum_{j=1..L} (1 - j/(L+1)) gamma_j with gamma_j = (1/n) sum r_t r_{t-j},
    L = ``bandwidth`` (default floor(4 (n/100)^(2/9)), their rule of thumb); ``robust`` unused.
    Returns an array with one value per row (a float for a 1-D input).
    """
    x = np.asarray(r, dtype=float)
    single = x.ndim == 1
    x = x[None, :] if single else x
    n = x.shape[1]
    if n < 4:
        raise InputError("long_run_variance", f"{n} values per row; the estimate needs at least 4")
    d = x - x.mean(axis=1, keepdims=True)
    gamma0 = np.einsum("ij,ij->i", d, d) / n
    if method == "bartlett":
        lag = int(bandwidth if bandwidth is not None else np.floor(4 * (n / 100) ** (2 / 9)))
        out = gamma0.copy()
        for j in range(1, lag + 1):
            out += 2 * (1 - j / (lag + 1)) * np.einsum("ij,ij->i", d[:, j:], d[:, :-j]) / n
    elif method == "ar1":
        phi = np.clip((n * lag1(d) + fitted_bias) / (n - 3 * fitted_bias), 0.0, _PHI_MAX)
        s2 = robust_spread(d) ** 2 if robust else d.var(axis=1, ddof=1)
        out = s2 * (1 + phi) / (1 - phi)
    else:
        raise InputError("long_run_variance", f"method {method!r} is unknown; use ar1 or bartlett")
    return float(out[0]) if single else out


def lag1(r) -> np.ndarray:
    """Lag-1 autocorrelation per row, sum d_t d_{t-1} / sum d_t^2 with d = r - mean(r) (0 for a constant row)."""
    d = np.asarray(r, dtype=float)
    d = d - d.mean(axis=-1, keepdims=True)
    den = np.einsum("...j,...j->...", d, d)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(den > 0, np.einsum("...j,...j->...", d[..., 1:], d[..., :-1]) / den, 0.0)


def bridge_sup_sf(x, *, two_sided: bool = True) -> np.ndarray:
    """Survival function of the supremum of a standard Brownian bridge B on [0, 1].

    Two-sided, sup |B| (the Kolmogorov distribution): P(sup |B| > x) = 2 sum_{k>=1} (-1)^(k-1)
    exp(-2 k^2 x^2) (Kolmogorov 1933; scipy's ``kstwobign``). One-sided, sup B:
    P(sup B > x) = exp(-2 x^2) for x >= 0 (Doob 1949). Orientation: larger x, smaller p.
    """
    x = np.asarray(x, dtype=float)
    if two_sided:
        return stats.kstwobign.sf(x)
    return np.where(x <= 0, 1.0, np.exp(-2 * np.maximum(x, 0) ** 2))


def corrected_phi(resid) -> np.ndarray:
    """Per row: the bias-corrected lag-1 autocorrelation of residuals about a fitted change,
    clipped to [0, 0.8], as :func:`long_run_variance` uses it (callers pool it across rows)."""
    r = np.asarray(resid, dtype=float)
    n = r.shape[-1]
    return np.clip((n * lag1(r) + _FITTED_BIAS) / (n - 3 * _FITTED_BIAS), 0.0, _PHI_MAX)


def _scan_fit(e: np.ndarray, min_segment: int) -> tuple[np.ndarray, ...]:
    """(max score, start, shift, residuals) of the bias scan; scale-free, so no variance needed yet."""
    n = e.shape[1]
    tail = np.cumsum(e[:, ::-1], axis=1)[:, ::-1][:, : n - min_segment + 1]  # sum_{t>=k} for k = 0..n-L
    length = n - np.arange(tail.shape[1])
    score = np.abs(tail) / np.sqrt(length)
    start = score.argmax(axis=1)
    rows = np.arange(e.shape[0])
    shift = tail[rows, start] / length[start]
    fitted = np.where(np.arange(n)[None, :] >= start[:, None], shift[:, None], 0.0)
    return score[rows, start], start, shift, e - fitted


def _size_fit(g: np.ndarray, min_segment: int) -> tuple[np.ndarray, ...]:
    """(max score / sqrt(n), start, shift, residuals) of the size test."""
    n = g.shape[1]
    dev = np.cumsum(g - g.mean(axis=1, keepdims=True), axis=1)[:, :-1]  # S_k, k = 1..n-1 cells before
    split = np.arange(1, n)
    allowed = (split >= 2) & (n - split >= min_segment)
    score = np.where(allowed[None, :], -dev, -np.inf)
    at = score.argmax(axis=1)
    start = split[at]
    rows = np.arange(g.shape[0])
    after = np.arange(n)[None, :] >= start[:, None]
    count_after = after.sum(axis=1)
    mean_after = np.where(after, g, 0.0).sum(axis=1) / count_after
    mean_before = np.where(~after, g, 0.0).sum(axis=1) / (n - count_after)
    fitted = np.where(after, mean_after[:, None], mean_before[:, None])
    return score[rows, at] / np.sqrt(n), start, mean_after - mean_before, g - fitted


def _studentise(score: np.ndarray, resid: np.ndarray, phi: np.ndarray | None) -> tuple[np.ndarray, ...]:
    """(statistic, lrv, phi used): score / sqrt(lrv), lrv = spread^2 (1 + phi) / (1 - phi)."""
    phi = corrected_phi(resid) if phi is None else np.clip(np.asarray(phi, dtype=float), 0.0, _PHI_MAX)
    lrv = robust_spread(resid) ** 2 * (1 + phi) / (1 - phi)
    with np.errstate(divide="ignore", invalid="ignore"):
        stat = np.where(lrv > 0, score / np.sqrt(lrv), 0.0)
    return stat, lrv, phi


#: Autocorrelations at which the null is simulated (AR(1) errors with marginal sd 1).
PHI_GRID = (0.0, 0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8)


def _ar1(rng: np.random.Generator, draws: int, n: int, phi: float) -> np.ndarray:
    z = rng.standard_normal((draws, n))
    x = np.empty_like(z)
    x[:, 0] = z[:, 0]
    scale = np.sqrt(1 - phi * phi)
    for t in range(1, n):
        x[:, t] = phi * x[:, t - 1] + scale * z[:, t]
    return x


def _fit(test: str, x: np.ndarray, min_segment: int):
    return _scan_fit(x, min_segment) if test == "scan" else _size_fit(x, min_segment)


@functools.lru_cache(maxsize=512)
def _null(test: str, n: int, min_segment: int, pooled: bool) -> tuple[np.ndarray, np.ndarray]:
    """Simulated null per autocorrelation of :data:`PHI_GRID` for a record of n cells (fixed seed).

    Returns (sorted statistics, one row per grid value; the autocorrelation index of each grid
    value). Own estimate (``pooled`` False): each draw is studentised with its own corrected
    residual autocorrelation and the index is their median. Pooled: every draw uses the mean
    over all draws, as a ledger pools it over many series, and that mean is the index.
    """
    rng = np.random.default_rng([_SEED, n, min_segment, 0 if test == "scan" else 1])
    tables, index = [], []
    for phi in PHI_GRID:
        z = _ar1(rng, NULL_DRAWS, n, phi)
        score, _, _, resid = _fit(test, z if test == "scan" else np.sqrt(np.abs(z)), min_segment)
        own = corrected_phi(resid)
        given = np.full(own.shape, own.mean()) if pooled else None
        stat = _studentise(score, resid, given)[0]
        tables.append(np.sort(stat))
        index.append(float(own.mean() if pooled else np.median(own)))
    return np.stack(tables), np.maximum.accumulate(np.asarray(index))


#: Record lengths at which the null is simulated; other lengths interpolate between the two
#: nearest (the null changes slowly with n), so a ledger needs a handful of tables, not one per length.
N_GRID = (8, 10, 12, 14, 16, 20, 24, 30, 36, 42, 48, 60, 72, 96, 120, 180, 240)


def _p_values(stat: np.ndarray, phi: np.ndarray, test: str, n: int, min_segment: int, pooled: bool,
              tail_shape) -> np.ndarray:
    """p-value of each row, interpolated linearly between the simulated nulls of the two grid
    record lengths around n (exact n beyond the grid) and, within each, between the two grid
    autocorrelations around the row's (:func:`_p_at_length`)."""
    grid = np.asarray(N_GRID)
    if n <= grid[0] or n >= grid[-1] or n in N_GRID:
        return _p_at_length(stat, phi, test, n, min_segment, pooled, tail_shape)
    hi = int(grid[np.searchsorted(grid, n)])
    lo = int(grid[np.searchsorted(grid, n) - 1])
    w = (n - lo) / (hi - lo)
    return ((1 - w) * _p_at_length(stat, phi, test, lo, min_segment, pooled, tail_shape)
            + w * _p_at_length(stat, phi, test, hi, min_segment, pooled, tail_shape))


def _p_at_length(stat: np.ndarray, phi: np.ndarray, test: str, n: int, min_segment: int, pooled: bool,
                 tail_shape) -> np.ndarray:
    """p-value of each row against the simulated nulls of length n that bracket its autocorrelation.

    The row's (own or pooled) autocorrelation falls between the indices of two grid nulls; its
    p-value is interpolated linearly between theirs. At or below the first index the first
    null is used, above the last the last null.
    """
    tables, index = _null(test, n, min_segment, pooled)
    where = np.clip(phi, index[0], index[-1])
    hi = np.clip(np.searchsorted(index, where, side="left"), 1, len(index) - 1)
    lo = hi - 1
    span = index[hi] - index[lo]
    with np.errstate(divide="ignore", invalid="ignore"):
        w = np.where(span > 0, (where - index[lo]) / span, 1.0)
    every = np.stack([_table_p(stat, table, tail_shape) for table in tables])
    rows = np.arange(stat.size)
    return (1 - w) * every[lo, rows] + w * every[hi, rows]


def _table_p(stat: np.ndarray, null: np.ndarray, tail_shape) -> np.ndarray:
    """Simulated p-value (1 + #null >= s) / (B + 1); beyond the 0.1% point, tail_shape(s) scaled to match there."""
    b = null.size
    p = (1 + b - np.searchsorted(null, stat, side="left")) / (b + 1)
    cut = null[int(np.ceil((1 - _TAIL_AT) * b)) - 1]
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        ratio = tail_shape(stat) / tail_shape(np.array(cut))
    extrapolated = _TAIL_AT * np.where(np.isfinite(ratio), ratio, 0.0)
    return np.where(stat > cut, np.minimum(extrapolated, _TAIL_AT), p)


def bias_scan(e, *, min_segment: int = MIN_SEGMENT, phi=None) -> ScanResult:
    """Scan for a mean error that moves away from zero at an unknown cell (rows of e).

    Statistic: T = max_{0 <= k <= n - L} |sum_{t=k}^{n-1} e_t| / sqrt((n - k) lrv), L =
    ``min_segment``; the maximiser k is the estimated start (0: biased from the first cell),
    ``shift`` the mean error from k on. lrv: :func:`long_run_variance` of e minus the fitted
    step. Null: mean 0 throughout (an unbiased forecast); p-value from the simulated null of
    the same statistic (module docstring). Orientation: larger T, stronger evidence; the sign of
    ``shift`` says the direction (positive: forecasts too low).
    ``phi``: a given autocorrelation per row (or one for all), e.g. pooled over the series of
    one model and horizon with :func:`residual_phi`; None estimates it from each row alone.
    Reference: the likelihood-ratio scan for a change in mean of Gaussian data, Csorgo & Horvath
    (1997) "Limit Theorems in Change-Point Analysis", Wiley, ch. 1 (from memory).
    """
    e = _rows(e, "e", "bias_scan", max(4, min_segment + 1))
    return _test("scan", e, int(min_segment), phi, stats.norm.sf)


def size_shift(g, *, min_segment: int = MIN_SEGMENT, phi=None) -> ScanResult:
    """One-sided CUSUM-of-deviations test for an increase in the level of g (rows), e.g. sqrt(|e|/q).

    Statistic: T = max_k -(S_k - (k/n) S_n) / sqrt(n lrv), S_k = sum of the first k values,
    over splits with at least 2 cells before and ``min_segment`` after; the maximiser is the
    estimated start of the increase, ``shift`` the mean of g after minus before. Limit under no
    change: sup of a Brownian bridge, P(T > x) -> exp(-2 x^2) (:func:`bridge_sup_sf`); the
    p-value comes from the simulated null of T for |N(0, 1)| errors under the square root
    (module docstring), whose tail is extrapolated with that limit's shape.
    ``phi``: as in :func:`bias_scan`.
    Reference: Csorgo & Horvath (1997) "Limit Theorems in Change-Point Analysis", ch. 1-2 (CUSUM
    of deviations; from memory); Page (1954) for the CUSUM idea.
    """
    g = _rows(g, "g", "size_shift", max(4, min_segment + 2))
    return _test("size", g, int(min_segment), phi, _one_sided_sf)


def _test(test: str, x: np.ndarray, min_segment: int, phi, tail_shape) -> ScanResult:
    score, start, shift, resid = _fit(test, x, min_segment)
    pooled = phi is not None
    if pooled:
        phi = np.broadcast_to(np.asarray(phi, dtype=float), score.shape)
    stat, lrv, used = _studentise(score, resid, phi)
    p = _p_values(stat, used, test, x.shape[1], min_segment, pooled, tail_shape)
    return ScanResult(stat, start, p, shift, lrv, used)


def residual_phi(test: str, x, *, min_segment: int = MIN_SEGMENT) -> np.ndarray:
    """Per row of x, the corrected autocorrelation the test would estimate on its own
    (``test`` "scan" on errors e, "size" on g), for pooling over the series of one model and
    horizon before calling :func:`bias_scan` / :func:`size_shift` with ``phi``."""
    x = _rows(x, "x", "residual_phi", max(4, min_segment + 2))
    return corrected_phi(_fit(test, x, int(min_segment))[3])


def _one_sided_sf(x):
    return bridge_sup_sf(x, two_sided=False)


def bonferroni_pair(p1, p2) -> np.ndarray:
    """One p-value per sequence from its two tests: min(1, 2 min(p1, p2)) (Bonferroni)."""
    return np.minimum(1.0, 2 * np.minimum(np.asarray(p1, dtype=float), np.asarray(p2, dtype=float)))
