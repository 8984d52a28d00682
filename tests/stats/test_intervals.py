"""Tests for ledger.stats.intervals: Kupiec, Christoffersen, tolerance zones, multiple testing.

Outside values cite their source beside the check (see /work/shared/REFERENCES.md for the list).
"""

import math

import numpy as np
import pytest
from scipy import stats
from statsmodels.stats.multitest import multipletests

from ledger.stats.intervals import (
    benjamini_hochberg,
    christoffersen,
    conditional_coverage,
    coverage_zone,
    holm,
    independence_from_counts,
    kupiec_pof,
    transition_counts,
)
from ledger.errors import InputError

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


def test_independence_from_counts_matches_sequence_form_and_pools():
    # Pooled counts of two sequences equal the sum of their own counts; the LR is that of the sum.
    a = np.array([0, 1, 1, 0, 0, 0, 1, 1, 0, 0], dtype=bool)
    b = np.array([0, 0, 1, 0, 1, 0, 0, 0], dtype=bool)
    ca, cb = transition_counts(a), transition_counts(b)
    assert (ca, cb) == ((3, 2, 2, 2), (3, 2, 2, 0))  # counted by hand
    pooled = independence_from_counts(*(x + y for x, y in zip(ca, cb)))
    assert christoffersen(a).statistic == pytest.approx(independence_from_counts(*ca).statistic)
    assert (pooled.n00, pooled.n01, pooled.n10, pooled.n11) == tuple(x + y for x, y in zip(ca, cb))
    assert math.isnan(independence_from_counts(0, 0, 0, 0).statistic)
    with pytest.raises(InputError, match="n11"):
        independence_from_counts(1, 1, 1, -1)
