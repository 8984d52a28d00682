"""Sentences for people: bias in words, sample-size labels, tolerance zones (numbers: ledger.wording).

Sign convention of the project: e = actual − forecast, so a positive bias means the forecasts
were too low. Every sentence here says it in words ("forecasts 3.2% too low").
"""

from __future__ import annotations

import math

import numpy as np
from scipy import stats

from ledger.wording import format_level

__all__ = [
    "SMALL_SAMPLE",
    "bias_words",
    "coverage_words",
    "is_small",
    "sample_note",
    "tolerance_band",
]

#: Below this many cells a figure is labelled "small sample" (common practice, no source).
SMALL_SAMPLE = 12


def _finite(x) -> bool:
    return x is not None and isinstance(x, (int, float)) and math.isfinite(x)


def bias_words(bias_pct) -> str:
    """'forecasts 3.2% too low' (bias > 0), 'forecasts 1.0% too high' (< 0), 'no bias to 0.1%'."""
    if not _finite(bias_pct):
        return "–"
    if abs(bias_pct) < 0.05:
        return "no bias to 0.1%"
    return f"forecasts {abs(bias_pct):.1f}% too {'low' if bias_pct > 0 else 'high'}"


def is_small(n) -> bool:
    return n is not None and n < SMALL_SAMPLE


def sample_note(n: int) -> str:
    """'n = 240' or 'n = 8, small sample'."""
    return f"n = {n:,}, small sample" if is_small(n) else f"n = {n:,}"


def tolerance_band(n: int, level: float, *, watch: float = 0.95) -> tuple[float, float]:
    """Observed coverage (%) that stays within tolerance for n cells at nominal level L.

    With miss rate p = 1 − L/100 and X ~ Binomial(n, p) misses, x misses are within tolerance
    when ``1 − watch`` < P(X ≤ x) < ``watch`` (the same rule as ``ledger.stats.intervals.coverage_zone``,
    after the Basel Committee (1996) backtesting zones). Returns the coverage range
    (100·(1 − x_hi/n), 100·(1 − x_lo/n)); (nan, nan) when n = 0.
    """
    if n <= 0:
        return (math.nan, math.nan)
    p = 1 - level / 100
    cdf = stats.binom.cdf(np.arange(n + 1), n, p)
    xs = np.flatnonzero((cdf > 1 - watch) & (cdf < watch))
    if not xs.size:  # tiny n: no count is inside; show the nominal level only
        return (level, level)
    return (100 * (1 - xs[-1] / n), 100 * (1 - xs[0] / n))


def coverage_words(observed: float, level: float, direction: str, zone: str) -> str:
    """'held 68% of actuals (stated 80%) — too narrow, out of tolerance'."""
    if not _finite(observed):
        return f"no {format_level(level)}% intervals were scored"
    judged = {"too narrow": "too narrow", "too wide": "too wide"}.get(direction, "within the tolerance band")
    tail = f"{judged}, {zone}" if direction in ("too narrow", "too wide") else judged
    return f"held {observed:.0f}% of actuals (stated {format_level(level)}%) — {tail}"
