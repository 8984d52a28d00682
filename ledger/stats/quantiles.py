"""Quantile and interval forecasts scored as distributions: WIS and its parts, quantile CRPS,
shares below each quantile, PIT from quantiles and the tests of their calibration.

Pure array-in/array-out functions; the SQL of :mod:`ledger.scoring.quantile_sql` is checked
against them. Conventions as in :mod:`ledger.stats.metrics`: observations first (``y``), options
keyword-only, lower is better for every score, the error sign is e = y - f (positive: the
forecast was too low). One row per cell; quantile levels ``taus`` along the last axis.

Weighted interval score (Bracher, Ray, Gneiting & Reich 2021, "Evaluating epidemic forecasts in
an interval format", *PLOS Computational Biology* 17(2), e1008618, eq. 3): for K central
intervals [l_k, u_k] of levels 1 - alpha_k and the median m,

    WIS = (w0 |y - m| + sum_k w_k IS_{alpha_k}(l_k, u_k; y)) / (K + 1/2),  w0 = 1/2, w_k = alpha_k/2,

with IS the interval score of Gneiting & Raftery (2007, eq. 43). Since (alpha/2) IS_alpha =
(alpha/2)(u - l) + (l - y)+ + (y - u)+, WIS splits into dispersion (the width terms), over-
prediction (actual below the median or a lower bound: forecasts too high) and underprediction
(actual above: too low), which sum to WIS.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import numpy.typing as npt

__all__ = [
    "WISParts",
    "TAU_DIGITS",
    "central_pairs",
    "weighted_interval_score",
    "wis_from_quantiles",
    "quantile_crps",
    "below_shares",
    "pit_from_quantiles",
    "pit_bin_counts",
    "pit_uniformity",
    "quantile_binomial",
    "binomial_band",
]

FloatArray = npt.NDArray[np.float64]

#: Quantile levels are compared after rounding to this many decimals (0.1 + 0.9 is not exactly 1).
TAU_DIGITS = 9


@dataclasses.dataclass(frozen=True)
class WISParts:
    """Per-cell WIS and its decomposition; ``wis = dispersion + overprediction + underprediction``."""

    wis: FloatArray
    dispersion: FloatArray
    overprediction: FloatArray
    underprediction: FloatArray


def _taus(taus: npt.ArrayLike) -> FloatArray:
    arr = np.round(np.asarray(taus, dtype=float), TAU_DIGITS)
    if arr.ndim != 1 or arr.size == 0:
        raise ValueError(f"taus must be a non-empty 1-D sequence of levels, got shape {arr.shape}")
    if ((arr <= 0) | (arr >= 1)).any() or (np.diff(arr) <= 0).any():
        raise ValueError(f"taus must be increasing levels strictly inside (0, 1), got {arr.tolist()}")
    return arr


def _quantiles(q: npt.ArrayLike, k: int) -> FloatArray:
    arr = np.asarray(q, dtype=float)
    if arr.ndim == 1:
        arr = arr[None, :]
    if arr.ndim != 2 or arr.shape[1] != k:
        raise ValueError(f"quantiles must have shape (cells, {k}), got {np.shape(q)}")
    if (np.diff(arr, axis=1) < 0).any():
        raise ValueError("quantiles decrease with tau in some cell; sort or fix them")
    return arr


def central_pairs(taus: npt.ArrayLike) -> tuple[list[tuple[int, int]], int | None]:
    """Index pairs (i, j) with taus[i] + taus[j] = 1 and taus[i] < 0.5, outermost first, and the
    index of the median (tau = 0.5) or None.

    >>> central_pairs([0.1, 0.25, 0.5, 0.75, 0.9, 0.95])
    ([(0, 4), (1, 3)], 2)
    """
    t = _taus(taus)
    where = {float(v): i for i, v in enumerate(t)}
    pairs = [(i, where[round(1 - float(v), TAU_DIGITS)]) for i, v in enumerate(t)
             if v < 0.5 and round(1 - float(v), TAU_DIGITS) in where]
    return pairs, where.get(0.5)


def weighted_interval_score(y: npt.ArrayLike, median: npt.ArrayLike, lower: npt.ArrayLike,
                            upper: npt.ArrayLike, *, alphas: npt.ArrayLike) -> WISParts:
    """WIS of K central intervals and a median, with its decomposition (Bracher et al. 2021, eq. 3).

    ``y``, ``median``: shape (n,); ``lower``, ``upper``: shape (n, K); ``alphas``: shape (K,),
    alpha_k = 1 - level_k/100. Weights w0 = 1/2, w_k = alpha_k/2 (theirs). Orientation: lower is
    better; WIS = |y - m| when K = 0 and is in the units of y. Overprediction collects
    (m - y)+/2 and the (l_k - y)+ terms (the forecast distribution sat too high), underprediction
    (y - m)+/2 and the (y - u_k)+ terms, dispersion the (alpha_k/2)(u_k - l_k).

    >>> p = weighted_interval_score([10.0], [8.0], [[6.0]], [[9.0]], alphas=[0.2])
    >>> round(float(p.wis[0]), 6), round(float(p.underprediction[0]), 6)
    (1.533333, 1.333333)
    """
    y = np.atleast_1d(np.asarray(y, dtype=float))
    m = np.atleast_1d(np.asarray(median, dtype=float))
    alphas = np.atleast_1d(np.asarray(alphas, dtype=float))
    lo = np.asarray(lower, dtype=float).reshape(y.size, alphas.size)
    hi = np.asarray(upper, dtype=float).reshape(y.size, alphas.size)
    if ((alphas <= 0) | (alphas >= 1)).any():
        raise ValueError(f"alphas must lie strictly inside (0, 1), got {alphas.tolist()}")
    if (lo > hi).any():
        raise ValueError("a lower bound lies above its upper bound; fix or swap the bounds")
    denom = alphas.size + 0.5
    yc = y[:, None]
    dispersion = (alphas / 2 * (hi - lo)).sum(axis=1) / denom
    over = (0.5 * np.maximum(m - y, 0) + np.maximum(lo - yc, 0).sum(axis=1)) / denom
    under = (0.5 * np.maximum(y - m, 0) + np.maximum(yc - hi, 0).sum(axis=1)) / denom
    return WISParts(dispersion + over + under, dispersion, over, under)


def wis_from_quantiles(y: npt.ArrayLike, q: npt.ArrayLike, *, taus: npt.ArrayLike,
                       point: npt.ArrayLike | None = None) -> WISParts:
    """WIS from quantile forecasts: the central intervals of the symmetric pairs (tau, 1 - tau)
    and the median q50 (the ``point`` forecast stands in when the levels lack 0.5).

    ``q``: shape (n, len(taus)). Levels without a partner are left out of WIS (they count in
    :func:`quantile_crps`). Raises ValueError when no pair exists, or no median and no point.
    """
    t = _taus(taus)
    q = _quantiles(q, t.size)
    pairs, mid = central_pairs(t)
    if not pairs:
        raise ValueError(f"no symmetric pair of levels (tau, 1 - tau) among {t.tolist()}")
    if mid is None and point is None:
        raise ValueError("no median (tau = 0.5) among the levels; pass the point forecast")
    median = q[:, mid] if mid is not None else np.asarray(point, dtype=float)
    lo = q[:, [i for i, _ in pairs]]
    hi = q[:, [j for _, j in pairs]]
    return weighted_interval_score(y, median, lo, hi, alphas=2 * t[[i for i, _ in pairs]])


def quantile_crps(y: npt.ArrayLike, q: npt.ArrayLike, *, taus: npt.ArrayLike) -> FloatArray:
    """CRPS approximated from quantile forecasts: 2/|T| * sum over tau in T of the pinball loss.

    Formula: CRPS(F, y) = 2 * integral_0^1 L_tau(F^-1(tau), y) d tau (Laio & Tamea 2007,
    "Verification tools for probabilistic forecasts of continuous hydrological variables", *HESS*
    11, 1267-1277; Gneiting & Ranjan 2011), replaced by the equally weighted mean over the given
    levels (Berrisch & Ziel 2023, "CRPS learning", *J. Econometrics* 237(2), 105221; the
    definition of scoringrules' ``crps_quantile``). Close to the CRPS only for many, evenly
    spread levels; for the symmetric pairs and the median it equals WIS. Lower is better.
    """
    t = _taus(taus)
    q = _quantiles(q, t.size)
    e = np.atleast_1d(np.asarray(y, dtype=float))[:, None] - q
    return 2.0 * np.maximum(t * e, (t - 1.0) * e).mean(axis=1)


def below_shares(y: npt.ArrayLike, q: npt.ArrayLike, *, taus: npt.ArrayLike) -> FloatArray:
    """Share of cells with y < q_tau, per level (shape (len(taus),)); about tau when calibrated."""
    t = _taus(taus)
    q = _quantiles(q, t.size)
    y = np.atleast_1d(np.asarray(y, dtype=float))
    return (y[:, None] < q).mean(axis=0)


def pit_from_quantiles(y: npt.ArrayLike, q: npt.ArrayLike, *, taus: npt.ArrayLike) -> FloatArray:
    """PIT values F(y) reconstructed from quantiles by linear interpolation between them.

    Inside [q_1, q_K], F is linear between neighbouring quantiles (a flat stretch of equal
    quantiles takes the middle of its levels). Beyond the outer quantiles nothing is known of the
    tails, so an actual below q_1 gets tau_1/2 and one above q_K gets (1 + tau_K)/2: the middle
    of the tail mass. Histogram bins whose edges are the levels themselves (:func:`pit_bin_counts`)
    therefore count exactly; only finer bins depend on the interpolation.
    """
    t = _taus(taus)
    q = _quantiles(q, t.size)
    y = np.atleast_1d(np.asarray(y, dtype=float))
    out = np.empty(y.size)
    idx = (q <= y[:, None]).sum(axis=1)            # number of quantiles at or below y
    low = y < q[:, 0]
    high = y > q[:, -1]
    inside = ~low & ~high
    i = np.clip(idx - 1, 0, t.size - 1)
    j = np.clip(idx, 0, t.size - 1)
    rows = np.arange(y.size)
    qa, qb = q[rows, i], q[rows, j]
    ta, tb = t[i], t[j]
    with np.errstate(invalid="ignore", divide="ignore"):
        frac = np.where(qb > qa, (y - qa) / (qb - qa), 0.0)
    out[inside] = (ta + frac * (tb - ta))[inside]
    # y equal to a run of tied quantiles: the middle of their levels
    ties = inside & (q == y[:, None]).any(axis=1)
    if ties.any():
        eq = q[ties] == y[ties, None]
        out[ties] = (eq * t).sum(axis=1) / eq.sum(axis=1)
    out[low] = t[0] / 2
    out[high] = (1 + t[-1]) / 2
    return out


def pit_bin_counts(pit: npt.ArrayLike, *, edges: npt.ArrayLike) -> np.ndarray:
    """Counts of PIT values in the bins [e_0, e_1), ..., [e_{B-1}, e_B] (the last bin closed)."""
    e = np.asarray(edges, dtype=float)
    counts, _ = np.histogram(np.asarray(pit, dtype=float), bins=e)
    return counts


def pit_uniformity(pit: npt.ArrayLike, *, taus: npt.ArrayLike) -> tuple[float, float, np.ndarray, np.ndarray]:
    """Pearson chi-square test that PIT values are uniform, in bins edged at the quantile levels.

    Bins [0, tau_1), [tau_1, tau_2), ..., [tau_K, 1] with expected shares their widths, so the
    count of each bin is exact for PIT from :func:`pit_from_quantiles` (the tails are one bin
    each). Statistic X2 = sum (O - nE)^2 / (nE), df = bins - 1 (Pearson 1900; the PIT histogram
    as a calibration check: Dawid 1984, Gneiting, Balabdaoui & Raftery 2007, "Probabilistic
    forecasts, calibration and sharpness", *JRSS B* 69(2), 243-268). Returns (statistic,
    p-value, observed counts, expected shares); p-value NaN when there are no cells.
    The chi-square approximation wants expected counts of about 5 per bin (common practice, no
    source); callers label smaller samples.
    """
    t = _taus(taus)
    edges = np.concatenate([[0.0], t, [1.0]])
    widths = np.diff(edges)
    pit = np.asarray(pit, dtype=float)
    counts = pit_bin_counts(pit, edges=edges)
    n = counts.sum()
    if n == 0:
        return float("nan"), float("nan"), counts, widths
    expected = n * widths
    x2 = float(((counts - expected) ** 2 / expected).sum())
    from scipy import stats   # on first use: scoring imports this module, and scipy slows start-up
    return x2, float(stats.chi2.sf(x2, widths.size - 1)), counts, widths


def quantile_binomial(below: int, n: int, *, tau: float) -> float:
    """Exact two-sided binomial p-value of ``below`` actuals under the tau quantile out of ``n``.

    Under calibration the count is Binomial(n, tau) (for continuous actuals); two-sided by the
    method of small p-values (scipy.stats.binomtest). NaN when n = 0.
    """
    if n == 0:
        return float("nan")
    from scipy import stats
    return float(stats.binomtest(int(below), int(n), float(tau)).pvalue)


def binomial_band(n: npt.ArrayLike, tau: npt.ArrayLike, *, level: float = 0.95) -> tuple[FloatArray, FloatArray]:
    """Central ``level`` range of the share below a calibrated tau quantile out of n cells.

    From the Binomial(n, tau) quantiles at (1 - level)/2 and (1 + level)/2, divided by n: where
    the observed share of a reliability diagram falls ``level`` of the time when the quantile is
    calibrated (a pointwise band, not a simultaneous one). NaN where n = 0.
    """
    from scipy import stats
    n = np.asarray(n, dtype=float)
    tau = np.asarray(tau, dtype=float)
    with np.errstate(invalid="ignore", divide="ignore"):
        lo = stats.binom.ppf((1 - level) / 2, n, tau) / n
        hi = stats.binom.ppf((1 + level) / 2, n, tau) / n
    bad = n <= 0
    return np.where(bad, np.nan, lo), np.where(bad, np.nan, hi)
