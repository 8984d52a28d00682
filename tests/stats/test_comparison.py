"""Tests for ledger.stats.comparison: Diebold-Mariano-HLN, relative MAE, win shares.

Convention under test: d = loss_a - loss_b (positive: b better); relative MAE = MAE_b / MAE_a.
"""

import math

import dieboldmariano
import numpy as np
import pytest
from scipy import stats

from ledger.stats.comparison import dm_hln, relative_mae, win_share
from ledger.errors import InputError, UnknownName

# ---------------------------------------------------------------- Diebold-Mariano with HLN


def test_dm_readme_example_of_dieboldmariano_package():
    # README of the PyPI package `dieboldmariano` (seen; REFERENCES.md): actuals [10..50],
    # F = [11, 21, 29, 42, 53], G = [13, 26, 24, 40, 59], squared loss, h = 1, one-sided ->
    # statistic -2.2229922805746782, p-value 0.04515565862099125. The package's one-sided p is
    # the lower tail for d = loss_F - loss_G, i.e. alternative "less" here.
    y = np.array([10, 20, 30, 40, 50.0])
    f = np.array([11, 21, 29, 42, 53.0])
    g = np.array([13, 26, 24, 40, 59.0])
    got = dm_hln((y - f) ** 2 - (y - g) ** 2, h=1, alternative="less")
    assert got.statistic == pytest.approx(-2.2229922805746782, rel=1e-12)
    assert got.p_value == pytest.approx(0.04515565862099125, rel=1e-9)  # package uses its own beta
    assert (got.n, got.mean_differential, got.variance_fallback) == (5, pytest.approx(-29.2), False)


def test_dm_scores_package_example():
    # Test suite of the PyPI package `scores` (seen; REFERENCES.md): d = [1, 2, 3, 4], h = 2 ->
    # statistic sqrt(5) = 2.2360680, Student-t(3) CDF 0.9443164226429581.
    got = dm_hln([1.0, 2.0, 3.0, 4.0], h=2, alternative="less")
    assert got.statistic == pytest.approx(math.sqrt(5), rel=1e-12)
    assert got.p_value == pytest.approx(0.9443164226429581, rel=1e-12)  # "less": the t(3) CDF
    two = dm_hln([1.0, 2.0, 3.0, 4.0], h=2)
    assert two.p_value == pytest.approx(2 * (1 - 0.9443164226429581), rel=1e-9)


@pytest.mark.parametrize("h", [1, 2, 3, 4])
def test_dm_matches_dieboldmariano_package_on_random_data(h):
    # The `dieboldmariano` package (PyPI, v1.1) as a test-only reference implementation.
    rng = np.random.default_rng(100 + h)
    y = rng.normal(10, 2, size=60)
    f = y + rng.normal(0, 1.0, size=60)
    g = y + rng.normal(0.3, 1.2, size=60)
    ref_stat, ref_p = dieboldmariano.dm_test(list(y), list(f), list(g), h=h, one_sided=False)
    got = dm_hln((y - f) ** 2 - (y - g) ** 2, h=h)
    assert got.statistic == pytest.approx(ref_stat, rel=1e-10)
    assert got.p_value == pytest.approx(ref_p, rel=1e-7)
    _, ref_one = dieboldmariano.dm_test(list(y), list(f), list(g), h=h, one_sided=True)
    assert dm_hln((y - f) ** 2 - (y - g) ** 2, h=h, alternative="less").p_value == pytest.approx(ref_one, rel=1e-7)


def test_dm_orientation():
    rng = np.random.default_rng(1)
    d = rng.normal(0.5, 1.0, size=40)  # b's loss smaller on average
    got = dm_hln(d, h=1, alternative="greater")
    assert got.statistic > 0 and got.p_value < 0.05
    assert dm_hln(d, h=1, alternative="less").p_value == pytest.approx(1 - got.p_value)


def test_dm_variance_fallback():
    # d = [2, 0] * 3: gamma_0 = 1, gamma_1 = -5/6, so V = (1 - 5/3)/6 < 0 for h = 2. The fallback
    # uses gamma_0 only: DM* = 1 / sqrt(1/6) * sqrt((6 + 1 - 4 + 2/6) / 6) (hand-worked).
    d = [2.0, 0.0] * 3
    got = dm_hln(d, h=2)
    assert got.variance_fallback and "gamma_0 only" in got.note
    assert got.statistic == pytest.approx(math.sqrt(6) * math.sqrt((10 / 3) / 6))
    assert got.p_value == pytest.approx(2 * stats.t.sf(got.statistic, 5))
    with pytest.raises(dieboldmariano.NegativeVarianceException):  # the reference refuses here
        dieboldmariano.dm_test([0.0] * 6, d, [0.0] * 6, loss=lambda _actual, pred: pred, h=2)


def test_dm_undefined_cases_are_nan_with_a_note():
    for d, why in (([], "at least 2"), ([1.0], "at least 2"), ([0.5] * 8, "constant")):
        got = dm_hln(d, h=1)
        assert math.isnan(got.statistic) and math.isnan(got.p_value) and why in got.note
    too_long = dm_hln([1.0, 0.0, 2.0, 1.0], h=4)  # factor (4 + 1 - 8 + 3)/4 = 0
    assert math.isnan(too_long.statistic) and "too large" in too_long.note


def test_dm_drops_nan_and_rejects_bad_options():
    d = np.array([1.0, np.nan, 2.0, 3.0, np.nan, 4.0])
    assert dm_hln(d, h=2).statistic == pytest.approx(math.sqrt(5))  # same as the scores example
    assert dm_hln(d, h=2).n == 4
    with pytest.raises(InputError, match="h = 0"):
        dm_hln([1.0, 2.0], h=0)
    with pytest.raises(UnknownName, match="alternative 'bigger'"):
        dm_hln([1.0, 2.0], h=1, alternative="bigger")


# ---------------------------------------------------------------- relative MAE


def test_relative_mae_hand_worked():
    # Davydenko & Fildes (2013): (prod r_i^{n_i})^{1/sum n_i}; r = [0.5, 1], n = [1, 3] -> 0.5^(1/4).
    got = relative_mae([2.0, 4.0], [1.0, 4.0], [1, 3])
    assert got.value == pytest.approx(0.5**0.25)
    assert (got.series_used, got.series_excluded, got.cells_used) == (2, 0, 4)


def test_relative_mae_properties():
    rng = np.random.default_rng(9)
    a, b = rng.uniform(1, 5, size=20), rng.uniform(1, 5, size=20)
    n = rng.integers(1, 30, size=20)
    value = relative_mae(a, b, n).value
    assert relative_mae(b, a, n).value == pytest.approx(1 / value)  # swapping a and b inverts it
    scale = rng.uniform(0.1, 100, size=20)  # per-series units do not matter
    assert relative_mae(a * scale, b * scale, n).value == pytest.approx(value)
    assert relative_mae(a, a, n).value == pytest.approx(1.0)


def test_relative_mae_exclusions_and_edges():
    got = relative_mae([2.0, 0.0, 3.0, np.nan], [1.0, 1.0, 0.0, 2.0], [4, 4, 4, 4])
    assert (got.value, got.series_used, got.series_excluded, got.cells_used) == (0.5, 1, 3, 4)
    empty = relative_mae([], [], [])
    assert math.isnan(empty.value) and empty.series_used == 0
    with pytest.raises(InputError, match="one length"):
        relative_mae([1.0], [1.0, 2.0], [1, 1])
    with pytest.raises(InputError, match="negative"):
        relative_mae([-1.0], [1.0], [1])


# ---------------------------------------------------------------- win share


def test_win_share_hand_worked_and_complement():
    a, b = [1.0, 2.0, 3.0, 4.0], [0.0, 2.0, 5.0, 1.0]  # b wins, tie, loses, wins
    got = win_share(a, b)
    assert (got.share, got.wins, got.ties, got.losses, got.n) == (0.625, 2, 1, 1, 4)
    assert win_share(b, a).share == pytest.approx(1 - got.share)  # ties count half on both sides


def test_win_share_edges():
    assert win_share([1.0, 2.0], [1.0, 2.0]).share == 0.5
    assert math.isnan(win_share([], []).share)
    got = win_share([1.0, np.nan, 3.0], [2.0, 1.0, np.nan])
    assert (got.n, got.losses, got.share) == (1, 1, 0.0)
    with pytest.raises(InputError, match="one length"):
        win_share([1.0], [1.0, 2.0])
