"""ledger.stats.metrics: properties and invariances, checked with hypothesis.

Properties follow from the definitions (Hyndman & Koehler 2006 for the scaled and percentage
errors; Gneiting & Raftery 2007 for the interval score; Koenker & Bassett 1978 for the pinball
loss); no value here is taken from a source. Runs are derandomized, so every run draws the same
examples.
"""

import math

import numpy as np
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from ledger.stats import metrics as M

SETTINGS = settings(derandomize=True)

# Two-decimal amounts in [-1e4, 1e4]: finite and bounded like real data, and two distinct values
# differ by at least a cent, so float rounding stays far below the tolerances used here.
amounts = st.integers(-(10**6), 10**6).map(lambda k: k / 100)
# General finite floats, for properties that hold exactly whatever the rounding.
reals = st.floats(-1e6, 1e6, allow_nan=False, allow_infinity=False)
levels = st.floats(0.0, 100.0, exclude_min=True, exclude_max=True)
taus = st.floats(0.0, 1.0, exclude_min=True, exclude_max=True)
factors = st.floats(1e-2, 1e2)
scales = st.one_of(st.just(0.0), st.floats(1e-2, 1e3))  # 0 = a cell without a scale


@st.composite
def groups(draw, values=amounts, min_size=0, max_size=30):
    """y, f, lower, upper and a per-cell scale for one group of cells (lower <= upper)."""
    n = draw(st.integers(min_size, max_size))

    def column(elements):
        return np.array(draw(st.lists(elements, min_size=n, max_size=n)), dtype=float)

    y, f, half = column(values), column(values), np.abs(column(values))
    return y, f, f - half, f + half, column(scales)


def aggregates(y, f, lower, upper, scale):
    return {
        "mae": M.mae(y, f),
        "rmse": M.rmse(y, f),
        "mape": M.mape(y, f),
        "smape": M.smape(y, f),
        "wape": M.wape(y, f),
        "mase": M.mase(y, f, scale=scale),
        "rmsse": M.rmsse(y, f, scale2=scale),
        "bias": M.bias(y, f),
        "bias_percent": M.bias_percent(y, f),
        "coverage": M.coverage(y, lower, upper),
        "mean_interval_score": M.mean_interval_score(y, lower, upper, level=80),
        "msis": M.msis(y, lower, upper, level=95, scale=scale),
        "mean_pinball": M.mean_pinball(y, f, tau=0.3),
    }


def close(a, b, rel=1e-9, abs_=1e-6):
    # abs_ covers results near zero after cancellation (bias), where summation order matters.
    if math.isnan(a) or math.isnan(b):
        return math.isnan(a) and math.isnan(b)
    return math.isclose(a, b, rel_tol=rel, abs_tol=abs_)


@SETTINGS
@given(data=st.data(), cells=groups())
def test_aggregates_are_permutation_invariant(data, cells):
    order = np.array(data.draw(st.permutations(range(cells[0].size))), dtype=int)
    before = aggregates(*cells)
    after = aggregates(*(column[order] for column in cells))
    for name, value in before.items():
        assert close(value, after[name]), (name, value, after[name])


@SETTINGS
@given(cells=groups(min_size=1), c=factors)
def test_percentage_errors_are_scale_invariant(cells, c):
    y, f = cells[0], cells[1]
    assert close(M.mape(c * y, c * f), M.mape(y, f))
    assert close(M.smape(c * y, c * f), M.smape(y, f))


@SETTINGS
@given(
    cells=groups(min_size=1),
    history=st.lists(amounts, min_size=2, max_size=40),
    m=st.integers(1, 12),
    c=factors,
)
def test_mase_and_msis_are_scale_invariant(cells, history, m, c):
    y, f, lower, upper, _ = cells
    h = np.array(history)
    q, q_scaled = M.mase_scale(h, m=m), M.mase_scale(c * h, m=m)
    assert close(M.mase(c * y, c * f, scale=q_scaled), M.mase(y, f, scale=q))
    assert close(
        M.msis(c * y, c * lower, c * upper, level=90, scale=q_scaled),
        M.msis(y, lower, upper, level=90, scale=q),
    )


@SETTINGS
@given(cells=groups(min_size=1), k=st.integers(-10, 10))
def test_coverage_is_scale_invariant(cells, k):
    # A power of two scales every value exactly, so a hit on a bound stays a hit.
    y, _, lower, upper, _ = cells
    c = 2.0**k
    assert M.coverage(c * y, c * lower, c * upper) == M.coverage(y, lower, upper)


@SETTINGS
@given(
    y=st.lists(amounts, min_size=1, max_size=30),
    data=st.data(),
    history=st.lists(amounts, min_size=2, max_size=40),
    m=st.integers(1, 12),
)
def test_mase_is_mae_over_scale_for_one_series(y, data, history, m):
    f = data.draw(st.lists(amounts, min_size=len(y), max_size=len(y)))
    q = M.mase_scale(history, m=m)
    assume(math.isfinite(q) and q > 0)
    assert close(M.mase(y, f, scale=q), M.mae(y, f) / q, abs_=0.0)


@SETTINGS
@given(cells=groups(values=reals, min_size=1))
def test_coverage_is_a_share(cells):
    y, _, lower, upper, _ = cells
    assert 0.0 <= M.coverage(y, lower, upper) <= 1.0


@SETTINGS
@given(cells=groups(values=reals, min_size=1), level=levels)
def test_interval_score_is_at_least_the_width(cells, level):
    y, _, lower, upper, _ = cells
    scores = M.interval_scores(y, lower, upper, level=level)
    width = upper - lower
    assert np.all(scores >= width)
    # ... with equality exactly for the actuals inside the interval.
    inside = M.interval_hits(y, lower, upper)
    assert np.all(scores[inside] == width[inside])


@SETTINGS
@given(cells=groups(values=reals, min_size=1), tau=taus)
def test_pinball_is_non_negative_and_zero_for_exact_forecasts(cells, tau):
    y, f = cells[0], cells[1]
    assert np.all(M.pinball_losses(y, f, tau=tau) >= 0)
    assert np.all(M.pinball_losses(y, y, tau=tau) == 0)
