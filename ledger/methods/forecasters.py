"""Reference forecasting methods: point forecasts and normal prediction intervals.

Every method takes the history of one series up to and including the origin (``y``, oldest first,
no missing values) and returns arrays of length ``h`` keyed ``forecast``, ``lower_<L>`` and
``upper_<L>`` for each requested level L (percent, 0 < L < 100). Intervals are central:
``P(lower_L <= y <= upper_L) = L/100`` under the method's own error model. Rolling-origin
backtests over many series live in :mod:`ledger.methods.rolling`.

Methods (names used on the command line; runs are named ``ref-<name>``):

=========== ================================================================================
naive       last value; sigma_h = sigma * sqrt(h)                                        [1]
snaive      value one season earlier; sigma_h = sigma * sqrt(k + 1), k = floor((h-1)/m) [1]
drift       last value + h * (y_T - y_1)/(T - 1); sigma_h = sigma * sqrt(h (1 + h/(T-1)))[1]
mean        mean of the history; sigma_h = sigma * sqrt(1 + 1/T)                        [1]
ses         ETS(A,N,N), statsmodels ``ETSModel``; its own intervals
holt        ETS(A,A,N)
damped      ETS(A,Ad,N)
hw          ETS(A,A,A), additive Holt-Winters
hw-damped   ETS(A,Ad,A), damped additive Holt-Winters
theta       statsmodels ``ThetaModel`` (theta = 2) points; ETS(A,N,N) intervals (see _theta)
naive2      naive on seasonally adjusted data (M competitions)                       [2]
shd         equal-weight combination of ses, holt and damped (S-H-D)                    [2]
=========== ================================================================================

For the naive family sigma is the residual standard deviation of the book's equation (5.1),
sigma = sqrt(sum e_t^2 / (T - K - M)), with K estimated parameters and M residuals that cannot
be computed: naive K=0, M=1 (denominator T-1); snaive K=0, M=m (T-m); mean K=1, M=0 (T-1);
drift K=1, M=1 (T-2). The drift row uses T-1 as printed in the current online 3rd edition;
earlier printings (and the 2nd edition) show h/T.

References:
[1] Hyndman, R.J. & Athanasopoulos, G. *Forecasting: Principles and Practice*, 3rd ed.,
    section 5.5 "Distributional forecasts and prediction intervals", eq. (5.1) and Table 5.2.
[2] Makridakis, S. & Hibon, M. (2000) "The M3-Competition: results, conclusions and
    implications", *International Journal of Forecasting* 16(4), 451-476.
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Callable, Sequence
from functools import lru_cache

import numpy as np
from ..lazy import pandas as pd
from scipy.stats import norm
from statsmodels.tools.sm_exceptions import ConvergenceWarning, EstimationWarning
from statsmodels.tsa.exponential_smoothing.ets import ETSModel
from statsmodels.tsa.forecasting.theta import ThetaModel
from statsmodels.tsa.seasonal import seasonal_decompose

from ..errors import GapInHistory, MethodNotApplicable, NotEnoughData, UnknownName
from ..wording import format_level
from .names import METHODS, check_levels
from .quantile_output import add_quantiles, check_quantiles, levels_with_quantiles

__all__ = [
    "forecast",
    "LEVEL_DIGITS",
    "min_history",
    "seasonal_test",
    "seasonal_indices",
    "dominant_period",
    "seasonality_check",
    "season_length_note",
    "short_history_note",
]

Forecast = dict[str, np.ndarray]

#: Significant figures of a level in the bound columns a method returns (``lower_<L>``): more
#: than an input file's 6, so a level given with many decimals reaches the ledger intact.
LEVEL_DIGITS = 10


# ---------------------------------------------------------------------------------------------
# levels and normal bounds


@lru_cache(maxsize=64)
def _z(level: float) -> float:
    """Two-sided standard normal multiplier: Phi^-1(0.5 + L/200) (1.2816 for 80, 1.96 for 95)."""
    return float(norm.ppf(0.5 + level / 200.0))


def _normal_bounds(point: np.ndarray, sd: np.ndarray, levels: Sequence[float]) -> Forecast:
    out: Forecast = {"forecast": point}
    for level in levels:
        half = _z(level) * sd
        out[f"lower_{format_level(level, LEVEL_DIGITS)}"] = point - half
        out[f"upper_{format_level(level, LEVEL_DIGITS)}"] = point + half
    return out


def _rms(e: np.ndarray, dof: int) -> float:
    """sqrt(sum e^2 / dof): FPP3 eq. (5.1) with dof = T - K - M."""
    return math.sqrt(float(e @ e) / dof)


# ---------------------------------------------------------------------------------------------
# naive family (FPP3 section 5.5, Table 5.2)


def _naive(y: np.ndarray, h: int, m: int, levels: Sequence[float]) -> Forecast:
    steps = np.arange(1, h + 1, dtype=float)
    sigma = _rms(np.diff(y), y.size - 1)  # K = 0, M = 1
    return _normal_bounds(np.full(h, y[-1]), sigma * np.sqrt(steps), levels)


def _snaive(y: np.ndarray, h: int, m: int, levels: Sequence[float]) -> Forecast:
    j = np.arange(h)
    point = y[-m:][j % m]
    sigma = _rms(y[m:] - y[:-m], y.size - m)  # K = 0, M = m
    return _normal_bounds(point, sigma * np.sqrt(j // m + 1.0), levels)


def _drift(y: np.ndarray, h: int, m: int, levels: Sequence[float]) -> Forecast:
    T = y.size
    steps = np.arange(1, h + 1, dtype=float)
    slope = (y[-1] - y[0]) / (T - 1)
    sigma = _rms(np.diff(y) - slope, T - 2)  # K = 1, M = 1
    sd = sigma * np.sqrt(steps * (1.0 + steps / (T - 1)))
    return _normal_bounds(y[-1] + steps * slope, sd, levels)


def _mean(y: np.ndarray, h: int, m: int, levels: Sequence[float]) -> Forecast:
    T = y.size
    centre = float(y.mean())
    sigma = _rms(y - centre, T - 1)  # K = 1, M = 0
    return _normal_bounds(np.full(h, centre), np.full(h, sigma * math.sqrt(1.0 + 1.0 / T)), levels)


# ---------------------------------------------------------------------------------------------
# exponential smoothing (statsmodels ETSModel, additive errors)

_ETS_SPECS: dict[str, dict[str, object]] = {
    "ses": {},
    "holt": {"trend": "add"},
    "damped": {"trend": "add", "damped_trend": True},
    "hw": {"trend": "add", "seasonal": "add"},
    "hw-damped": {"trend": "add", "damped_trend": True, "seasonal": "add"},
}


def _ets(method: str, y: np.ndarray, h: int, m: int, levels: Sequence[float]) -> Forecast:
    spec = dict(_ETS_SPECS[method])
    if "seasonal" in spec:
        if m < 2:
            raise MethodNotApplicable(
                f"method {method} needs a season length m >= 2, got m={m}; "
                "use holt or damped for a non-seasonal series"
            )
        spec["seasonal_periods"] = m
    n = y.size
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        warnings.simplefilter("ignore", RuntimeWarning)
        fit = ETSModel(pd.Series(y), error="add", **spec).fit(disp=False)  # get_prediction needs an index
        if not levels:
            return _finite(method, {"forecast": np.asarray(fit.forecast(h), dtype=float)})
        pred = fit.get_prediction(start=n, end=n + h - 1)
        out: Forecast = {"forecast": np.asarray(pred.predicted_mean, dtype=float)}
        for level in levels:
            frame = pred.summary_frame(alpha=1.0 - level / 100.0)
            out[f"lower_{format_level(level, LEVEL_DIGITS)}"] = frame["pi_lower"].to_numpy(dtype=float)
            out[f"upper_{format_level(level, LEVEL_DIGITS)}"] = frame["pi_upper"].to_numpy(dtype=float)
    return _finite(method, out)


def _finite(method: str, out: Forecast) -> Forecast:
    for key, values in out.items():
        if not np.all(np.isfinite(values)):
            raise MethodNotApplicable(
                f"method {method} produced non-finite {key} values; the fit failed on this history"
            )
    return out


# ---------------------------------------------------------------------------------------------
# theta (statsmodels ThetaModel)


def _theta(y: np.ndarray, h: int, m: int, levels: Sequence[float]) -> Forecast:
    """statsmodels ThetaModel (theta = 2) points; ETS(A,N,N) intervals from its own SES fit.

    Points: statsmodels ``ThetaModel(y, period=m, deseasonalize=...)``'s method -- SES plus half
    the OLS trend slope b0 (Hyndman & Billah 2003), on the seasonally adjusted series x_t,
    reseasonalised by ThetaModel's indices s (multiplicative, or additive if an index is not
    positive). ThetaModel's seasonality test and decomposition are used as they are; b0 and the
    SES fit (see :func:`_ses_fit`) are computed here, then statsmodels' ``forecast_components``
    formula
        x_hat(h) = l_T + b0 / 2 * (h - 1 + 1/alpha - (1 - alpha)^T / alpha),
    skipping its pandas objects; tests check equality with ``fit.forecast``.

    Intervals (statsmodels' ``prediction_intervals`` is not used, see below): on the adjusted
    scale, x_hat(h) +- z_L * sigma * sqrt(1 + (h - 1) alpha^2), the h-step variance of ETS(A,N,N)
    (Hyndman, Koehler, Ord & Snyder 2008, *Forecasting with Exponential Smoothing*, Table 6.1,
    class 1; from memory), with alpha the fit's SES smoothing parameter. sigma^2 is the mean
    squared in-sample one-step SES error e_t = x_t - l_{t-1} (l_0 = x_1, as ThetaModel starts
    its SES at the first value), divided as FPP3 eq. (5.1): sum_{t=2}^{T} e_t^2 / (T - 2), K = 1
    (alpha) and M = 1 (e_1 = 0 by construction). Both bounds are then reseasonalised exactly
    like the points (times s_{T+h}, or plus s_{T+h} when additive); the indices are treated as
    known and the drift b0 as fixed, so the spread is that of the SES component alone.

    Why not statsmodels' own intervals: they take sigma^2 from a second model, an ARIMA(0,1,1)
    with drift fitted to the *unadjusted* history, which costs 20-150 ms per fit against ~7-11 ms
    for the points; for seasonal series that sigma includes the seasonal swings; and their
    variance term 1 + (h-1)(1 + (alpha-1)^2) is doubtful: the ARIMA(0,1,1) form of SES, with
    MA coefficient theta = alpha - 1, has 1 + (h-1)(1 + theta)^2 = 1 + (h-1) alpha^2 (the
    same ETS(A,N,N) term), so the two agree at alpha = 1 but statsmodels' grows like 2h as
    alpha -> 0, where SES's spread should stay flat. No second fit is made here.
    """
    if np.ptp(y) == 0.0:
        # ThetaModel returns a spurious trend on a constant history; the only sensible
        # forecast of a series that never moved is that value, with no spread.
        return _normal_bounds(np.full(h, y[-1]), np.zeros(h), levels)
    # Seasonal adjustment is considered only with three full seasons, as for naive2;
    # ThetaModel then applies its own 90% autocorrelation test at lag m.
    seasonal = m > 1 and y.size >= 3 * m
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        warnings.simplefilter("ignore", RuntimeWarning)
        warnings.simplefilter("ignore", EstimationWarning)
        model = ThetaModel(y, period=m, deseasonalize=seasonal)
        # ThetaModel's own seasonality test and decomposition (private methods of statsmodels
        # 0.15; tests compare the points with ThetaModel.fit().forecast(), so a change fails loudly).
        if model._deseasonalize and model._use_test:
            model._test_seasonality()
        x, index = model._deseasonalize_data()
    x = np.asarray(x, dtype=float)
    index, multiplicative = np.asarray(index, dtype=float), model.method.startswith("mul")
    trend = np.column_stack([np.ones(x.size), np.arange(x.size, dtype=float)])
    b0 = float(np.linalg.lstsq(trend, x, rcond=None)[0][1])
    alpha, level = _ses_fit(x)
    steps = np.arange(h, dtype=float)
    if alpha > 0.0:
        steps += 1.0 / alpha - (1.0 - alpha) ** y.size / alpha
    centre = level + 0.5 * b0 * steps
    if index.size:
        at = index[np.arange(y.size) % m]
        adjusted = y / at if multiplicative else y - at
        future = index[(y.size + np.arange(h)) % m]
    else:  # not seasonal (or the test said no): identity reseasonalisation
        adjusted, future, multiplicative = y, np.ones(h), True
    if not levels:
        return _finite("theta", {"forecast": centre * future if multiplicative else centre + future})
    sd = _ses_sigma(adjusted, alpha) * np.sqrt(1.0 + np.arange(h) * alpha**2)
    base = _normal_bounds(centre, sd, levels)
    if multiplicative:
        return _finite("theta", {key: values * future for key, values in base.items()})
    return _finite("theta", {key: values + future for key, values in base.items()})


def _ses_fit(x: np.ndarray) -> tuple[float, float]:
    """SES smoothing parameter and final level, as ThetaModel fits them, without its optimiser.

    ThetaModel fits SES with the initial level known (l_0 = x_1) by maximum likelihood; with
    Gaussian errors of one variance that is the alpha minimising sum_t (x_t - l_{t-1})^2.
    A bounded scalar search over alpha in [1e-4, 0.9999] finds it (the recursion runs as a
    linear filter); it agrees with statsmodels' L-BFGS fit to about 1e-5 in alpha, at a tenth
    of the cost, and the Theta points to about 1e-6 (tested).
    """
    from scipy import optimize, signal

    def levels(a: float) -> np.ndarray:
        return signal.lfilter([a], [1.0, a - 1.0], x, zi=[(1.0 - a) * x[0]])[0]

    def sse(a: float) -> float:
        e = x[1:] - levels(a)[:-1]
        return float(e @ e)

    best = optimize.minimize_scalar(sse, bounds=(1e-4, 0.9999), method="bounded", options={"xatol": 1e-8})
    alpha = float(best.x)
    return alpha, float(levels(alpha)[-1])


def _ses_sigma(x: np.ndarray, alpha: float) -> float:
    """sqrt(sum_{t=2}^T e_t^2 / (T - 2)), e_t = x_t - l_{t-1}, l_t = l_{t-1} + alpha e_t, l_0 = x_1."""
    errors = np.empty(x.size - 1)
    level = x[0]
    for t in range(1, x.size):  # T <= a few hundred: a plain loop beats scipy.signal setup
        error = x[t] - level
        errors[t - 1] = error
        level += alpha * error
    return _rms(errors, x.size - 2)


# ---------------------------------------------------------------------------------------------
# Naive2 (M competitions)


def _acf(y: np.ndarray, nlags: int) -> np.ndarray:
    """Sample autocorrelations r_0..r_nlags (mean removed, divisor n: the biased estimator)."""
    x = y - y.mean()
    denom = float(x @ x)
    if denom == 0.0:
        return np.zeros(nlags + 1)
    return np.array([1.0] + [float(x[k:] @ x[:-k]) / denom for k in range(1, nlags + 1)])


def seasonal_test(y: np.ndarray, m: int, *, z: float = 1.645) -> bool:
    """90% autocorrelation test for seasonality at lag m, as used for Naive2 in M3 and M4.

    Seasonal when |r_m| > z * sqrt((1 + 2 * sum_{k=1}^{m-1} r_k^2) / n) (Bartlett's standard
    error of r_m under an MA(m-1) null), z = 1.645. Needs m >= 2 and n >= 3m; otherwise False.
    Reference: Makridakis, Wheelwright & Hyndman (1998) *Forecasting: Methods and
    Applications*, 3rd ed., ch. 3 (from memory); M4 competitor's guide benchmark code (from memory).
    """
    y = np.asarray(y, dtype=float)
    if m < 2 or y.size < 3 * m:
        return False
    r = _acf(y, m)
    limit = z * math.sqrt((1.0 + 2.0 * float(r[1:m] @ r[1:m])) / y.size)
    return abs(r[m]) > limit


def seasonal_indices(y: np.ndarray, m: int) -> np.ndarray:
    """Multiplicative seasonal indices for positions 0..m-1 counted from the first value.

    Classical multiplicative decomposition (centred moving average of order m, 2xm for even m;
    statsmodels ``seasonal_decompose``; indices averaged per position and normalised to mean 1),
    applied only when :func:`seasonal_test` is significant; all ones otherwise.
    """
    y = np.asarray(y, dtype=float)
    if not seasonal_test(y, m):
        return np.ones(max(m, 1))
    if y.min() <= 0.0:
        raise MethodNotApplicable(
            f"method naive2 needs positive values for its multiplicative seasonal adjustment, "
            f"got a minimum of {y.min():g}; use snaive or naive for this series"
        )
    return np.asarray(seasonal_decompose(y, model="multiplicative", period=m).seasonal[:m])


def _naive2(y: np.ndarray, h: int, m: int, levels: Sequence[float]) -> Forecast:
    index = seasonal_indices(y, m)
    width = index.size
    adjusted = y / index[np.arange(y.size) % width]
    # Intervals: naive intervals on the adjusted scale, re-seasonalised with the same indices
    # (the indices are treated as known, so coverage carries over).
    base = _naive(adjusted, h, 1, levels)
    future = index[(y.size + np.arange(h)) % width]
    return {key: values * future for key, values in base.items()}


# ---------------------------------------------------------------------------------------------
# S-H-D combination


def _shd(y: np.ndarray, h: int, m: int, levels: Sequence[float]) -> Forecast:
    """Equal-weight mean of ses, holt and damped, points and bounds alike.

    Averaging the members' bounds is an approximation, not a proper combined distribution:
    it equals the combination's quantiles only if the three members' errors were perfectly
    correlated; with less than perfect correlation the true combined interval is narrower.
    """
    members = [_ets(name, y, h, m, levels) for name in ("ses", "holt", "damped")]
    return {key: np.mean([f[key] for f in members], axis=0) for key in members[0]}


# ---------------------------------------------------------------------------------------------
# public entry point

_DISPATCH: dict[str, Callable[[np.ndarray, int, int, Sequence[float]], Forecast]] = {
    "naive": _naive,
    "snaive": _snaive,
    "drift": _drift,
    "mean": _mean,
    "theta": _theta,
    "naive2": _naive2,
    "shd": _shd,
    **{name: (lambda y, h, m, lv, _n=name: _ets(_n, y, h, m, lv)) for name in _ETS_SPECS},
}

# Free parameters of each ETS form (smoothing, damping, initial states); m-1 initial seasonals
# are added for the seasonal forms. The "+ 2" below leaves residual degrees of freedom for
# sigma: project choice, no source.
_ETS_PARAMS = {"ses": 2, "holt": 4, "damped": 5, "shd": 5, "hw": 5, "hw-damped": 6}


def min_history(method: str, m: int) -> int:
    """Fewest history values ``method`` accepts with season length m.

    naive, mean 2; snaive m+1; drift 3; theta, naive2 4; ses 4, holt 6, damped and shd 7;
    hw and hw-damped max(2m + 2, parameters + 2), because statsmodels needs two full seasons
    to initialise the seasonal states.
    """
    _check_method(method)
    fixed = {"naive": 2, "mean": 2, "drift": 3, "theta": 4, "naive2": 4, "snaive": m + 1}
    if method in fixed:
        return fixed[method]
    params = _ETS_PARAMS[method]
    if method in ("hw", "hw-damped"):
        return max(2 * m + 2, params + m - 1 + 2)
    return params + 2


def _check_method(method: str) -> None:
    if method not in METHODS:
        raise UnknownName(f"unknown reference method {method!r}; choose one of {', '.join(METHODS)}")


def forecast(
    y: np.ndarray, *, method: str, h: int, m: int, levels: Sequence[float] = (80, 95),
    quantiles: Sequence[float] = (),
) -> Forecast:
    """Forecast ``h`` periods after the last value of ``y`` with a reference method.

    ``y`` is the history up to and including the origin (1-D, oldest first, no NaN); ``m`` the
    season length (1 for non-seasonal). Returns ``forecast`` and, for each level L,
    ``lower_<L>`` / ``upper_<L>`` (see :func:`format_level`), each an array of length h, and
    for each quantile level tau in ``quantiles`` a column ``q<NN>`` from the same predictive
    distribution (:mod:`ledger.methods.quantile_output`).
    Raises :class:`GapInHistory` (a ValueError) if y has NaN, ``NotEnoughData`` if y is shorter
    than :func:`min_history`, :class:`MethodNotApplicable` when the method cannot apply.
    """
    _check_method(method)
    if int(h) != h or h < 1 or int(m) != m or m < 1:
        raise UnknownName(f"method {method}: horizon h={h} and season length m={m} must be integers >= 1")
    h, m = int(h), int(m)
    values = np.asarray(y, dtype=float)
    if values.ndim != 1:
        raise MethodNotApplicable(f"method {method} needs a 1-D history, got shape {values.shape}")
    if np.isnan(values).any():
        where = np.flatnonzero(np.isnan(values))[:5].tolist()
        raise GapInHistory(
            f"method {method}: history has missing values at positions {where}; "
            "fill them explicitly or skip this origin"
        )
    need = min_history(method, m)
    if values.size < need:
        raise NotEnoughData(
            f"method {method} needs at least {need} history values with m={m}, got n={values.size}; "
            "use a later origin or a simpler method"
        )
    levels = check_levels(levels)
    if not quantiles:
        return _DISPATCH[method](values, h, m, levels)
    taus = check_quantiles(quantiles)
    out = _DISPATCH[method](values, h, m, levels_with_quantiles(levels, taus))
    return add_quantiles(out, levels, taus, lambda level: format_level(level, LEVEL_DIGITS))


# ---------------------------------------------------------------------------------------------
# seasonality check


def _detrend(y: np.ndarray) -> np.ndarray:
    t = np.arange(y.size, dtype=float)
    slope, intercept = np.polyfit(t, y, 1)
    return y - (intercept + slope * t)


def dominant_period(y: np.ndarray, *, max_lag: int | None = None) -> tuple[int, float] | None:
    """The data's dominant period from the autocorrelations of the linearly detrended series.

    A peak is a local maximum r_p (lag p >= 2) that rises at least 0.2 above the lowest r_k,
    k < p (so a slowly decaying autocorrelation has no peaks; project choice, no source).
    The series counts as periodic when at least one peak exceeds
    z * sqrt((1 + 2 sum_{k<p} r_k^2) / n) (Bartlett's (1946) standard error), with z set by a
    Bonferroni correction over the lags examined (family-wise 1%), so that white noise and
    random walks rarely produce a period. The period is then the highest peak, reduced
    to its shortest divisor lag that is also a peak with at least 0.9 of its
    autocorrelation (a series that repeats every 4 periods also repeats every 12; its period
    is 4). The 0.9 ratio is a project choice, no source. Lags examined: 2..min(n//2, max_lag).
    Returns (p, r_p) or None when no lag qualifies.
    """
    y = np.asarray(y, dtype=float)
    K = min(y.size // 2, max_lag if max_lag is not None else 24)
    if K < 2 or np.ptp(y) == 0.0:
        return None
    r = _acf(_detrend(y), K)
    z = float(norm.ppf(1.0 - 0.01 / (2 * (K - 1))))
    cum = np.concatenate([[0.0], np.cumsum(r[1:] ** 2)])  # cum[p-1] = sum_{k<p} r_k^2
    peaks = [
        p for p in range(2, K + 1)
        if r[p] >= r[p - 1] and (p == K or r[p] >= r[p + 1]) and r[p] - r[1:p].min() >= 0.2
    ]
    if not peaks:
        return None
    if not any(r[p] > z * math.sqrt((1.0 + 2.0 * cum[p - 1]) / y.size) for p in peaks):
        return None
    best = max(peaks, key=lambda p: r[p])
    period = min(p for p in peaks if best % p == 0 and r[p] >= 0.9 * r[best])
    return period, float(r[period])


def short_history_note(n: int, m: int) -> str | None:
    """A note when n values are fewer than three seasons of length m > 1 (common practice, no source)."""
    if m > 1 and n < 3 * m:
        return (
            f"history has {n:,} values, fewer than three seasons ({3 * m:,} for m = {m}); "
            "seasonal estimates are unreliable and the season length was not checked"
        )
    return None


def season_length_note(y: np.ndarray, m: int) -> str | None:
    """A note when :func:`dominant_period` of y disagrees with the declared season length m."""
    found = dominant_period(y, max_lag=max(2 * m, 24))
    if found is None:
        return None
    period, r = found
    if period == m or (m >= 24 and abs(period - m) <= 1):
        return None
    declared = f"the declared season length is m = {m}" + (" (non-seasonal)" if m == 1 else "")
    return (
        f"the detrended history repeats every {period} periods (autocorrelation {r:.2f} at "
        f"lag {period}), but {declared}; check the frequency or override m for this series"
    )


def seasonality_check(y: np.ndarray, *, m: int) -> list[str]:
    """Data-quality notes on the season length: too short a history, or a disagreeing period.

    A history shorter than three seasons (3m values, common practice, no source) gets a note and
    is not checked further; otherwise :func:`dominant_period` is compared with m. Returns plain
    sentences (empty when all is well); the caller adds the series and origin. With NaN in y,
    only the stretch after the last NaN (evenly spaced) is checked.
    """
    values = np.asarray(y, dtype=float)
    gaps = np.flatnonzero(np.isnan(values))
    if gaps.size:
        # Only the stretch after the last gap is evenly spaced; it alone is checked.
        values = values[gaps[-1] + 1 :]
    short = short_history_note(values.size, m)
    if short is not None:
        return [short]
    note = season_length_note(values, m)
    return [] if note is None else [note]
