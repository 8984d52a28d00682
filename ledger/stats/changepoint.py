"""Retrospective change-point tests for error sequences; pure, vectorised over rows.

Each function takes a 2-D array, one row per sequence (one series x model x horizon, errors
ordered by target period), all rows of one length; callers stack sequences of equal length so
thousands of them are tested at once.

Two tests, each over the whole record (no reference window, so no blind spot at the start):

* :func:`bias_scan` -- a shift of the mean error away from zero, the target of an unbiased
  forecast, starting at an unknown cell k (k = 0: biased from the first cell). It is the
  likelihood-ratio (GLS) scan under AR(1) errors: the errors are whitened with the
  autocorrelation phi (e_t - phi e_{t-1}), which turns a level step of size mu into a spike of
  mu at its start and (1 - phi) mu after it, and at each k the step is fitted by GLS; the
  statistic is the largest GLS z over k, max_k |x~_k'w| / (sqrt(x~_k'x~_k) s_w). At phi = 0 it
  is the plain Gaussian scan max_k |sum_{t>=k} e_t| / sqrt((n - k) s^2) (Csorgo & Horvath 1997,
  "Limit Theorems in Change-Point Analysis", ch. 1; from memory). The change is dated at the k
  whose +-2-cell window holds the most posterior probability of the start (:func:`_dated`), the
  Bayes date for "within +-2 periods"; it is the maximising k most of the time. Sources: Kim (1996) "Change-point
  detection for correlated observations", *Statistica Sinica* 6, 275-287 (the likelihood-ratio
  test for a change in mean under AR(p) errors, p-values approximated, not closed form; read
  from its abstract); Robbins, Gallagher, Lund & Aue (2011) "Mean shift testing in correlated
  data", *J. Time Series Analysis* 32 (prewhitening before a mean-shift test; from memory);
  Bai (1994) "Least squares estimation of a shift in linear processes", *J. Time Series
  Analysis* 15 (serial correlation widens the dating error of a fitted shift; read from the
  abstract of its working paper).
* :func:`size_shift` -- an increase in error size: the one-sided CUSUM of deviations of
  g_t = sqrt(|e_t| / q_t), max_k -(S_k - k/n S_n) / sqrt(n * lrv), whose limit under no change
  is the supremum of a Brownian bridge, P(sup B > x) = exp(-2 x^2) (Csorgo & Horvath 1997,
  Theorem 1.5.1 type results; the Kolmogorov-Smirnov one-sided limit; from memory, checked by
  simulation in the tests). The square root makes |e| roughly symmetric, as in Hawkins's scale
  CUSUM (from memory).

In-control estimates are robust and taken about the fitted change, so a shift does not inflate
its own yardstick: residuals are the (whitened, for the scan) values minus the fitted step,
their spread is the standard deviation winsorised at median +- 2.5 x 1.4826 MAD
(:func:`robust_spread`), and the autocorrelation is the lag-1 autocorrelation of the residuals
about the plain fitted step, bias-corrected and clipped to [0, 0.8] (:func:`corrected_phi`),
pooled by the caller over a model's series (one short record cannot estimate it well), because
multi-step errors from consecutive origins overlap and wander. The size test widens its spread
for that autocorrelation with an AR(1) long-run variance (:func:`long_run_variance`; Andrews 1991).

p-values: the statistics are studentised with estimated spreads, so their small-sample null
is simulated once per record length (fixed seed, :data:`NULL_DRAWS` draws) and cached; beyond the simulated range the tail is extrapolated with
the shape of the limit (normal tail for the scan, exp(-2x^2) for the bridge) matched at the
0.5% point. The null is simulated at the autocorrelations of :data:`PHI_GRID` (AR(1) errors
through the same estimators) and a row's p-value interpolated between the two grid nulls around
its autocorrelation, so under Gaussian AR(1) errors the p-values are exact up to simulation
and interpolation error (measured in tests/benchmarks/bench_findings.py).

Sign convention: e = actual - forecast; a positive shift means forecasts too low.
"""

from __future__ import annotations

import functools
from dataclasses import dataclass

import numpy as np
from scipy import stats

from ..errors import InputError
from .signals import cusum_path

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
    "whiten",
    "cusum_onset",
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
    (scan: the window mode of :func:`_dated`; size test: the maximiser); ``p_value`` from the simulated null; ``shift`` the mean of the row from
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


def _gls_fit(e: np.ndarray, phi: np.ndarray, min_segment: int) -> tuple[np.ndarray, ...]:
    """(max GLS score, start, shift, whitened residuals) of the bias scan under AR(1) errors.

    Prais-Winsten whitening with the given phi per row, w_0 = sqrt(1 - phi^2) e_0 and
    w_t = e_t - phi e_{t-1}, turns the errors into iid innovations and a step of size mu from
    cell k into a regressor x~ that is 0 before k, 1 at k (sqrt(1 - phi^2) when k = 0) and
    1 - phi after. The score at k is |x~'w| / sqrt(x~'x~), the GLS z of the step up to the
    innovation spread; at phi = 0 it is the plain scan |sum_{t>=k} e_t| / sqrt(n - k).
    """
    n = e.shape[1]
    phi = np.asarray(phi, dtype=float)[:, None]
    head = np.sqrt(1 - phi * phi)
    w = whiten(e, phi[:, 0])
    ks = np.arange(n - min_segment + 1)
    after = np.concatenate([np.cumsum(w[:, ::-1], axis=1)[:, ::-1][:, 1:], np.zeros((e.shape[0], 1))], axis=1)
    lead = np.where(ks[None, :] == 0, head, 1.0)  # weight of the cell where the step begins
    num = lead * w[:, ks] + (1 - phi) * after[:, ks]
    den = lead * lead + (n - ks - 1)[None, :] * (1 - phi) ** 2
    score = np.abs(num) / np.sqrt(den)
    best = score.argmax(axis=1)
    rows = np.arange(e.shape[0])
    resid = w - (num[rows, best] / den[rows, best])[:, None] * _step(n, best, phi, head)
    start = _dated(num, den, robust_spread(resid) ** 2)
    shift = num[rows, start] / den[rows, start]
    return score[rows, best], start, shift, resid


def _step(n: int, start: np.ndarray, phi: np.ndarray, head: np.ndarray) -> np.ndarray:
    """The whitened step regressor x~ per row: 0 before start, 1 at it (head at cell 0), 1 - phi after."""
    t = np.arange(n)[None, :]
    s0 = start[:, None]
    return np.where(t < s0, 0.0, np.where(t == s0, np.where(s0 == 0, head, 1.0), 1 - phi))


#: Dating tolerance the start is chosen for, in cells either side (the issue's "within +-2 periods").
DATE_WINDOW = 2


def _dated(num: np.ndarray, den: np.ndarray, s2: np.ndarray) -> np.ndarray:
    """Per row, the start k whose window k +- DATE_WINDOW holds the most posterior probability.

    Posterior of the start under a flat prior on k and on the step size, the innovation
    variance s2 taken as known: p(k) proportional to exp(N_k^2 / (2 D_k s2)) / sqrt(D_k), N_k =
    x~_k'w, D_k = x~_k'x~_k (Smith 1975, "A Bayesian approach to inference about a change-point
    in a sequence of random variables", *Biometrika* 62; from memory). The window mode is the
    Bayes date for the loss "wrong by more than DATE_WINDOW cells"; it dates no worse than the
    maximum-likelihood k on that loss, measured in tests/benchmarks/bench_findings.py.
    """
    with np.errstate(divide="ignore", invalid="ignore"):
        ll = np.where(s2[:, None] > 0, num * num / (2 * den * s2[:, None]), 0.0) - 0.5 * np.log(den)
    post = np.exp(ll - ll.max(axis=1, keepdims=True))
    padded = np.pad(post, ((0, 0), (DATE_WINDOW, DATE_WINDOW)))
    width = post.shape[1]
    window = sum(padded[:, j:j + width] for j in range(2 * DATE_WINDOW + 1))
    return window.argmax(axis=1)


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


def _studentise(test: str, score: np.ndarray, resid: np.ndarray, phi: np.ndarray) -> tuple[np.ndarray, ...]:
    """(statistic, lrv): score / spread.

    Scan: resid are whitened innovations, so the statistic is score / their spread and
    lrv = spread^2 / (1 - phi)^2, the long-run variance of an AR(1) with that innovation
    spread. Size test: score / sqrt(lrv), lrv = spread^2 (1 + phi) / (1 - phi) (Andrews 1991).
    """
    spread = robust_spread(resid)
    if test == "scan":
        lrv = spread ** 2 / (1 - phi) ** 2
        scale = spread
    else:
        lrv = spread ** 2 * (1 + phi) / (1 - phi)
        scale = np.sqrt(lrv)
    with np.errstate(divide="ignore", invalid="ignore"):
        stat = np.where(scale > 0, score / scale, 0.0)
    return stat, lrv


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


def _fit(test: str, x: np.ndarray, min_segment: int, phi: np.ndarray):
    """Fit of ``test`` on rows of x; the scan weights its cells by the autocorrelation phi (per row)."""
    return _size_fit(x, min_segment) if test == "size" else _gls_fit(x, phi, min_segment)


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
        x = z if test == "scan" else np.sqrt(np.abs(z))
        own = _own_phi(test, x, min_segment)
        given = np.full(own.shape, own.mean()) if pooled else own
        score, _, _, resid = _fit(test, x, min_segment, given)
        stat = _studentise(test, score, resid, given)[0]
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
    """Scan for a mean error that moves away from zero at an unknown cell (rows of e), allowing
    for AR(1) errors.

    Model: e_t = mu 1{t >= k} + u_t, u an AR(1) with autocorrelation phi. Whitened (Prais-Winsten)
    w_0 = sqrt(1 - phi^2) e_0, w_t = e_t - phi e_{t-1}; the step becomes x~_k: 0 before k, 1 at
    k (sqrt(1 - phi^2) at k = 0), 1 - phi after. Statistic: T = max_{0 <= k <= n - L}
    |x~_k'w| / (sqrt(x~_k'x~_k) s_w), L = ``min_segment``, s_w the robust spread of the whitened
    residuals about the fitted step (at the maximising k). The estimated start (0: biased from
    the first cell) is the k whose +-2-cell window holds the most posterior probability
    (:func:`_dated`; usually the maximising k, the maximum-likelihood change point given phi),
    ``shift`` the GLS estimate of mu from that start, ``lrv`` = s_w^2 / (1 - phi)^2. At phi = 0 this is the plain scan |sum_{t>=k} e_t| /
    sqrt((n - k) s^2). Null: mean 0 throughout (an unbiased forecast); p-value from the simulated
    null of the same statistic and estimators (module docstring). Orientation: larger T, stronger
    evidence; the sign of ``shift`` says the direction (positive: forecasts too low).
    ``phi``: a given autocorrelation per row (or one for all), e.g. pooled over the series of
    one model and horizon with :func:`residual_phi`; None estimates it from each row alone.
    References: Kim (1996), Robbins et al. (2011), Csorgo & Horvath (1997) (module docstring).
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
    pooled = phi is not None
    if pooled:
        used = np.clip(np.broadcast_to(np.asarray(phi, dtype=float), x.shape[:1]), 0.0, _PHI_MAX)
    else:
        used = _own_phi(test, x, min_segment)
    score, start, shift, resid = _fit(test, x, min_segment, used)
    stat, lrv = _studentise(test, score, resid, used)
    p = _p_values(stat, used, test, x.shape[1], min_segment, pooled, tail_shape)
    return ScanResult(stat, start, p, shift, lrv, used)


def _own_phi(test: str, x: np.ndarray, min_segment: int) -> np.ndarray:
    """Corrected autocorrelation of each row's residuals about its plain (unweighted) fit; the
    bias correction of :func:`corrected_phi` was measured for those residuals."""
    return corrected_phi((_scan_fit(x, min_segment) if test == "scan" else _size_fit(x, min_segment))[3])


def residual_phi(test: str, x, *, min_segment: int = MIN_SEGMENT) -> np.ndarray:
    """Per row of x, the corrected autocorrelation the test would estimate on its own
    (``test`` "scan" on errors e, "size" on g), for pooling over the series of one model and
    horizon before calling :func:`bias_scan` / :func:`size_shift` with ``phi``."""
    x = _rows(x, "x", "residual_phi", max(4, min_segment + 2))
    return _own_phi(test, x, int(min_segment))


def _one_sided_sf(x):
    return bridge_sup_sf(x, two_sided=False)


def bonferroni_pair(p1, p2) -> np.ndarray:
    """One p-value per sequence from its two tests: min(1, 2 min(p1, p2)) (Bonferroni)."""
    return np.minimum(1.0, 2 * np.minimum(np.asarray(p1, dtype=float), np.asarray(p2, dtype=float)))


def whiten(e, phi) -> np.ndarray:
    """Prais-Winsten whitening along the last axis: w_0 = sqrt(1 - phi^2) e_0, w_t = e_t - phi e_{t-1}.

    Under AR(1) errors with autocorrelation phi the result is iid with the innovation spread
    (Prais & Winsten 1954; from memory); ``phi`` is a scalar or one value per row.
    """
    e = np.asarray(e, dtype=float)
    phi = np.asarray(phi, dtype=float)[..., None] if np.ndim(phi) else float(phi)
    head = np.sqrt(1 - phi * phi)
    return np.concatenate([head * e[..., :1], e[..., 1:] - phi * e[..., :-1]], axis=-1)


def cusum_onset(z, *, k: float = 0.5, h: float = 4.0, upward: bool = True, from_cell: int = 0
                ) -> tuple[int | None, int | None]:
    """(alarm, onset) of a one-sided tabular CUSUM over one standardised sequence z.

    C_t = max(0, C_{t-1} + z_t - k) for an upward shift (-z_t for a downward one), run over
    the whole of z; ``alarm`` is the first cell at or after ``from_cell`` where C > h, ``onset``
    the cell after the last one before the alarm where C was 0 (0 if it never was). The onset,
    not the alarm, dates the change: it is the maximum-likelihood start of a shift of size 2k
    that is still under way at the alarm (Page 1954 "Continuous inspection schemes",
    *Biometrika* 41; Montgomery, *Introduction to Statistical Quality Control*, CUSUM chapter;
    from memory). (None, None) when C never exceeds h from ``from_cell`` on. NaN z carries no
    evidence (C keeps its value).
    """
    z = np.asarray(z, dtype=float)
    if z.ndim != 1:
        raise InputError("cusum_onset", f"z must be one sequence, got {z.ndim} dimensions")
    upper, lower = cusum_path(z, k=k)
    path = upper if upward else lower
    above = np.flatnonzero(path[max(0, int(from_cell)):] > h)
    if above.size == 0:
        return None, None
    alarm = int(above[0]) + max(0, int(from_cell))
    zeros = np.flatnonzero(path[:alarm] == 0)
    return alarm, int(zeros[-1]) + 1 if zeros.size else 0
