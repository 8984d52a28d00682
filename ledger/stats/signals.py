"""Drift signals: tracking signal, Trigg's smoothed signal, CUSUMs and the drift test; pure functions.

Interval calibration tests live in :mod:`ledger.stats.intervals`, demand statistics in
:mod:`ledger.stats.demand`.

Sign convention of the whole project: error e = actual - forecast, so a positive error means the
forecast was too low. Nothing here reads the ledger; the scoring layer supplies the arrays, one
series x model x horizon sequence ordered by target period, and turns results into findings.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

import numpy as np

from ..errors import InputError, UnknownName
from .arrays import positive_int, vector

__all__ = [
    "CusumSide",
    "BiasCentre",
    "AbsTransform",
    "Cusum",
    "DriftResult",
    "DRIFT_H",
    "TS_LIMIT",
    "reference_length",
    "tracking_window",
    "tracking_signal",
    "tracking_signal_path",
    "trigg_signal",
    "cusum_path",
    "cusum",
    "drift_test",
]

CusumSide = Literal["two-sided", "upper", "lower"]
BiasCentre = Literal["zero", "reference"]
AbsTransform = Literal["sqrt", "none"]

#: Decision interval of the drift CUSUMs, in reference standard deviations. Wider than the
#: textbook 4 or 5 because sd and level come from a short reference window, which shortens the
#: in-control run length; 5.5 keeps honest series (36 iid normal errors, 24-cell reference, both
#: CUSUMs) flagged about 3-4% of the time (measured in tests/test_checks.py; h = 5 gave ~5%).
DRIFT_H = 5.5
#: Planners' limit for the tracking signal: common practice, no source. Shown, never a finding.
TS_LIMIT = 4.0
_SIDES = ("two-sided", "upper", "lower")
_CENTRES = ("zero", "reference")
_TRANSFORMS = ("sqrt", "none")


def reference_length(season_length: int) -> int:
    """Default reference window: the first two seasons of scored cells, at least 8 (common practice, no source)."""
    return max(2 * positive_int(season_length, "season_length", "reference_length"), 8)


def tracking_window(season_length: int) -> int:
    """Default tracking-signal window: one season, at least 6 cells (common practice, no source)."""
    return max(positive_int(season_length, "season_length", "tracking_window"), 6)


def tracking_signal_path(e, *, window: int) -> np.ndarray:
    """Tracking signal after every cell, along the last axis (see :func:`tracking_signal`).

    Entry t uses the errors e[max(0, t - window + 1) .. t], so the first window - 1 entries use
    the shorter history available; entries with fewer than 2 errors or mean |e| = 0 are NaN.
    """
    e = np.asarray(e, dtype=float)
    window = positive_int(window, "window", "tracking_signal_path")
    zero = np.zeros(e.shape[:-1] + (1,))
    total = np.concatenate([zero, np.cumsum(e, axis=-1)], axis=-1)
    absolute = np.concatenate([zero, np.cumsum(np.abs(e), axis=-1)], axis=-1)
    t = np.arange(1, e.shape[-1] + 1)
    lo = np.maximum(t - window, 0)
    count = t - lo
    sum_e = total[..., t] - total[..., lo]
    sum_abs = absolute[..., t] - absolute[..., lo]
    ok = (count >= 2) & (sum_abs > 0)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(ok, sum_e * count / sum_abs, np.nan)


def tracking_signal(e, *, window: int) -> float:
    """Tracking signal of the last ``window`` errors.

    Formula: with the last w = min(window, n) errors, TS = sum(e) / mean(|e|); |TS| <= w.
    Returns a float, NaN when fewer than 2 errors or mean |e| = 0.
    Orientation: 0 means unbiased; positive means forecasts too low (e = actual - forecast),
    negative too high. Planners use the limit +-4 (:data:`TS_LIMIT`; common practice, no source);
    it is shown, not used for findings, because its false-alarm rate is unknown and high.
    Reference: Brown, R.G. (1959) *Statistical Forecasting for Inventory Control* (from memory);
    Trigg, D.W. (1964) "Monitoring a forecasting system", *Operational Research Quarterly* 15.
    """
    e = vector(e, "e", "tracking_signal")
    if e.size == 0:
        return float("nan")
    return float(tracking_signal_path(e, window=window)[-1])


def trigg_signal(e, *, alpha: float = 0.1, init: int = 6) -> np.ndarray:
    """Trigg's smoothed tracking signal after every cell, along the last axis.

    Formula: E_t = a*e_t + (1-a)*E_{t-1}, M_t = a*|e_t| + (1-a)*M_{t-1}, T_t = E_t / M_t, with
    a = ``alpha`` (usual 0.1, from memory). Initialisation: E_0 = 0 (no bias assumed) and M_0 =
    mean |e| of the first min(n, ``init``) errors, an initial MAD. M_0 = 0 would force |T_1| = 1
    (a spurious full-scale alarm at the first cell) and M_0 = |e_1| rests on one draw; a short
    mean is what a planner would start from. It looks ahead at most init - 1 cells, which a
    retrospective ledger can afford.
    Returns an array shaped like e; T is in [-1, 1], NaN where M_t = 0.
    Orientation: 0 unbiased; positive means forecasts too low, negative too high. Under white
    noise and a = 0.1 the 95% quantile of |T| is about 0.54 (computed by simulation).
    Reference: Trigg, D.W. (1964) "Monitoring a forecasting system", *Operational Research
    Quarterly* 15, 271-274.
    """
    e = np.asarray(e, dtype=float)
    if not 0.0 < alpha <= 1.0:
        raise InputError("trigg_signal", f"alpha = {alpha!r} is outside (0, 1]; the usual value is 0.1")
    init = positive_int(init, "init", "trigg_signal")
    if e.shape[-1] == 0:
        return e.copy()
    m0 = np.mean(np.abs(e[..., :init]), axis=-1, keepdims=True)
    b, a = [alpha], [1.0, alpha - 1.0]
    from scipy import signal  # imported here: scipy.signal costs a second at start-up for every command

    smoothed = signal.lfilter(b, a, e, axis=-1, zi=np.zeros_like(m0))[0]
    mad = signal.lfilter(b, a, np.abs(e), axis=-1, zi=(1.0 - alpha) * m0)[0]
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(mad > 0, smoothed / mad, np.nan)


@dataclass(frozen=True)
class Cusum:
    """A tabular CUSUM: both statistics, and where the monitored side(s) first crossed h.

    ``upper`` is C+ (detects upward shifts of z), ``lower`` is C- (stored as a positive number,
    detects downward shifts). Alarm indices are positions in z; a start is the cell after the
    last one where the alarmed statistic was 0 (0 if it never was), Montgomery's estimate of when
    the shift began. Both statistics are always computed; ``side`` says which ones may alarm.
    """

    upper: np.ndarray
    lower: np.ndarray
    k: float
    h: float
    side: CusumSide
    upper_alarm: int | None
    lower_alarm: int | None
    upper_start: int | None
    lower_start: int | None

    @property
    def alarm(self) -> int | None:
        """The first alarm of either monitored side, or None."""
        found = [a for a in (self.upper_alarm, self.lower_alarm) if a is not None]
        return min(found) if found else None

    @property
    def start(self) -> int | None:
        """Estimated start of the shift behind :attr:`alarm`, or None."""
        if self.alarm is None:
            return None
        return self.upper_start if self.alarm == self.upper_alarm else self.lower_start


def cusum_path(z, *, k: float = 0.5, start_upper=0.0, start_lower=0.0) -> tuple[np.ndarray, np.ndarray]:
    """The two tabular CUSUM statistics along the last axis of z (vectorised over leading axes).

    Formula: C+_t = max(0, C+_{t-1} + z_t - k), C-_t = max(0, C-_{t-1} - z_t - k), computed in
    closed form as S_t - min(-C_0, min_{j<=t} S_j) with S the cumulative sum of the increments.
    ``start_upper`` / ``start_lower`` are C_0 (scalars or arrays over the leading axes), so a
    long path can be computed in pieces. A NaN z carries no evidence: both statistics keep their
    previous value. Returns (C+, C-), each shaped like z.
    """
    z = np.asarray(z, dtype=float)
    if k < 0:
        raise InputError("cusum_path", f"k = {k!r} must be >= 0; the usual value is 0.5")
    paths = []
    for sign, c0 in ((1.0, start_upper), (-1.0, start_lower)):
        step = np.where(np.isnan(z), 0.0, sign * z - k)
        total = np.cumsum(step, axis=-1)
        floor = np.minimum(-np.asarray(c0, dtype=float)[..., None], np.minimum.accumulate(total, axis=-1))
        paths.append(total - floor)
    return paths[0], paths[1]


def _first_alarm(stat: np.ndarray, h: float) -> tuple[int | None, int | None]:
    above = np.flatnonzero(stat > h)
    if above.size == 0:
        return None, None
    alarm = int(above[0])
    zeros = np.flatnonzero(stat[:alarm] == 0)
    return alarm, int(zeros[-1]) + 1 if zeros.size else 0


def cusum(z, *, k: float = 0.5, h: float = 4.0, side: CusumSide = "two-sided") -> Cusum:
    """Tabular CUSUM on standardised values z (mean 0, sd 1 when in control).

    Formula: C+_t = max(0, C+_{t-1} + z_t - k), C-_t = max(0, C-_{t-1} - z_t - k), C_0 = 0; an
    alarm when C > h. k = 0.5 is tuned to a shift of one standard deviation; h = 4 or 5 gives an
    in-control average run length of about 168 or 465 for the two-sided scheme (Montgomery, from
    memory; measured in the tests). ``side`` = "upper" or "lower" gives a one-sided scheme
    (e.g. for deterioration of absolute errors, where only an increase matters).
    Returns a :class:`Cusum`. Orientation: larger C+ means z drifted up, larger C- down.
    NaN values of z leave both statistics unchanged.
    Reference: Page, E.S. (1954) "Continuous inspection schemes", *Biometrika* 41, 100-115;
    Montgomery, D.C. *Introduction to Statistical Quality Control*, chapter on the CUSUM chart.
    """
    z = vector(z, "z", "cusum", allow_nan=True)
    if side not in _SIDES:
        raise UnknownName(f"cusum: side {side!r} is unknown; use one of {', '.join(_SIDES)}")
    if h <= 0:
        raise InputError("cusum", f"h = {h!r} must be > 0; the usual values are 4 or 5")
    upper, lower = cusum_path(z, k=k)
    ua, us = _first_alarm(upper, h) if side != "lower" else (None, None)
    la, ls = _first_alarm(lower, h) if side != "upper" else (None, None)
    return Cusum(upper, lower, float(k), float(h), side, ua, la, us, ls)


@dataclass(frozen=True)
class DriftResult:
    """Outcome of :func:`drift_test` for one series x model x horizon sequence.

    Indices are positions in the input sequence (0-based, ordered by target period). ``bias`` and
    ``deterioration`` hold the CUSUM paths over the whole sequence (0 inside the reference window).
    ``mase_reference`` / ``mase_recent`` are mean scaled |e| within and after the reference window.
    """

    n: int
    reference: int
    note: str
    bias_alarm: int | None
    bias_start: int | None
    bias_direction: Literal["forecasts too low", "forecasts too high"] | None
    deterioration_alarm: int | None
    deterioration_start: int | None
    mase_reference: float
    mase_recent: float
    tracking_signal: float
    trigg_signal: float
    sigma: float
    sigma_floored: bool
    bias: Cusum | None
    deterioration: Cusum | None

    @property
    def biased(self) -> bool:
        """True when the bias CUSUM alarmed."""
        return self.bias_alarm is not None

    @property
    def deteriorated(self) -> bool:
        """True when the deterioration CUSUM alarmed."""
        return self.deterioration_alarm is not None

    @property
    def flagged(self) -> bool:
        """True when either CUSUM alarmed."""
        return self.biased or self.deteriorated

    @property
    def mase_ratio(self) -> float:
        """Recent MASE over reference MASE; above 1 means accuracy got worse."""
        if not self.mase_reference > 0:
            return float("nan")
        return self.mase_recent / self.mase_reference


def _nanmean(x: np.ndarray) -> float:
    x = x[~np.isnan(x)]
    return float(x.mean()) if x.size else float("nan")


def _lag1(ref: np.ndarray) -> float:
    """Lag-1 autocorrelation of the reference values, clipped to [0, 0.9] (0 when undefined)."""
    if ref.size < 4:
        return 0.0
    d = ref - ref.mean()
    den = float(np.dot(d, d))
    return float(np.clip(np.dot(d[1:], d[:-1]) / den, 0.0, 0.9)) if den > 0 else 0.0


def _standardise(x: np.ndarray, reference: int, floor: float, centre: bool,
                 autocorrelation: bool = False) -> tuple[np.ndarray | None, float, bool]:
    """(x - c) / sd_ref, NaN inside the window; c = mean_ref or 0; sd_ref floored at floor * mean|x_ref|.

    With ``autocorrelation``, sd_ref is inflated by sqrt((1 + r)/(1 − r)), r the reference
    window's lag-1 autocorrelation (clipped to [0, 0.9]): the long-run spread of an AR(1)
    sequence, whose running sums wander further than independent errors' do (the variance of
    a mean of AR(1) values; Box & Jenkins, from memory). Honest one-step errors have r near 0,
    so the adjustment leaves them alone; persistent errors (multi-step horizons, a wandering
    level) would otherwise raise alarms far more often than the stated run lengths."""
    ref = x[:reference][~np.isnan(x[:reference])]
    if ref.size < 2:
        return None, float("nan"), False
    sd, scale = float(ref.std(ddof=1)), float(np.abs(ref).mean())
    if autocorrelation:
        r = _lag1(ref)
        sd *= float(np.sqrt((1 + r) / (1 - r)))
    sigma = max(sd, floor * scale)
    if not sigma > 0:
        return None, float("nan"), False
    z = (x - (ref.mean() if centre else 0.0)) / sigma
    z[:reference] = np.nan
    return z, sigma, sigma > sd


def drift_test(
    e,
    scaled_abs,
    *,
    reference: int,
    k: float = 0.5,
    h: float = DRIFT_H,
    window: int = 12,
    alpha: float = 0.1,
    sigma_floor: float = 0.05,
    bias_centre: BiasCentre = "zero",
    transform: AbsTransform = "sqrt",
    autocorrelation: bool = True,
) -> DriftResult:
    """Bias and deterioration CUSUMs for one error sequence, against its own reference window.

    The first ``reference`` cells (default rule :func:`reference_length`: two seasons, at least
    8) estimate the in-control spread (and level); only later cells are monitored (phase II).
    Bias: z_t = (e_t - c) / sd_ref(e), two-sided CUSUM. By default c = 0, the target of an
    unbiased forecast, so a model biased from the start is caught too; ``bias_centre=
    "reference"`` uses c = mean_ref(e) and detects only a change of bias. An upper alarm means
    forecasts too low (e = actual - forecast > 0), a lower alarm forecasts too high.
    Deterioration: u_t = (g(s_t) - mean_ref(g(s))) / sd_ref(g(s)) on scaled absolute errors
    s = |e|/q, upper CUSUM only; g = sqrt by default (``transform="none"``: g(s) = s), because
    |e| is skewed and its plain CUSUM false-alarms about twice as often (Hawkins's scale CUSUM
    uses the same square-root idea; from memory). Both CUSUMs use k and h in reference standard
    deviations (defaults 0.5 and :data:`DRIFT_H`).
    Guard: sd_ref is floored at ``sigma_floor`` (5%) of the reference mean |value|, so near-constant
    reference errors do not make every later wobble an alarm; honest normal errors have
    sd ~ 1.25 mean|e|, far above the floor. A reference of all-zero values (or fewer than two)
    cannot be standardised: that test is skipped and ``note`` says so.
    ``autocorrelation`` (default on) widens both reference spreads by the reference window's
    lag-1 autocorrelation (see :func:`_standardise`), so persistent but stable errors are not
    read as drift.
    Also returned: tracking signal over the last ``window`` cells and Trigg's signal at the end
    (shown to planners, not used to alarm), and reference vs recent MASE (mean s, untransformed).
    NaN scaled errors (cells without a scale) are allowed and carry no evidence; e must be complete.
    Returns a :class:`DriftResult`.
    Reference: Page (1954) "Continuous inspection schemes"; Montgomery, *Introduction to
    Statistical Quality Control* (phase I estimation, phase II monitoring).
    """
    e = vector(e, "e", "drift_test")
    s = vector(scaled_abs, "scaled_abs", "drift_test", allow_nan=True)
    if s.size != e.size:
        raise InputError("drift_test", f"scaled_abs has {s.size} values but e has {e.size}; pass one value per cell")
    reference = positive_int(reference, "reference", "drift_test", minimum=2)
    _option(bias_centre, _CENTRES, "bias_centre")
    _option(transform, _TRANSFORMS, "transform")
    notes, bias, worse = [], None, None
    sigma, floored = float("nan"), False
    if e.size <= reference:
        notes.append(f"only {e.size} cells, none after the {reference}-cell reference window")
    else:
        z, sigma, floored = _standardise(e, reference, sigma_floor, bias_centre == "reference", autocorrelation)
        g = np.sqrt(s) if transform == "sqrt" else s
        u, _, _ = _standardise(g, reference, sigma_floor, True, autocorrelation)
        if z is None:
            notes.append("reference errors are all zero or too few; bias test skipped")
        else:
            bias = cusum(z, k=k, h=h, side="two-sided")
        if u is None:
            notes.append("reference scaled errors are missing, all zero or too few; deterioration test skipped")
        else:
            worse = cusum(u, k=k, h=h, side="upper")
    return _drift_result(e, s, reference, bias, worse, sigma, floored, "; ".join(notes), window, alpha)


def _option(value: str, allowed: tuple[str, ...], name: str) -> None:
    if value not in allowed:
        raise UnknownName(f"drift_test: {name} {value!r} is unknown; use one of {', '.join(allowed)}")


def _drift_result(e, s, reference, bias, worse, sigma, floored, note, window, alpha) -> DriftResult:
    direction = None
    if bias is not None and bias.alarm is not None:
        direction = "forecasts too low" if bias.alarm == bias.upper_alarm else "forecasts too high"
    return DriftResult(
        n=int(e.size),
        reference=reference,
        note=note,
        bias_alarm=bias.alarm if bias else None,
        bias_start=bias.start if bias else None,
        bias_direction=direction,
        deterioration_alarm=worse.alarm if worse else None,
        deterioration_start=worse.start if worse else None,
        mase_reference=_nanmean(s[:reference]),
        mase_recent=_nanmean(s[reference:]),
        tracking_signal=tracking_signal(e, window=window),
        trigg_signal=float(trigg_signal(e, alpha=alpha)[-1]) if e.size else float("nan"),
        sigma=sigma,
        sigma_floored=floored,
        bias=bias,
        deterioration=worse,
    )
