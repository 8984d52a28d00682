"""ledger.stats.metrics: outside checks, hand-worked examples, edge cases and naive loop oracles.

Sources are those of /work/shared/REFERENCES.md; each check names its source beside it.
"""

import math
import re
import warnings

import numpy as np
import pytest
from sklearn.metrics import (
    mean_absolute_error,
    mean_absolute_percentage_error,
    mean_pinball_loss,
    mean_squared_error,
)

from ledger.stats import metrics as M

# --- outside checks ---------------------------------------------------------------------------


def test_mase_matches_r_metrics_worked_example():
    # R package Metrics, `mase` help page (seen): step 1, scale from the same actuals
    # -> 0.2777778 (= 0.25 / 0.9).
    actual = [1.1, 1.9, 3.0, 4.4, 5.0, 5.6]
    predicted = [0.9, 1.8, 2.5, 4.5, 5.0, 6.2]
    scale = M.mase_scale(actual, m=1)
    # |diffs| 0.8, 1.1, 1.4, 0.6, 0.6 -> 4.5 / 5 = 0.9 ; |e| 0.2, 0.1, 0.5, 0.1, 0, 0.6 -> 1.5 / 6
    assert scale == pytest.approx(0.9, abs=1e-12)
    assert M.mae(actual, predicted) == pytest.approx(0.25, abs=1e-12)
    assert M.mase(actual, predicted, scale=scale) == pytest.approx(0.2777778, abs=5e-8)


@pytest.mark.parametrize("level", [50, 80, 90, 95, 99])
def test_interval_score_equals_sum_of_pinball_losses(level):
    # Gneiting & Raftery (2007), JASA 102(477), eq. 43, and the identity of REFERENCES.md
    # (computed): (alpha/2) IS_alpha(l, u; y) = L_{alpha/2}(l, y) + L_{1-alpha/2}(u, y).
    rng = np.random.default_rng(2007)
    centre = rng.normal(100.0, 20.0, size=500)
    half = rng.uniform(0.0, 30.0, size=500)
    lower, upper = centre - half, centre + half
    y = centre + rng.normal(0.0, 25.0, size=500)
    # The data must exercise all three branches, or the identity is only checked on widths.
    assert (y < lower).any() and (y > upper).any() and ((y >= lower) & (y <= upper)).any()
    alpha = 1 - level / 100
    left = alpha / 2 * M.interval_scores(y, lower, upper, level=level)
    right = M.pinball_losses(y, lower, tau=alpha / 2) + M.pinball_losses(
        y, upper, tau=1 - alpha / 2
    )
    np.testing.assert_allclose(left, right, rtol=1e-12, atol=1e-12)


def test_pinball_matches_sktime_documentation_example():
    # sktime, `PinballLoss` documentation worked example (seen; values in REFERENCES.md):
    # mean loss per quantile [0.16625, 0.275, 0.09625], overall 0.1791666...
    y = [3, -0.5, 2, 7, 2]
    forecasts = {
        0.05: [1.25, 0, 1, 4, 0.625],
        0.5: [2.5, 0, 2, 8, 1.25],
        0.95: [3.75, 0, 3, 12, 1.875],
    }
    per_tau = [M.mean_pinball(y, q, tau=tau) for tau, q in forecasts.items()]
    np.testing.assert_allclose(per_tau, [0.16625, 0.275, 0.09625], rtol=0, atol=1e-12)
    assert np.mean(per_tau) == pytest.approx(0.1791666666666, abs=1e-12)


@pytest.fixture
def positive_sample():
    # Seeded random data without zeros: scikit-learn's MAPE guards zeros with an epsilon and
    # returns a fraction, so it is a reference only where no actual is zero.
    rng = np.random.default_rng(1234)
    y = rng.uniform(1.0, 100.0, size=400)
    f = y + rng.normal(0.0, 10.0, size=400)
    return y, f


def test_point_metrics_match_scikit_learn(positive_sample):
    # scikit-learn mean_absolute_error, mean_squared_error, mean_absolute_percentage_error
    # as reference implementations (sklearn's MAPE is a fraction: x 100).
    y, f = positive_sample
    assert M.mae(y, f) == pytest.approx(mean_absolute_error(y, f), rel=1e-12)
    assert M.rmse(y, f) == pytest.approx(math.sqrt(mean_squared_error(y, f)), rel=1e-12)
    assert M.mape(y, f) == pytest.approx(100 * mean_absolute_percentage_error(y, f), rel=1e-12)


@pytest.mark.parametrize("tau", [0.05, 0.25, 0.5, 0.9, 0.99])
def test_mean_pinball_matches_scikit_learn(positive_sample, tau):
    # scikit-learn mean_pinball_loss(alpha=tau) as reference implementation.
    y, f = positive_sample
    expected = mean_pinball_loss(y, f, alpha=tau)
    assert M.mean_pinball(y, f, tau=tau) == pytest.approx(expected, rel=1e-12)


# --- sign convention ----------------------------------------------------------------------------


def test_sign_convention_positive_error_means_forecast_too_low():
    # Project convention e = y - f: actual 10, forecast 8 -> +2, forecast too low.
    assert M.errors([10.0], [8.0]).tolist() == [2.0]
    assert M.bias([10.0, 10.0], [8.0, 9.0]) == 1.5
    assert M.bias_percent([10.0, 10.0], [8.0, 9.0]) == 15.0  # 100 * 3 / 20
    assert M.bias([10.0], [13.0]) == -3.0  # forecast too high


# --- hand-worked examples, per cell ---------------------------------------------------------


def test_errors_hand_worked():
    # 5-3 = 2, 0-4 = -4, -2-(-2) = 0
    assert M.errors([5, 0, -2], [3, 4, -2]).tolist() == [2.0, -4.0, 0.0]


def test_absolute_percentage_errors_hand_worked_and_zero_actual():
    # 100*|50-40|/50 = 20, 100*|-20-(-25)|/20 = 25, y = 0 -> NaN
    ape = M.absolute_percentage_errors([50, -20, 0], [40, -25, 7])
    assert ape[:2].tolist() == [20.0, 25.0]
    assert math.isnan(ape[2])


def test_symmetric_ape_hand_worked_and_double_zero():
    # 200*|100-60|/160 = 50 ; 200*|0-10|/10 = 200 ; y = f = 0 -> 0 by definition
    assert M.symmetric_ape([100, 0, 0], [60, 10, 0]).tolist() == [50.0, 200.0, 0.0]


def test_interval_hits_closed_interval_and_nan():
    # bounds [2, 8]: 2 (on lower) in, 8 (on upper) in, 1 out, 9 out, NaN actual -> False
    hits = M.interval_hits([2, 8, 1, 9, np.nan], 2, 8)
    assert hits.tolist() == [True, True, False, False, False]


def test_interval_scores_hand_worked():
    # level 90 -> alpha 0.1, 2/alpha = 20, width 10 - 4 = 6:
    # y = 7 inside -> 6 ; y = 3 -> 6 + 20*1 = 26 ; y = 10.5 -> 6 + 20*0.5 = 16 ; y = 4 -> 6
    scores = M.interval_scores([7, 3, 10.5, 4], 4, 10, level=90)
    np.testing.assert_allclose(scores, [6.0, 26.0, 16.0, 6.0], rtol=1e-12)


def test_pinball_losses_hand_worked():
    # tau 0.25: y=10, q=6 -> 0.25*4 = 1 ; y=10, q=14 -> 0.75*4 = 3 ; q = y -> 0
    np.testing.assert_allclose(M.pinball_losses([10, 10, 10], [6, 14, 10], tau=0.25), [1, 3, 0])


def test_pinball_at_median_is_half_absolute_error():
    # tau = 0.5: L = 0.5 |y - q| (direct from the definition)
    y, q = np.array([3.0, -1.0, 8.0]), np.array([1.0, 2.0, 8.5])
    np.testing.assert_allclose(M.pinball_losses(y, q, tau=0.5), 0.5 * np.abs(y - q))


# --- hand-worked examples, scales -------------------------------------------------------------


def test_mase_scale_seasonal_hand_worked():
    # m = 4: pairs (12-10, 18-20, 33-30, 40-40) -> |.| 2, 2, 3, 0 -> 7/4
    history = [10, 20, 30, 40, 12, 18, 33, 40]
    assert M.mase_scale(history, m=4) == 1.75
    # squares 4, 4, 9, 0 -> 17/4
    assert M.rmsse_scale(history, m=4) == 4.25


def test_scale_skips_pairs_across_a_gap():
    # m = 1, [1, 2, NaN, 4, 7]: pairs (2-1)=1, (NaN-2) skip, (4-NaN) skip, (7-4)=3 -> 2 ; sq 5
    assert M.mase_scale([1, 2, np.nan, 4, 7], m=1) == 2.0
    assert M.rmsse_scale([1, 2, np.nan, 4, 7], m=1) == 5.0
    # m = 2, [1, 2, NaN, 4, 7, 10]: (NaN-1) skip, (4-2)=2, (7-NaN) skip, (10-4)=6 -> 4
    assert M.mase_scale([1, 2, np.nan, 4, 7, 10], m=2) == 4.0


# one pair |7 - 5| = 2: mase_scale 2, rmsse_scale 2^2 = 4
@pytest.mark.parametrize("scale_fn, one_pair", [(M.mase_scale, 2.0), (M.rmsse_scale, 4.0)])
def test_scale_missing_for_short_history(scale_fn, one_pair):
    # Fewer than m + 1 values: no pair, no scale. m + 1 values: exactly one pair.
    assert math.isnan(scale_fn([5.0, 6.0, 7.0, 8.0], m=4))
    assert math.isnan(scale_fn([], m=1))
    assert math.isnan(scale_fn([3.0], m=1))
    assert scale_fn([5.0, 6.0, 7.0, 8.0, 7.0], m=4) == one_pair
    # Only pairs that touch gaps: no scale either.
    assert math.isnan(scale_fn([1.0, np.nan, 3.0], m=1))


def test_scale_of_constant_history_is_zero_and_mase_then_missing():
    # q = 0 for a flat history; a cell with q = 0 has no scale, so MASE is NaN.
    q = M.mase_scale([5, 5, 5, 5], m=1)
    assert q == 0.0
    assert math.isnan(M.mase([6.0], [5.0], scale=q))
    assert math.isnan(M.rmsse([6.0], [5.0], scale2=M.rmsse_scale([5, 5, 5], m=1)))
    assert math.isnan(M.msis([6.0], [4.0], [5.0], level=95, scale=q))


def naive_scale(history, m):
    """Loop oracle for mase_scale: every t with both ends present."""
    diffs = [
        abs(history[t] - history[t - m])
        for t in range(m, len(history))
        if not (math.isnan(history[t]) or math.isnan(history[t - m]))
    ]
    return sum(diffs) / len(diffs) if diffs else math.nan


@pytest.mark.parametrize("m", [1, 4, 7, 12])
def test_mase_scale_matches_loop_oracle_with_gaps(m):
    rng = np.random.default_rng(100 + m)
    for _ in range(30):
        history = rng.normal(50.0, 10.0, size=int(rng.integers(0, 40)))
        history[rng.random(history.size) < 0.15] = np.nan
        expected = naive_scale(history.tolist(), m)
        got = M.mase_scale(history, m=m)
        assert got == pytest.approx(expected, rel=1e-12, nan_ok=True)


# --- hand-worked examples, aggregates ------------------------------------------------------


Y = [10.0, 20.0, 30.0, 40.0]
F = [12.0, 20.0, 27.0, 44.0]  # e = -2, 0, 3, -4


def test_point_aggregates_hand_worked():
    assert M.mae(Y, F) == 2.25  # (2 + 0 + 3 + 4) / 4
    assert M.rmse(Y, F) == pytest.approx(math.sqrt(29 / 4))  # (4 + 0 + 9 + 16) / 4
    assert M.mape(Y, F) == pytest.approx(10.0)  # (20 + 0 + 10 + 10) / 4
    # sAPE: 200*2/22, 0, 200*3/57, 200*4/84
    assert M.smape(Y, F) == pytest.approx((400 / 22 + 600 / 57 + 800 / 84) / 4)
    assert M.wape(Y, F) == 9.0  # 100 * 9 / 100
    assert M.bias(Y, F) == -0.75  # (-2 + 0 + 3 - 4) / 4
    assert M.bias_percent(Y, F) == -3.0  # 100 * (-3) / 100


def test_mape_excludes_zero_actuals():
    # The zero actual is excluded: mean of 100*5/50 = 10 and 100*30/100 = 30 -> 20
    assert M.mape([0.0, 50.0, 100.0], [4.0, 55.0, 70.0]) == pytest.approx(20.0)
    assert math.isnan(M.mape([0.0, 0.0], [1.0, 2.0]))  # nothing left to average


def test_smape_counts_double_zero_as_perfect():
    # y = f = 0 -> 0 ; y = 0, f = 5 -> 200 ; mean 100
    assert M.smape([0.0, 0.0], [0.0, 5.0]) == 100.0


def test_wape_and_bias_percent_with_all_zero_actuals_are_missing():
    assert math.isnan(M.wape([0.0, 0.0], [1.0, 2.0]))
    assert math.isnan(M.bias_percent([0.0, 0.0], [1.0, 2.0]))
    assert M.wape([0.0, 10.0], [1.0, 8.0]) == 30.0  # 100 * (1 + 2) / 10


def test_mase_per_cell_scale_skips_cells_without_scale():
    # |e| 2, 0, 3, 4 ; scales 4, NaN, 3, 0 -> cells 1 and 3: 2/4 = 0.5, 3/3 = 1 -> 0.75
    assert M.mase(Y, F, scale=[4.0, np.nan, 3.0, 0.0]) == 0.75
    # negative and infinite scales are not scales either
    assert M.mase(Y, F, scale=[4.0, -1.0, 3.0, np.inf]) == 0.75
    assert math.isnan(M.mase(Y, F, scale=np.nan))


def test_rmsse_hand_worked():
    # e^2 4, 0, 9, 16 ; q2 4, 1, 9, 16 -> 1, 0, 1, 1 -> sqrt(3/4)
    assert M.rmsse(Y, F, scale2=[4.0, 1.0, 9.0, 16.0]) == pytest.approx(math.sqrt(0.75))
    # one q2 for the group: sqrt(29/4 / 4)
    assert M.rmsse(Y, F, scale2=4.0) == pytest.approx(math.sqrt(29 / 16))


def test_coverage_hand_worked():
    # bounds [15, 35]: 10 out, 20 in, 30 in, 40 out -> 0.5
    assert M.coverage(Y, 15.0, 35.0) == 0.5


def test_interval_aggregates_hand_worked():
    # level 95 -> 2/alpha = 40, bounds [2, 8], width 6: y 5 -> 6 ; y 1 -> 46 ; y 12 -> 166
    y = [5.0, 1.0, 12.0]
    assert M.mean_interval_score(y, 2.0, 8.0, level=95) == pytest.approx(218 / 3)
    # scales 2, 4, NaN -> 6/2 = 3, 46/4 = 11.5 -> 7.25 (third cell has no scale)
    assert M.msis(y, 2.0, 8.0, level=95, scale=[2.0, 4.0, np.nan]) == pytest.approx(7.25)


def test_mean_pinball_hand_worked():
    # tau 0.8: y 10 q 5 -> 0.8*5 = 4 ; y 10 q 12 -> 0.2*2 = 0.4 -> 2.2
    assert M.mean_pinball([10.0, 10.0], [5.0, 12.0], tau=0.8) == pytest.approx(2.2)


def test_aggregates_skip_cells_with_nan():
    # Only the first cell is complete: |1 - 2| = 1
    y, f = [1.0, np.nan, 3.0], [2.0, 2.0, np.nan]
    assert M.mae(y, f) == 1.0
    assert M.bias(y, f) == -1.0
    assert M.coverage([1.0, np.nan, 5.0], [0.0, 0.0, np.nan], [2.0, 2.0, 9.0]) == 1.0


# --- empty groups ---------------------------------------------------------------------------

AGGREGATES = {
    "mae": lambda: M.mae([], []),
    "rmse": lambda: M.rmse([], []),
    "mape": lambda: M.mape([], []),
    "smape": lambda: M.smape([], []),
    "wape": lambda: M.wape([], []),
    "mase": lambda: M.mase([], [], scale=[]),
    "rmsse": lambda: M.rmsse([], [], scale2=[]),
    "bias": lambda: M.bias([], []),
    "bias_percent": lambda: M.bias_percent([], []),
    "coverage": lambda: M.coverage([], [], []),
    "mean_interval_score": lambda: M.mean_interval_score([], [], [], level=80),
    "msis": lambda: M.msis([], [], [], level=95, scale=[]),
    "mean_pinball": lambda: M.mean_pinball([], [], tau=0.5),
}


@pytest.mark.parametrize("name", sorted(AGGREGATES))
def test_empty_group_gives_nan_without_warning(name):
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        value = AGGREGATES[name]()
    assert isinstance(value, float) and math.isnan(value)


# --- invalid options --------------------------------------------------------------------------

BAD_LEVELS = [0, 100, -5, 150, float("nan"), [80, 95]]
BAD_TAUS = [0, 1, -0.1, 90, float("nan")]


@pytest.mark.parametrize("level", BAD_LEVELS)
@pytest.mark.parametrize(
    "call",
    [
        lambda level: M.interval_scores([1.0], [0.0], [2.0], level=level),
        lambda level: M.mean_interval_score([1.0], [0.0], [2.0], level=level),
        lambda level: M.msis([1.0], [0.0], [2.0], level=level, scale=1.0),
        lambda level: M.mean_interval_score([], [], [], level=level),  # even for an empty group
    ],
)
def test_invalid_level_raises_with_value(call, level):
    with pytest.raises(ValueError, match=re.escape(repr(level))):
        call(level)


@pytest.mark.parametrize("tau", BAD_TAUS)
@pytest.mark.parametrize(
    "call",
    [
        lambda tau: M.pinball_losses([1.0], [0.0], tau=tau),
        lambda tau: M.mean_pinball([1.0], [0.0], tau=tau),
        lambda tau: M.mean_pinball([], [], tau=tau),
    ],
)
def test_invalid_tau_raises_with_value(call, tau):
    with pytest.raises(ValueError, match=re.escape(repr(tau))):
        call(tau)


@pytest.mark.parametrize("m", [0, -1, 1.5, True, "12"])
@pytest.mark.parametrize("scale_fn", [M.mase_scale, M.rmsse_scale])
def test_invalid_season_length_raises_with_value(scale_fn, m):
    with pytest.raises(ValueError, match=re.escape(repr(m))):
        scale_fn([1.0, 2.0, 3.0], m=m)


@pytest.mark.parametrize(
    "call",
    [
        lambda: M.interval_hits([1.0, 2.0], [0.0, 3.0], [2.0, 2.5]),
        lambda: M.interval_scores([1.0, 2.0], [0.0, 3.0], [2.0, 2.5], level=80),
        lambda: M.coverage([1.0, 2.0], [0.0, 3.0], [2.0, 2.5]),
    ],
)
def test_crossed_bounds_raise_with_values(call):
    # second cell: lower 3.0 > upper 2.5
    with pytest.raises(ValueError, match=r"index 1: lower=3\.0, upper=2\.5"):
        call()


def test_aggregates_reject_two_dimensional_input():
    with pytest.raises(ValueError, match=r"\(2, 2\)"):
        M.mae([[1.0, 2.0], [3.0, 4.0]], [[1.0, 2.0], [3.0, 4.0]])


def test_history_must_be_one_dimensional():
    with pytest.raises(ValueError, match=r"\(2, 2\)"):
        M.mase_scale([[1.0, 2.0], [3.0, 4.0]], m=1)
