"""Tests for ledger.checks: drift, calibration and data-quality signals.

Outside values cite their source beside the check (see /work/shared/REFERENCES.md for the list).
Simulations are seeded and vectorised across replicates.
"""

import math

import numpy as np
import pytest
from scipy import stats
from statsmodels.stats.multitest import multipletests

from ledger.checks import (
    DRIFT_H,
    TS_LIMIT,
    benjamini_hochberg,
    christoffersen,
    conditional_coverage,
    coverage_zone,
    cusum,
    cusum_path,
    demand_interval_stats,
    drift_test,
    gaps,
    holm,
    kupiec_pof,
    reference_length,
    tracking_signal,
    tracking_signal_path,
    tracking_window,
    trigg_signal,
)
from ledger.errors import InputError, UnknownName

HALF_NORMAL_MEAN = math.sqrt(2 / math.pi)  # E|Z| for Z ~ N(0, 1)


# ---------------------------------------------------------------- tracking signal


def test_tracking_signal_hand_worked():
    e = [1.0, 2.0, -1.0, 3.0]
    assert tracking_signal(e, window=4) == pytest.approx(5 / (7 / 4))  # sum 5, mean|e| 7/4
    assert tracking_signal(e, window=2) == pytest.approx(2 / 2)  # last two: -1, 3
    assert tracking_signal(e, window=10) == pytest.approx(20 / 7)  # window longer than history


def test_tracking_signal_sign_and_bound():
    assert tracking_signal([2.0, 1.0, 3.0], window=3) == pytest.approx(3.0)  # all too low: +w
    assert tracking_signal([-2.0, -1.0, -3.0], window=3) == pytest.approx(-3.0)  # all too high: -w


@pytest.mark.parametrize("e", [[], [1.5], [0.0, 0.0, 0.0]])
def test_tracking_signal_undefined_is_nan(e):
    assert math.isnan(tracking_signal(e, window=6))


def test_tracking_signal_rejects_nan_and_bad_window():
    with pytest.raises(InputError, match="NaN at position 1"):
        tracking_signal([1.0, float("nan")], window=3)
    with pytest.raises(InputError, match="window"):
        tracking_signal([1.0, 2.0], window=0)


def test_tracking_signal_path_matches_loop_oracle():
    rng = np.random.default_rng(11)
    e = rng.normal(0.3, 1.0, size=40)
    path = tracking_signal_path(e, window=7)
    for t in range(e.size):
        last = e[max(0, t - 6): t + 1]
        want = last.sum() / np.abs(last).mean() if last.size >= 2 else np.nan
        assert path[t] == pytest.approx(want, nan_ok=True)


def test_default_windows():
    assert (reference_length(12), reference_length(4), reference_length(1)) == (24, 8, 8)
    assert (tracking_window(12), tracking_window(4), tracking_window(52)) == (12, 6, 52)


# ---------------------------------------------------------------- Trigg


def test_trigg_constant_errors_follow_closed_form():
    # e_t = 1: M_0 = 1, E_t = 1 - 0.9^t, M_t = 1, so T_t = 1 - 0.9^t (hand-worked).
    t = np.arange(1, 21)
    assert trigg_signal(np.ones(20)) == pytest.approx(1 - 0.9**t)


def test_trigg_matches_loop_oracle_and_initialisation():
    rng = np.random.default_rng(5)
    e = rng.normal(size=30)
    got = trigg_signal(e, alpha=0.2, init=4)
    smoothed, mad = 0.0, np.abs(e[:4]).mean()
    for t, value in enumerate(e):
        smoothed = 0.2 * value + 0.8 * smoothed
        mad = 0.2 * abs(value) + 0.8 * mad
        assert got[t] == pytest.approx(smoothed / mad)


def test_trigg_edges():
    assert trigg_signal([]).size == 0
    assert np.isnan(trigg_signal([0.0, 0.0])).all()
    with pytest.raises(InputError, match="alpha"):
        trigg_signal([1.0], alpha=0.0)


def test_trigg_white_noise_quantile():
    # REFERENCES.md (computed): 95% quantile of |T| under white noise, alpha = 0.1, about 0.54.
    rng = np.random.default_rng(2024)
    values = trigg_signal(rng.standard_normal((4000, 200)))[:, -1]
    q95 = np.quantile(np.abs(values), 0.95)
    assert q95 == pytest.approx(0.54, abs=0.05)


# ---------------------------------------------------------------- CUSUM


def test_cusum_hand_worked():
    z = [0.0, 1.0, 2.0, -1.0, 3.0]
    got = cusum(z, k=0.5, h=2.5)
    assert got.upper == pytest.approx([0.0, 0.5, 2.0, 0.5, 3.0])
    assert got.lower == pytest.approx([0.0, 0.0, 0.0, 0.5, 0.0])
    assert (got.upper_alarm, got.upper_start, got.lower_alarm) == (4, 1, None)
    assert (got.alarm, got.start) == (4, 1)


def test_cusum_lower_side_and_one_sided_options():
    z = [-3.0, -3.0, 4.0, 4.0]
    two = cusum(z, k=0.5, h=4.0)
    assert (two.lower_alarm, two.lower_start, two.alarm) == (1, 0, 1)  # 2.5 then 5.0 > 4
    upper_only = cusum(z, k=0.5, h=4.0, side="upper")
    assert (upper_only.lower_alarm, upper_only.upper_alarm, upper_only.upper_start) == (None, 3, 2)
    assert cusum(z, k=0.5, h=4.0, side="lower").upper_alarm is None


def test_cusum_path_matches_recursion_oracle_with_start_and_nan():
    rng = np.random.default_rng(3)
    z = rng.normal(0.2, 1.0, size=60)
    z[[5, 17, 18]] = np.nan
    up, lo = cusum_path(z, k=0.4, start_upper=1.5, start_lower=0.7)
    cu, cl = 1.5, 0.7
    for t, value in enumerate(z):
        if not np.isnan(value):  # a missing value carries no evidence
            cu, cl = max(0.0, cu + value - 0.4), max(0.0, cl - value - 0.4)
        assert (up[t], lo[t]) == pytest.approx((cu, cl))


def test_cusum_edges():
    empty = cusum([])
    assert empty.upper.size == 0 and empty.alarm is None and empty.start is None
    assert cusum(np.zeros(50), h=4.0).alarm is None
    with pytest.raises(UnknownName, match="side 'both'"):
        cusum([1.0], side="both")
    with pytest.raises(InputError, match="h = 0"):
        cusum([1.0], h=0)


def _run_lengths(h: float, side: str, reps: int, seed: int, chunk: int = 500) -> np.ndarray:
    """In-control run lengths, computed chunk by chunk from carried CUSUM states."""
    rng = np.random.default_rng(seed)
    upper, lower = np.zeros(reps), np.zeros(reps)
    lengths = np.zeros(reps, dtype=np.int64)
    alive, elapsed = np.ones(reps, dtype=bool), 0
    while alive.any():
        idx = np.flatnonzero(alive)
        cu, cl = cusum_path(rng.standard_normal((idx.size, chunk)), k=0.5,
                            start_upper=upper[idx], start_lower=lower[idx])
        over = (cu if side == "upper" else np.maximum(cu, cl)) > h
        done = over.any(axis=1)
        lengths[idx[done]] = elapsed + over[done].argmax(axis=1) + 1
        alive[idx[done]] = False
        upper[idx], lower[idx] = cu[:, -1], cl[:, -1]
        elapsed += chunk
    return lengths


@pytest.mark.parametrize("h, arl", [(4.0, 168.0), (5.0, 465.0)])
def test_cusum_two_sided_in_control_arl(h, arl):
    # Montgomery, Introduction to Statistical Quality Control, tabular CUSUM ARL table, k = 0.5,
    # h = 4 -> 168, h = 5 -> 465 (from memory). These match the two-sided scheme (alarm when
    # C+ or C- exceeds h), which is what is simulated here; +-20% tolerance.
    measured = _run_lengths(h, "two-sided", reps=2000, seed=int(h)).mean()
    assert measured == pytest.approx(arl, rel=0.20)


def test_cusum_one_sided_arl_is_about_twice_two_sided():
    # Computed: for a symmetric in-control process, 1/ARL_two ~ 1/ARL_upper + 1/ARL_lower, so the
    # one-sided ARL is about twice the two-sided one (about 336 for h = 4).
    one = _run_lengths(4.0, "upper", reps=2000, seed=40).mean()
    two = _run_lengths(4.0, "two-sided", reps=2000, seed=41).mean()
    assert one / two == pytest.approx(2.0, rel=0.15)


# ---------------------------------------------------------------- drift test


def _honest(reps: int, length: int, seed: int) -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(seed)
    e = rng.standard_normal((reps, length))
    return e, np.abs(e) / HALF_NORMAL_MEAN  # scale q = E|e|, as a naive-MAE scale would be


def test_drift_false_alarm_rate_on_honest_series():
    # Design target: a finding from drift_test on honest series is rare (<= 5%). Measured with
    # the defaults (h = DRIFT_H = 5.5, reference 24 = two monthly seasons): 3.0% on this seed,
    # about 3-4% on others; h = 5 gave 4-5%.
    e, s = _honest(2000, 36, seed=101)
    flagged = np.mean([drift_test(e[i], s[i], reference=24).flagged for i in range(e.shape[0])])
    assert DRIFT_H == 5.5
    assert flagged <= 0.05, f"false-alarm rate {flagged:.4f}"


def test_naive_tracking_signal_rule_fires_on_a_third_of_honest_series():
    # DESIGN.md: a naive +-4 rule on a 12-cell window fires on about a third of honest series
    # (limit +-4: common practice, no source). Measured here: ~36% at the last cell, and ~98% if
    # it may fire at any point of a 36-cell record.
    e, _ = _honest(2000, 36, seed=101)
    path = np.abs(tracking_signal_path(e, window=12))
    at_end = np.mean(path[:, -1] > TS_LIMIT)
    anywhere = np.mean(np.nanmax(path, axis=1) > TS_LIMIT)
    assert 0.25 < at_end < 0.50, f"naive rule at the end {at_end:.4f}"
    assert anywhere > 0.25, f"naive rule anywhere {anywhere:.4f}"


def test_drift_detects_planted_level_shift():
    # +2 sd from cell 24 on (forecasts too low): measured ~91% alarmed within 6 cells.
    e, s = _honest(1000, 36, seed=202)
    e[:, 24:] += 2.0
    s = np.abs(e) / HALF_NORMAL_MEAN
    results = [drift_test(e[i], s[i], reference=24) for i in range(e.shape[0])]
    quick = np.mean([r.bias_alarm is not None and r.bias_alarm <= 29 for r in results])
    assert quick >= 0.80, f"detected within 6 cells {quick:.3f}"
    assert {r.bias_direction for r in results if r.biased} == {"forecasts too low"}
    starts = [r.bias_start for r in results if r.biased]
    assert abs(np.median(starts) - 24) <= 1


def test_drift_detects_planted_spread_increase():
    # sd doubles from cell 24 on, no bias: measured ~91% flagged by the deterioration CUSUM
    # within the 24 monitored cells.
    e, _ = _honest(1000, 48, seed=303)
    e[:, 24:] *= 2.0
    s = np.abs(e) / HALF_NORMAL_MEAN
    results = [drift_test(e[i], s[i], reference=24) for i in range(e.shape[0])]
    assert np.mean([r.deteriorated for r in results]) >= 0.80
    assert np.median([r.mase_ratio for r in results]) == pytest.approx(2.0, rel=0.25)


def test_drift_hand_worked_shift():
    # Reference alternates +-1 (mean 0, sd sqrt(24/23)); then e = 3 gives z = 2.937, C+ rises by
    # 2.437 a cell and passes 5.5 at the third monitored cell.
    e = np.array([1.0, -1.0] * 12 + [3.0] * 6)
    s = np.abs(e)
    got = drift_test(e, s, reference=24)
    assert got.sigma == pytest.approx(math.sqrt(24 / 23))
    assert (got.bias_alarm, got.bias_start, got.bias_direction) == (26, 24, "forecasts too low")
    assert (got.mase_reference, got.mase_recent, got.mase_ratio) == pytest.approx((1.0, 3.0, 3.0))
    assert got.bias.upper[:24] == pytest.approx(np.zeros(24))  # nothing monitored in the reference
    assert got.tracking_signal == pytest.approx(tracking_signal(e, window=12))


def test_drift_negative_shift_means_forecasts_too_high():
    e = np.array([1.0, -1.0] * 12 + [-3.0] * 6)
    got = drift_test(e, np.abs(e), reference=24)
    assert got.bias_direction == "forecasts too high" and got.biased


def test_drift_bias_centre_option():
    # A constant bias of about 1.5 sd from the start (errors alternate 2.5, 0.5): the zero target
    # sees it; the reference centre (change of bias only) does not.
    e = np.array([2.5, 0.5] * 18)
    s = np.abs(e)
    assert drift_test(e, s, reference=24).biased
    assert not drift_test(e, s, reference=24, bias_centre="reference").biased
    with pytest.raises(UnknownName, match="bias_centre"):
        drift_test(e, s, reference=24, bias_centre="median")


def test_drift_short_and_degenerate_inputs():
    short = drift_test(np.ones(10), np.ones(10), reference=24)
    assert not short.flagged and "none after the 24-cell reference" in short.note
    assert math.isnan(short.mase_recent) and short.mase_reference == 1.0
    zeros = drift_test(np.r_[np.zeros(24), np.ones(4)], np.r_[np.zeros(24), np.ones(4)], reference=24)
    assert zeros.bias is None and zeros.deterioration is None and "bias test skipped" in zeros.note
    empty = drift_test([], [], reference=8)
    assert empty.n == 0 and not empty.flagged and math.isnan(empty.trigg_signal)


def test_drift_sigma_floor_guards_near_constant_reference():
    e = np.r_[np.full(24, 10.0) + np.tile([1e-9, -1e-9], 12), [10.3, 9.8, 10.2]]
    got = drift_test(e, np.abs(e) / 10.0, reference=24)
    assert got.sigma_floored and got.sigma == pytest.approx(0.5)  # 5% of mean |e| = 10
    assert not drift_test(e, np.abs(e) / 10.0, reference=24, bias_centre="reference").biased


def test_drift_missing_scales_and_bad_input():
    e = np.array([1.0, -1.0] * 12 + [3.0] * 6)
    s = np.abs(e)
    s[[0, 1, 29]] = np.nan  # cells without a scale carry no evidence
    assert drift_test(e, s, reference=24).bias_alarm == 26
    with pytest.raises(InputError, match="scaled_abs has 3 values but e has 30"):
        drift_test(e, s[:3], reference=24)
    with pytest.raises(InputError, match="reference"):
        drift_test(e, s, reference=1)


# ---------------------------------------------------------------- Kupiec


def test_kupiec_hull_textbook_problem():
    # Hull, Risk Management and Financial Institutions, backtesting problem (REFERENCES.md,
    # computed): T = 1000, p = 0.01, x = 15 -> LR 2.18925, p-value 0.1390.
    got = kupiec_pof(15, 1000, p=0.01)
    assert got.statistic == pytest.approx(2.18925, abs=5e-6)
    assert got.p_value == pytest.approx(0.1390, abs=5e-5)
    assert got.df == 1


@pytest.mark.parametrize(
    "p, n, lo, hi",
    [
        # Kupiec (1995) Table 3 via Jorion, Value at Risk (from memory), recomputed: the 95%
        # non-rejection regions of the POF test.
        (0.05, 255, 7, 20),
        (0.05, 510, 17, 35),
        (0.05, 1000, 38, 64),
        (0.01, 510, 2, 10),
        (0.01, 1000, 5, 16),
        # Jorion lists N < 7 for T = 255, p = 0.01 (from memory); the LR itself rejects x = 0
        # there (LR = -2*255*ln 0.99 = 5.13 > 3.84), so the region is 1..6.
        (0.01, 255, 1, 6),
    ],
)
def test_kupiec_non_rejection_regions(p, n, lo, hi):
    kept = [x for x in range(n + 1) if kupiec_pof(x, n, p=p).p_value >= 0.05]
    assert (kept[0], kept[-1], len(kept)) == (lo, hi, hi - lo + 1)


def test_kupiec_edges():
    nothing = kupiec_pof(0, 0, p=0.2)
    assert math.isnan(nothing.statistic) and math.isnan(nothing.p_value)
    assert kupiec_pof(0, 10, p=0.2).statistic == pytest.approx(-20 * math.log(0.8))  # 0 ln 0 = 0
    assert kupiec_pof(10, 10, p=0.2).statistic == pytest.approx(-20 * math.log(0.2))  # all misses
    assert kupiec_pof(2, 10, p=0.2).statistic == pytest.approx(0.0, abs=1e-12)  # exactly nominal
    with pytest.raises(InputError, match="misses = 11 exceeds n = 10"):
        kupiec_pof(11, 10, p=0.2)
    with pytest.raises(InputError, match="p = 1.5"):
        kupiec_pof(1, 10, p=1.5)


# ---------------------------------------------------------------- Christoffersen


def _hits_with_counts(n00: int, n01: int, n10: int, n11: int) -> np.ndarray:
    """A 0/1 sequence starting and ending with 0 whose transition counts are exactly these."""
    assert n01 == n10 and n01 > 0
    runs_of_zeros, ones = n01 + 1, n01 + n11
    zeros = n00 + runs_of_zeros
    zero_runs = np.full(runs_of_zeros, zeros // runs_of_zeros)
    zero_runs[: zeros % runs_of_zeros] += 1
    one_runs = np.ones(n01, dtype=int)
    one_runs[:n11] += 1  # each extra 1 in a run adds one 1 -> 1 transition
    seq = []
    for i in range(n01):
        seq += [0] * zero_runs[i] + [1] * one_runs[i]
    assert ones == one_runs.sum()
    return np.array(seq + [0] * zero_runs[-1], dtype=bool)


def test_christoffersen_counts_example():
    # REFERENCES.md (computed from Christoffersen 1998's formula): n00 = 932, n01 = 53,
    # n10 = 53, n11 = 4 -> LR_ind = 0.2586632, p = 0.6110401.
    hits = _hits_with_counts(932, 53, 53, 4)
    got = christoffersen(hits)
    assert (got.n00, got.n01, got.n10, got.n11) == (932, 53, 53, 4)
    assert got.statistic == pytest.approx(0.2586632, abs=5e-8)
    assert got.p_value == pytest.approx(0.6110401, abs=5e-8)


def test_christoffersen_matches_written_out_formula():
    hits = [0, 0, 1, 1, 0, 1, 0, 0, 0, 1, 1, 1, 0, 0]
    n00, n01, n10, n11 = 4, 3, 3, 3  # counted by hand
    pi, p01, p11 = 6 / 13, 3 / 7, 3 / 6
    null = 7 * math.log(1 - pi) + 6 * math.log(pi)
    alt = n00 * math.log(1 - p01) + n01 * math.log(p01) + n10 * math.log(1 - p11) + n11 * math.log(p11)
    got = christoffersen(hits)
    assert (got.n00, got.n01, got.n10, got.n11) == (n00, n01, n10, n11)
    assert got.statistic == pytest.approx(-2 * (null - alt))


def test_christoffersen_degenerate_counts():
    none = christoffersen(np.zeros(20, dtype=bool))
    assert (none.statistic, none.p_value, none.n00) == (0.0, 1.0, 19)
    assert christoffersen(np.ones(20, dtype=bool)).statistic == pytest.approx(0.0)
    last_only = christoffersen([0] * 9 + [1])  # no transition leaves state 1
    assert (last_only.n10, last_only.n11) == (0, 0) and last_only.statistic == pytest.approx(0.0, abs=1e-12)
    for short in ([], [1]):
        assert math.isnan(christoffersen(short).statistic)
    alternating = christoffersen([0, 1] * 20)  # misses never follow misses
    assert alternating.p_value < 1e-6
    with pytest.raises(InputError, match="booleans or 0/1"):
        christoffersen([0, 2, 1])


def test_conditional_coverage_is_sum_with_two_df():
    hits = _hits_with_counts(932, 53, 53, 4)
    got = conditional_coverage(hits, p=0.05)
    pof = kupiec_pof(int(hits.sum()), hits.size, p=0.05)
    assert got.statistic == pytest.approx(pof.statistic + got.independence.statistic)
    assert got.p_value == pytest.approx(stats.chi2.sf(got.statistic, 2))
    assert math.isnan(conditional_coverage([], p=0.05).p_value)


# ---------------------------------------------------------------- tolerance zones


def test_zones_for_250_observations_at_99_percent():
    # Basel Committee (1996) backtesting framework: 250 observations at 99%, 0-4 exceptions green,
    # 5-9 yellow, 10+ red; cumulative % for 0..10 (REFERENCES.md, computed; matches the document
    # from memory).
    cumulative = [8.11, 28.58, 54.32, 75.81, 89.22, 95.88, 98.63, 99.60, 99.89, 99.97, 99.99]
    for x, pct in enumerate(cumulative):
        got = coverage_zone(x, 250, p=0.01)
        assert 100 * got.cumulative == pytest.approx(pct, abs=0.005)
        want = "within tolerance" if x <= 4 else "watch" if x <= 9 else "out of tolerance"
        assert got.zone == want
        assert got.direction == ("as stated" if x <= 4 else "too narrow")
        assert got.expected == pytest.approx(2.5)


def test_zone_too_wide_and_p_value():
    wide = coverage_zone(30, 1000, p=0.05)  # expected 50
    assert (wide.direction, wide.zone) == ("too wide", "watch")
    assert wide.cumulative == pytest.approx(stats.binom.cdf(30, 1000, 0.05))
    assert wide.p_value == pytest.approx(stats.binomtest(30, 1000, 0.05).pvalue)
    assert coverage_zone(0, 1000, p=0.05).zone == "out of tolerance"
    # Twelve honest cells at 80%: even zero misses (P = 0.8^12 = 6.9%) is not a finding.
    assert coverage_zone(0, 12, p=0.2).direction == "as stated"


def test_zone_edges():
    nothing = coverage_zone(0, 0, p=0.2)
    assert (nothing.zone, nothing.direction) == ("no cells", "as stated") and math.isnan(nothing.p_value)
    assert coverage_zone(12, 12, p=0.2).zone == "out of tolerance"  # every cell missed
    with pytest.raises(InputError, match="misses = 5 exceeds n = 4"):
        coverage_zone(5, 4, p=0.2)


# ---------------------------------------------------------------- multiple testing


def test_holm_and_bh_hand_worked():
    p = [0.01, 0.04, 0.03]
    assert holm(p) == pytest.approx([0.03, 0.06, 0.06])  # 3*.01, max(2*.03, .03), max(.04, .06)
    assert benjamini_hochberg(p) == pytest.approx([0.03, 0.04, 0.04])  # .03, min(.045, .04), .04


def test_holm_and_bh_match_statsmodels_with_nan():
    # statsmodels.stats.multitest.multipletests as a reference implementation.
    rng = np.random.default_rng(17)
    p = np.r_[rng.uniform(size=40), rng.uniform(0, 0.01, size=10), [0.5, 0.5]]
    p[[3, 20, 45]] = np.nan
    ok = ~np.isnan(p)
    for ours, method in ((holm, "holm"), (benjamini_hochberg, "fdr_bh")):
        got = ours(p)
        assert np.isnan(got[~ok]).all()
        assert got[ok] == pytest.approx(multipletests(p[ok], method=method)[1])


def test_multiple_testing_edges():
    assert holm([]).size == 0 and benjamini_hochberg([]).size == 0
    assert np.isnan(holm([np.nan, np.nan])).all()
    assert benjamini_hochberg([0.2]) == pytest.approx([0.2])
    with pytest.raises(InputError, match="pvalues must lie in"):
        holm([0.1, 1.2])


# ---------------------------------------------------------------- demand classes


@pytest.mark.parametrize(
    "y, adi, cls",
    [
        ([10, 11, 9, 10, 10, 11], 1.0, "smooth"),
        ([0, 0, 5, 0, 0, 5, 0, 0, 5], 3.0, "intermittent"),
        ([1, 10, 1, 10, 1, 10], 1.0, "erratic"),
        ([0, 0, 1, 0, 0, 9, 0, 0, 1], 3.0, "lumpy"),
        ([0, 0, 3], 3.0, "too few demands"),
    ],
)
def test_demand_classes(y, adi, cls):
    # Cut-offs 1.32 and 0.49: Syntetos, Boylan & Croston (2005), "On the categorization of demand
    # patterns", JORS 56.
    got = demand_interval_stats(y)
    assert (got.adi, got.classification) == (pytest.approx(adi), cls)


def test_demand_stats_hand_worked_and_edges():
    got = demand_interval_stats([0, 0, 5, 0, 3, np.nan])
    assert (got.adi, got.n, got.nonzero) == (2.5, 5, 2)  # intervals 3, 2; NaN dropped
    assert got.cv2 == pytest.approx((np.std([5, 3], ddof=1) / 4) ** 2)
    empty = demand_interval_stats([])
    assert math.isnan(empty.adi) and empty.classification == "too few demands"
    assert math.isnan(demand_interval_stats([0, 0, 0]).adi)


# ---------------------------------------------------------------- gaps


def test_gaps():
    assert gaps([1, 2, 5, 6, 9]) == [(3, 2), (7, 2)]
    assert gaps([9, 1, 2, 2, 6, 5]) == [(3, 2), (7, 2)]  # order and duplicates do not matter
    assert gaps([]) == [] and gaps([4]) == [] and gaps(range(10)) == []
    assert gaps([-2, 1]) == [(-1, 2)]
    with pytest.raises(InputError, match="integer period ordinals"):
        gaps([1.5, 2])
