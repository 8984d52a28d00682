"""Point and interval accuracy metrics: pure, vectorised functions, one per metric.

Conventions shared by every function here:

* Observations come first (``y``), then the forecast (``f``, bounds or a quantile); options are
  keyword-only.
* Sign convention: the error is ``e = y - f`` (actual minus forecast). A positive error means the
  forecast was too low; a negative one, too high.
* Per-cell functions return an array of the broadcast shape of their inputs; NaN in an input
  gives NaN in the output (``interval_hits`` gives False).
* Aggregates take 1-D arrays for one group of cells and return a Python float. A cell with a NaN
  in any of its inputs is missing and skipped. Scaled aggregates also skip cells whose scale is
  not finite and positive (the cell has no scale). An empty group, or one with no usable cell,
  gives NaN, not an exception, so a table of groups can hold a gap.
* Invalid options (``level``, ``tau``, ``m``) and crossed interval bounds raise ``ValueError``
  with the bad value in the message: they are programming errors, not bad input files.
"""

from __future__ import annotations

import math
import operator

import numpy as np
import numpy.typing as npt

__all__ = [
    "errors",
    "absolute_percentage_errors",
    "symmetric_ape",
    "interval_hits",
    "interval_scores",
    "pinball_losses",
    "mase_scale",
    "rmsse_scale",
    "mae",
    "rmse",
    "mape",
    "smape",
    "wape",
    "mase",
    "rmsse",
    "bias",
    "bias_percent",
    "coverage",
    "mean_interval_score",
    "msis",
    "mean_pinball",
]

FloatArray = npt.NDArray[np.float64]
BoolArray = npt.NDArray[np.bool_]


# --- option checks and shared helpers -------------------------------------------------------


def _check_level(level: float) -> float:
    """Return alpha = 1 - level/100 for a nominal coverage ``level`` given in percent."""
    if np.ndim(level) != 0 or not 0.0 < float(level) < 100.0:
        raise ValueError(
            f"level must be a percentage strictly between 0 and 100 (80 for an 80% interval), "
            f"got {level!r}"
        )
    return 1.0 - float(level) / 100.0


def _check_tau(tau: float) -> float:
    if np.ndim(tau) != 0 or not 0.0 < float(tau) < 1.0:
        raise ValueError(
            f"tau must be a quantile level strictly between 0 and 1 (0.9, not 90), got {tau!r}"
        )
    return float(tau)


def _check_m(m: int) -> int:
    if isinstance(m, bool):
        raise ValueError(f"season length m must be an integer >= 1, got {m!r}")
    try:
        m_int = operator.index(m)
    except TypeError:
        raise ValueError(f"season length m must be an integer >= 1, got {m!r}") from None
    if m_int < 1:
        raise ValueError(f"season length m must be an integer >= 1, got {m!r}")
    return m_int


def _check_bounds(lower: FloatArray, upper: FloatArray) -> None:
    # A crossed interval would give a negative width and a negative interval score.
    lower, upper = np.broadcast_arrays(lower, upper)
    crossed = np.flatnonzero(lower > upper)
    if crossed.size:
        i = int(crossed[0])
        raise ValueError(
            f"lower bound above upper bound in {crossed.size} cell(s), first at flat index {i}: "
            f"lower={float(lower.flat[i])!r}, upper={float(upper.flat[i])!r}; "
            "fix or swap the bounds"
        )


def _floats(value: npt.ArrayLike) -> FloatArray:
    return np.asarray(value, dtype=float)


def _group(*values: npt.ArrayLike) -> list[FloatArray]:
    """Align a group's inputs as 1-D float arrays and drop cells with a NaN in any of them."""
    arrays = [_floats(v) for v in values]
    for a in arrays:
        if a.ndim > 1:
            raise ValueError(f"aggregates take 1-D arrays of cells, got shape {a.shape}")
    arrays = [np.atleast_1d(a) for a in np.broadcast_arrays(*arrays)]
    missing = np.logical_or.reduce([np.isnan(a) for a in arrays])
    return [a[~missing] for a in arrays]


def _mean(values: FloatArray) -> float:
    # np.mean of an empty array warns and returns NaN; an empty group is expected here.
    return float(np.mean(values)) if values.size else math.nan


def _has_scale(scale: FloatArray) -> BoolArray:
    return np.isfinite(scale) & (scale > 0)


def _naive_differences(history: npt.ArrayLike, m: int) -> FloatArray:
    """y_t - y_{t-m} for t = m+1..n, dropping pairs that touch a gap (NaN)."""
    m = _check_m(m)
    h = _floats(history)
    if h.ndim != 1:
        raise ValueError(f"history must be a 1-D array, got an array of shape {h.shape}")
    d = h[m:] - h[: max(h.size - m, 0)]
    return d[~np.isnan(d)]


# --- per-cell -------------------------------------------------------------------------------


def errors(y: npt.ArrayLike, f: npt.ArrayLike) -> FloatArray:
    """Forecast errors, actual minus forecast.

    Formula: e = y - f.

    Orientation: signed; zero is perfect. Sign convention: positive means the forecast was too
    low, negative too high. Reference: Hyndman & Koehler (2006), "Another look at measures of
    forecast accuracy", IJF 22(4), 679-688, doi:10.1016/j.ijforecast.2006.03.001.

    >>> errors([10, 5], [8, 7])
    array([ 2., -2.])
    """
    return _floats(y) - _floats(f)


def absolute_percentage_errors(y: npt.ArrayLike, f: npt.ArrayLike) -> FloatArray:
    """Absolute percentage errors, in percent.

    Formula: APE = 100 |e| / |y| with e = y - f; NaN where y == 0 (undefined).

    Orientation: lower is better, 0 is perfect. The absolute value removes the sign; an
    over-forecast can exceed 100, an under-forecast cannot. Reference: Hyndman & Koehler (2006),
    doi:10.1016/j.ijforecast.2006.03.001.

    >>> absolute_percentage_errors([100, 50, 0], [90, 60, 3])
    array([10., 20., nan])
    """
    y = _floats(y)
    with np.errstate(divide="ignore", invalid="ignore"):
        ape = 100.0 * np.abs(y - _floats(f)) / np.abs(y)
    return np.where(y == 0, np.nan, ape)


def symmetric_ape(y: npt.ArrayLike, f: npt.ArrayLike) -> FloatArray:
    """Symmetric absolute percentage errors (M3/M4 definition), in percent.

    Formula: sAPE = 200 |y - f| / (|y| + |f|); 0 where y == f == 0. Bounded by 0 and 200.

    Orientation: lower is better, 0 is perfect; symmetric in y and f, so the sign of the error
    does not matter. Reference: Makridakis & Hibon (2000), "The M3-Competition", IJF 16(4),
    451-476, doi:10.1016/S0169-2070(00)00057-1.

    >>> symmetric_ape([100, 0, 0], [50, 0, 5])
    array([ 66.66666667,   0.        , 200.        ])
    """
    y, f = _floats(y), _floats(f)
    denominator = np.abs(y) + np.abs(f)
    with np.errstate(divide="ignore", invalid="ignore"):
        sape = 200.0 * np.abs(y - f) / denominator
    return np.where(denominator == 0, 0.0, sape)


def interval_hits(y: npt.ArrayLike, lower: npt.ArrayLike, upper: npt.ArrayLike) -> BoolArray:
    """Whether each actual falls inside its closed prediction interval.

    Formula: hit = [lower <= y <= upper]. NaN in any input gives False.

    Orientation: a hit rate near the nominal level is best (see :func:`coverage`). Raises
    ValueError when lower > upper. Reference: Christoffersen (1998), "Evaluating interval
    forecasts", International Economic Review 39(4), 841-862 (the hit sequence).

    >>> interval_hits([5, 1, 9], [2, 2, 2], [8, 8, 9])
    array([ True, False,  True])
    """
    y, lower, upper = _floats(y), _floats(lower), _floats(upper)
    _check_bounds(lower, upper)
    return (lower <= y) & (y <= upper)


def interval_scores(
    y: npt.ArrayLike, lower: npt.ArrayLike, upper: npt.ArrayLike, *, level: float
) -> FloatArray:
    """Interval scores of central prediction intervals at nominal coverage ``level`` percent.

    .. math::
        IS_\\alpha(l, u; y) = (u - l) + \\frac{2}{\\alpha}(l - y)[y < l]
                              + \\frac{2}{\\alpha}(y - u)[y > u],
        \\quad \\alpha = 1 - \\text{level}/100

    Orientation: lower is better; never below the width u - l. A miss costs 2/alpha per unit of
    distance outside, whichever side it falls. ``level`` is in percent, strictly inside
    (0, 100). Reference: Gneiting & Raftery (2007), "Strictly proper scoring rules, prediction,
    and estimation", JASA 102(477), 359-378, eq. 43, doi:10.1198/016214506000001437.

    >>> interval_scores([5, 1, 12], [2, 2, 2], [8, 8, 8], level=80)
    array([ 6., 16., 46.])
    """
    alpha = _check_level(level)
    y, lower, upper = _floats(y), _floats(lower), _floats(upper)
    _check_bounds(lower, upper)
    below = np.maximum(lower - y, 0.0)
    above = np.maximum(y - upper, 0.0)
    return (upper - lower) + (2.0 / alpha) * (below + above)


def pinball_losses(y: npt.ArrayLike, q: npt.ArrayLike, *, tau: float) -> FloatArray:
    """Pinball (quantile) losses of a forecast ``q`` of the ``tau`` quantile.

    Formula: L_tau(q, y) = tau (y - q) if y >= q, else (1 - tau)(q - y);
    equivalently max(tau (y - q), (tau - 1)(y - q)).

    Orientation: lower is better, 0 when q == y, never negative. With e = y - q, an actual above
    the quantile (positive e) costs tau per unit, one below costs 1 - tau. ``tau`` is strictly
    inside (0, 1). Reference: Koenker & Bassett (1978), "Regression quantiles", Econometrica
    46(1), 33-50, doi:10.2307/1913643.

    >>> pinball_losses([10, 10], [8, 12], tau=0.9)
    array([1.8, 0.2])
    """
    tau = _check_tau(tau)
    e = _floats(y) - _floats(q)
    return np.maximum(tau * e, (tau - 1.0) * e)


# --- scales ---------------------------------------------------------------------------------


def mase_scale(history: npt.ArrayLike, *, m: int) -> float:
    """In-sample MAE of the seasonal naive forecast: the MASE scale q of a series.

    Formula: q = mean |y_t - y_{t-m}| over t = m+1..n (m = 1: the one-step naive forecast).

    Pairs with a NaN (a gap) are skipped; gaps are never filled. NaN when no pair remains (fewer
    than m + 1 values). q = 0 is returned as 0; :func:`mase` treats it as "no scale".
    Orientation: a scale, not a score. Reference: Hyndman & Koehler (2006), IJF 22(4), 679-688,
    doi:10.1016/j.ijforecast.2006.03.001.

    >>> mase_scale([10, 12, 11, 15], m=1)
    2.3333333333333335
    """
    return _mean(np.abs(_naive_differences(history, m)))


def rmsse_scale(history: npt.ArrayLike, *, m: int) -> float:
    """In-sample mean squared error of the seasonal naive forecast: the RMSSE scale q2.

    Formula: q2 = mean (y_t - y_{t-m})^2 over t = m+1..n.

    Gaps, short histories and q2 = 0 behave as in :func:`mase_scale`. Reference: Makridakis,
    Spiliotis & Assimakopoulos (2022), "M5 accuracy competition: results, findings, and
    conclusions", IJF 38(4), 1346-1364 (RMSSE; one-step naive there).

    >>> rmsse_scale([10, 12, 11, 15], m=1)
    7.0
    """
    return _mean(_naive_differences(history, m) ** 2)


# --- aggregates over a group of cells ----------------------------------------------------------


def mae(y: npt.ArrayLike, f: npt.ArrayLike) -> float:
    """Mean absolute error: mean |y - f|.

    Orientation: lower is better; in the units of y; sign-free. Cells with a NaN are skipped;
    NaN for an empty group. Reference: Hyndman & Koehler (2006).

    >>> mae([10, 5, 3], [8, 7, 3])
    1.3333333333333333
    """
    y, f = _group(y, f)
    return _mean(np.abs(y - f))


def rmse(y: npt.ArrayLike, f: npt.ArrayLike) -> float:
    """Root mean squared error: sqrt(mean (y - f)^2).

    Orientation: lower is better; in the units of y; sign-free; weighs large errors more than
    :func:`mae`. Cells with a NaN are skipped; NaN for an empty group. Reference: Hyndman &
    Koehler (2006).

    >>> rmse([10, 5, 3], [8, 7, 3])
    1.632993161855452
    """
    y, f = _group(y, f)
    return math.sqrt(_mean((y - f) ** 2))


def mape(y: npt.ArrayLike, f: npt.ArrayLike) -> float:
    """Mean absolute percentage error, in percent: mean 100 |y - f| / |y| over cells with y != 0.

    Zero actuals are excluded (the caller counts them: ``np.sum(y == 0)``); NaN cells are
    skipped; NaN when no cell remains. Orientation: lower is better; sign-free, but bounded
    below for under-forecasts only. Reference: Hyndman & Koehler (2006).

    >>> mape([100, 50, 0], [90, 60, 3])
    15.0
    """
    y, f = _group(y, f)
    keep = y != 0
    return _mean(absolute_percentage_errors(y[keep], f[keep]))


def smape(y: npt.ArrayLike, f: npt.ArrayLike) -> float:
    """Symmetric MAPE (M3/M4), in percent: mean 200 |y - f| / (|y| + |f|), 0 for y == f == 0.

    Orientation: lower is better; 0 to 200; sign-free. NaN cells are skipped; NaN for an empty
    group. Reference: Makridakis & Hibon (2000), doi:10.1016/S0169-2070(00)00057-1; Makridakis,
    Spiliotis & Assimakopoulos (2020), "The M4 Competition", IJF 36(1), 54-74.

    >>> round(smape([100, 0, 0], [50, 0, 5]), 4)
    88.8889
    """
    y, f = _group(y, f)
    return _mean(symmetric_ape(y, f))


def wape(y: npt.ArrayLike, f: npt.ArrayLike) -> float:
    """Weighted absolute percentage error, in percent: 100 sum |y - f| / sum |y|.

    Orientation: lower is better; sign-free; defined with zero actuals as long as not all are
    zero (NaN when sum |y| = 0, including an empty group). NaN cells are skipped. Reference:
    the MAD/mean ratio of Kolassa & Schütz (2007), Foresight 6, 40-43 (from memory).

    >>> wape([100, 50, 0], [90, 60, 3])
    15.333333333333334
    """
    y, f = _group(y, f)
    total = float(np.sum(np.abs(y)))
    return 100.0 * float(np.sum(np.abs(y - f))) / total if total > 0 else math.nan


def mase(y: npt.ArrayLike, f: npt.ArrayLike, *, scale: npt.ArrayLike) -> float:
    """Mean absolute scaled error: mean |y - f| / q.

    ``scale`` is q (see :func:`mase_scale`), one value for the group or one per cell. Cells
    without a finite positive q are skipped (they have no scale), as are NaN cells; NaN when no
    cell remains. Orientation: lower is better; below 1 beats the in-sample (seasonal) naive
    forecast's MAE; sign-free. Reference: Hyndman & Koehler (2006), IJF 22(4), 679-688,
    doi:10.1016/j.ijforecast.2006.03.001.

    >>> mase([10, 5, 3], [8, 7, 3], scale=2.0)
    0.6666666666666666
    """
    y, f, q = _group(y, f, scale)
    keep = _has_scale(q)
    return _mean(np.abs(y[keep] - f[keep]) / q[keep])


def rmsse(y: npt.ArrayLike, f: npt.ArrayLike, *, scale2: npt.ArrayLike) -> float:
    """Root mean squared scaled error: sqrt(mean (y - f)^2 / q2).

    ``scale2`` is q2 (see :func:`rmsse_scale`), per group or per cell; cells without a finite
    positive q2 are skipped, as are NaN cells; NaN when none remains. Orientation: lower is
    better; sign-free. Reference: Makridakis, Spiliotis & Assimakopoulos (2022), M5, IJF 38(4).

    >>> rmsse([10, 5, 3], [8, 7, 3], scale2=4.0)
    0.816496580927726
    """
    y, f, q2 = _group(y, f, scale2)
    keep = _has_scale(q2)
    return math.sqrt(_mean((y[keep] - f[keep]) ** 2 / q2[keep]))


def bias(y: npt.ArrayLike, f: npt.ArrayLike) -> float:
    """Mean error: mean (y - f).

    Orientation: closer to 0 is better. Sign convention: positive means forecasts were too low
    on average, negative too high. NaN cells are skipped; NaN for an empty group. Reference:
    Hyndman & Koehler (2006) (mean error).

    >>> bias([10, 5, 3], [8, 8, 3])
    -0.3333333333333333
    """
    y, f = _group(y, f)
    return _mean(y - f)


def bias_percent(y: npt.ArrayLike, f: npt.ArrayLike) -> float:
    """Bias as a percentage of the actuals' volume: 100 sum (y - f) / sum |y|.

    Orientation: closer to 0 is better. Sign convention: positive means forecasts too low,
    negative too high. NaN when sum |y| = 0 (including an empty group); NaN cells are skipped.
    Reference: common practice, no source (the signed counterpart of :func:`wape`).

    >>> bias_percent([100, 50, 0], [90, 60, 3])
    -2.0
    """
    y, f = _group(y, f)
    total = float(np.sum(np.abs(y)))
    return 100.0 * float(np.sum(y - f)) / total if total > 0 else math.nan


def coverage(y: npt.ArrayLike, lower: npt.ArrayLike, upper: npt.ArrayLike) -> float:
    """Empirical coverage: the share of cells with lower <= y <= upper, in [0, 1].

    Orientation: closest to the nominal level is best; too low means intervals too narrow, too
    high too wide. Cells with a NaN in y or a bound are skipped; NaN for an empty group. Raises
    ValueError when lower > upper. Reference: Christoffersen (1998), IER 39(4), 841-862.

    >>> coverage([5, 1, 9, 4], [2, 2, 2, 2], [8, 8, 9, 8])
    0.75
    """
    y, lower, upper = _group(y, lower, upper)
    return _mean(interval_hits(y, lower, upper).astype(float))


def mean_interval_score(
    y: npt.ArrayLike, lower: npt.ArrayLike, upper: npt.ArrayLike, *, level: float
) -> float:
    """Mean interval score (see :func:`interval_scores`), in the units of y.

    Orientation: lower is better. NaN cells are skipped; NaN for an empty group. Reference:
    Gneiting & Raftery (2007), JASA 102(477), eq. 43, doi:10.1198/016214506000001437.

    >>> mean_interval_score([5, 1, 12], [2, 2, 2], [8, 8, 8], level=80)
    22.666666666666668
    """
    y, lower, upper = _group(y, lower, upper)
    return _mean(interval_scores(y, lower, upper, level=level))


def msis(
    y: npt.ArrayLike,
    lower: npt.ArrayLike,
    upper: npt.ArrayLike,
    *,
    level: float,
    scale: npt.ArrayLike,
) -> float:
    """Mean scaled interval score: mean IS_alpha(l, u; y) / q.

    ``scale`` is the MASE scale q (see :func:`mase_scale`), per group or per cell; cells without
    a finite positive q are skipped, as are NaN cells; NaN when none remains. Orientation: lower
    is better. Reference: M4 competitor's guide (level 95, alpha = 0.05; from memory);
    Makridakis, Spiliotis & Assimakopoulos (2020), IJF 36(1), 54-74.

    >>> msis([5, 1, 12], [2, 2, 2], [8, 8, 8], level=80, scale=2.0)
    11.333333333333334
    """
    y, lower, upper, q = _group(y, lower, upper, scale)
    keep = _has_scale(q)
    scores = interval_scores(y[keep], lower[keep], upper[keep], level=level)
    return _mean(scores / q[keep])


def mean_pinball(y: npt.ArrayLike, q: npt.ArrayLike, *, tau: float) -> float:
    """Mean pinball loss of forecasts of the ``tau`` quantile (see :func:`pinball_losses`).

    Orientation: lower is better, 0 is perfect. NaN cells are skipped; NaN for an empty group.
    Reference: Koenker & Bassett (1978), doi:10.2307/1913643.

    >>> mean_pinball([10, 10], [8, 12], tau=0.9)
    1.0
    """
    y, q = _group(y, q)
    return _mean(pinball_losses(y, q, tau=tau))
