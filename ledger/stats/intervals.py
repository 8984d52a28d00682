"""Interval calibration tests: pure functions over miss counts and hit sequences.

A *miss* (or hit, in the risk literature) is a cell whose actual fell outside its L% interval;
the nominal miss rate is p = 1 - L/100. Nothing here reads the ledger: :mod:`ledger.findings.calibration`
counts misses per group and turns these results into findings. Moved out of
:mod:`ledger.stats.signals` unchanged, plus :func:`independence_from_counts`, which lets transition
counts be pooled over many series before testing.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

import numpy as np
from scipy import special, stats

from .arrays import positive_int, vector
from ..errors import InputError

__all__ = [
    "Zone",
    "Direction",
    "LRTest",
    "IndependenceTest",
    "ConditionalCoverage",
    "ZoneResult",
    "kupiec_pof",
    "christoffersen",
    "independence_from_counts",
    "transition_counts",
    "conditional_coverage",
    "coverage_zone",
    "holm",
    "benjamini_hochberg",
]

Zone = Literal["within tolerance", "watch", "out of tolerance", "no cells"]
Direction = Literal["too narrow", "too wide", "as stated"]


def _rate(p: float, func: str) -> float:
    if not 0.0 < p < 1.0:
        raise InputError(func, f"p = {p!r} is outside (0, 1); pass the nominal miss rate 1 - L/100")
    return float(p)


def _miss_counts(p: float, misses: int, n: int, func: str) -> tuple[float, int, int]:
    """The checked (p, misses, n) of a test on x misses among n cells at nominal miss rate p."""
    p = _rate(p, func)
    n = positive_int(n, "n", func, minimum=0)
    x = positive_int(misses, "misses", func, minimum=0)
    if x > n:
        raise InputError(func, f"misses = {x} exceeds n = {n}; count misses among the n cells")
    return p, x, n


@dataclass(frozen=True)
class LRTest:
    """A likelihood-ratio statistic, its chi-squared p-value and degrees of freedom (NaN when undefined)."""

    statistic: float
    p_value: float
    df: int


def _lr(loglik_null: float, loglik_alt: float, df: int) -> LRTest:
    lr = max(-2.0 * (loglik_null - loglik_alt), 0.0)  # rounding can make an exact 0 slightly negative
    return LRTest(lr, float(stats.chi2.sf(lr, df)), df)


def kupiec_pof(misses: int, n: int, *, p: float) -> LRTest:
    """Kupiec's proportion-of-failures test: is the miss rate x/n consistent with p?

    Formula: LR = -2 ln[(1-p)^(n-x) p^x] + 2 ln[(1-x/n)^(n-x) (x/n)^x], with 0 ln 0 = 0;
    p-value from chi-squared with 1 df. p is the nominal miss rate 1 - L/100 of an L% interval.
    Returns an :class:`LRTest`; n = 0 gives NaN (nothing to test).
    Orientation: larger LR is stronger evidence of miscalibration, in either direction.
    Reference: Kupiec, P. (1995) "Techniques for verifying the accuracy of risk measurement
    models", *Journal of Derivatives* 3(2), 73-84.
    """
    p, x, n = _miss_counts(p, misses, n, "kupiec_pof")
    if n == 0:
        return LRTest(float("nan"), float("nan"), 1)
    null = special.xlogy(n - x, 1 - p) + special.xlogy(x, p)
    alt = special.xlogy(n - x, 1 - x / n) + special.xlogy(x, x / n)
    return _lr(float(null), float(alt), 1)


def _hits(hits, func: str) -> np.ndarray:
    arr = np.asarray(hits)
    if arr.ndim != 1:
        raise InputError(func, f"hits must be one-dimensional, got shape {arr.shape}")
    if arr.size and not np.isin(arr, (0, 1)).all():
        raise InputError(func, "hits must be booleans or 0/1 (True = the actual fell outside the interval)")
    return arr.astype(bool)


@dataclass(frozen=True)
class IndependenceTest:
    """Christoffersen's independence test: transition counts n_ij (state i then j; 1 = miss) and the LR."""

    n00: int
    n01: int
    n10: int
    n11: int
    statistic: float
    p_value: float
    df: int = 1


def transition_counts(hits) -> tuple[int, int, int, int]:
    """(n00, n01, n10, n11): how often state i (1 = miss) is followed by state j in one hit sequence."""
    h = _hits(hits, "transition_counts")
    prev, nxt = h[:-1], h[1:]
    return (int(np.sum(~prev & ~nxt)), int(np.sum(~prev & nxt)),
            int(np.sum(prev & ~nxt)), int(np.sum(prev & nxt)))


def christoffersen(hits) -> IndependenceTest:
    """Christoffersen's independence test for clustered misses.

    Formula: with n_ij the number of times state i (1 = miss) is followed by state j, pi01 =
    n01/(n00+n01), pi11 = n11/(n10+n11), pi = (n01+n11)/(n00+n01+n10+n11),
    LR_ind = -2 ln[(1-pi)^(n00+n10) pi^(n01+n11)]
             + 2 ln[(1-pi01)^n00 pi01^n01 (1-pi11)^n10 pi11^n11], chi-squared with 1 df.
    Degenerate counts: 0 ln 0 = 0, and a transition probability whose denominator is 0 (e.g. no
    transition leaves state 1) is set to 0; it multiplies only zero counts, so it adds nothing.
    No misses at all (or all misses) gives LR = 0, p = 1: no evidence of clustering. Fewer than
    two cells gives NaN. Orientation: larger LR means misses cluster (or alternate) more than chance.
    Reference: Christoffersen, P.F. (1998) "Evaluating interval forecasts", *International
    Economic Review* 39(4), 841-862.
    """
    h = _hits(hits, "christoffersen")
    counts = transition_counts(h)
    if h.size < 2:
        return IndependenceTest(*counts, float("nan"), float("nan"))
    return independence_from_counts(*counts)


def independence_from_counts(n00: int, n01: int, n10: int, n11: int) -> IndependenceTest:
    """Christoffersen's independence LR from transition counts (formula as in :func:`christoffersen`).

    Counts may be summed over several hit sequences (one per series), which pools the evidence
    without pairing the last cell of one series with the first of the next. No transitions at
    all gives NaN.
    """
    counts = [positive_int(c, name, "independence_from_counts", minimum=0)
              for c, name in zip((n00, n01, n10, n11), ("n00", "n01", "n10", "n11"))]
    n00, n01, n10, n11 = counts
    total = n00 + n01 + n10 + n11
    if total == 0:
        return IndependenceTest(0, 0, 0, 0, float("nan"), float("nan"))
    pi = (n01 + n11) / total
    pi01 = n01 / (n00 + n01) if n00 + n01 else 0.0
    pi11 = n11 / (n10 + n11) if n10 + n11 else 0.0
    null = special.xlogy(n00 + n10, 1 - pi) + special.xlogy(n01 + n11, pi)
    alt = (special.xlogy(n00, 1 - pi01) + special.xlogy(n01, pi01)
           + special.xlogy(n10, 1 - pi11) + special.xlogy(n11, pi11))
    lr = _lr(float(null), float(alt), 1)
    return IndependenceTest(n00, n01, n10, n11, lr.statistic, lr.p_value)


@dataclass(frozen=True)
class ConditionalCoverage:
    """Christoffersen's conditional coverage: LR_cc = LR_pof + LR_ind, chi-squared with 2 df."""

    pof: LRTest
    independence: IndependenceTest
    statistic: float
    p_value: float
    df: int = 2


def conditional_coverage(hits, *, p: float) -> ConditionalCoverage:
    """Joint test of the miss rate and independence of misses.

    Formula: LR_cc = LR_pof(x of n, p) + LR_ind, chi-squared with 2 df, where x and n count the
    whole hit sequence (the usual practical form; Christoffersen's exact decomposition drops the
    first cell from the coverage part). NaN when either part is NaN (fewer than two cells).
    Orientation: larger is stronger evidence against correct conditional coverage.
    Reference: Christoffersen, P.F. (1998) "Evaluating interval forecasts", *International
    Economic Review* 39(4), 841-862; Kupiec (1995) for the coverage part.
    """
    h = _hits(hits, "conditional_coverage")
    pof = kupiec_pof(int(h.sum()), int(h.size), p=p)
    ind = christoffersen(h)
    lr = pof.statistic + ind.statistic
    pval = float(stats.chi2.sf(lr, 2)) if np.isfinite(lr) else float("nan")
    return ConditionalCoverage(pof, ind, float(lr), pval)


@dataclass(frozen=True)
class ZoneResult:
    """Tolerance zone of a miss count: see :func:`coverage_zone`."""

    direction: Direction
    zone: Zone
    cumulative: float
    expected: float
    p_value: float
    misses: int
    n: int
    p: float


def _zone(tail: float, watch: float, out: float) -> Zone:
    if tail >= out:
        return "out of tolerance"
    return "watch" if tail >= watch else "within tolerance"


def coverage_zone(misses: int, n: int, *, p: float, watch: float = 0.95, out: float = 0.9999) -> ZoneResult:
    """Tolerance zone of x misses among n cells of intervals with nominal miss rate p.

    Formula: c = P(X <= x) for X ~ Binomial(n, p). Too many misses (intervals too narrow):
    c >= ``out`` (99.99%) is "out of tolerance", c >= ``watch`` (95%) "watch". Too few misses
    (intervals too wide), the mirror image on the lower tail: c <= 1 - out is out of tolerance,
    c <= 1 - watch watch. Otherwise "within tolerance" and direction "as stated".
    Returns a :class:`ZoneResult` with c (``cumulative``), the expected misses n*p and the
    two-sided exact binomial p-value (scipy.stats.binomtest), which is what false-discovery
    control (:func:`holm`, :func:`benjamini_hochberg`) should use. n = 0 gives zone "no cells".
    Small samples cannot reach the too-wide zones: with 12 cells at 80%, P(X <= 0) = 6.9%.
    Reference: Basel Committee on Banking Supervision (1996) "Supervisory framework for the use of
    'backtesting' in conjunction with the internal models approach to market risk capital
    requirements" (green / yellow / red zones; Backsight uses its own zone names).
    """
    p, x, n = _miss_counts(p, misses, n, "coverage_zone")
    if n == 0:
        return ZoneResult("as stated", "no cells", float("nan"), 0.0, float("nan"), 0, 0, p)
    c = float(stats.binom.cdf(x, n, p))
    pval = float(stats.binomtest(x, n, p).pvalue)
    narrow, wide = _zone(c, watch, out), _zone(1.0 - c, watch, out)
    if narrow != "within tolerance":
        return ZoneResult("too narrow", narrow, c, n * p, pval, x, n, p)
    if wide != "within tolerance":
        return ZoneResult("too wide", wide, c, n * p, pval, x, n, p)
    return ZoneResult("as stated", "within tolerance", c, n * p, pval, x, n, p)


def _pvalues(pvalues, func: str) -> tuple[np.ndarray, np.ndarray]:
    arr = vector(pvalues, "pvalues", func, allow_nan=True)
    ok = ~np.isnan(arr)
    if ((arr[ok] < 0) | (arr[ok] > 1)).any():
        raise InputError(func, "pvalues must lie in [0, 1]; pass p-values, not statistics")
    return arr, ok


def holm(pvalues) -> np.ndarray:
    """Holm's step-down adjusted p-values (family-wise error control).

    Formula: with the m non-NaN p-values sorted, p_(1) <= ... <= p_(m),
    adj_(i) = max_{j <= i} min(1, (m - j + 1) p_(j)). NaN stays NaN and does not count in m.
    Returns an array shaped like the input. Orientation: reject where adj <= the chosen level.
    Reference: Holm, S. (1979) "A simple sequentially rejective multiple test procedure",
    *Scandinavian Journal of Statistics* 6(2), 65-70.
    """
    arr, ok = _pvalues(pvalues, "holm")
    out = np.full(arr.shape, np.nan)
    valid = arr[ok]
    order = np.argsort(valid, kind="stable")
    m = valid.size
    adjusted = np.maximum.accumulate(np.minimum(1.0, (m - np.arange(m)) * valid[order]))
    filled = np.empty(m)
    filled[order] = adjusted
    out[ok] = filled
    return out


def benjamini_hochberg(pvalues) -> np.ndarray:
    """Benjamini-Hochberg step-up adjusted p-values (false-discovery-rate control).

    Formula: with the m non-NaN p-values sorted, adj_(i) = min_{j >= i} min(1, m p_(j) / j).
    NaN stays NaN and does not count in m. Returns an array shaped like the input.
    Orientation: reject where adj <= the chosen false-discovery rate q.
    Reference: Benjamini, Y. & Hochberg, Y. (1995) "Controlling the false discovery rate: a
    practical and powerful approach to multiple testing", *JRSS B* 57(1), 289-300.
    """
    arr, ok = _pvalues(pvalues, "benjamini_hochberg")
    out = np.full(arr.shape, np.nan)
    valid = arr[ok]
    order = np.argsort(valid, kind="stable")
    m = valid.size
    scaled = valid[order] * m / np.arange(1, m + 1)
    adjusted = np.minimum(1.0, np.minimum.accumulate(scaled[::-1])[::-1])
    filled = np.empty(m)
    filled[order] = adjusted
    out[ok] = filled
    return out


