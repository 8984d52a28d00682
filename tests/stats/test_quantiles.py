"""ledger.stats.quantiles against an outside library, a numpy loop, and published identities.

Outside reference: scoringrules 0.10.0 (test-only dependency; Zanetta & Allen, "scoringrules: a
python library for probabilistic forecast evaluation"): ``weighted_interval_score``,
``interval_score``, ``crps_quantile`` and ``crps_normal``.
"""

from __future__ import annotations

import numpy as np
import pytest
import scoringrules as sr
from scipy import stats

from ledger.stats import quantiles as Q
from ledger.wording import quantile_name

TAUS = np.round(np.arange(1, 20) * 0.05, 2)          # 0.05, 0.10, ..., 0.95 (the median included)
DECILES = np.round(np.arange(1, 10) * 0.1, 1)


def _normal_quantiles(rng, n, taus, *, spread=1.0):
    mu = rng.normal(0, 3, n)
    sigma = rng.uniform(0.5, 2.0, n)
    q = mu[:, None] + spread * sigma[:, None] * stats.norm.ppf(taus)[None, :]
    y = rng.normal(mu, sigma)
    return y, q, mu, sigma


def _loop_wis(y, q, taus):
    """WIS cell by cell from Bracher et al. (2021) eq. 3, with plain Python arithmetic."""
    out = []
    for yi, qi in zip(y, q):
        level = {round(float(t), 9): float(v) for t, v in zip(taus, qi)}
        pairs = [(t, round(1 - t, 9)) for t in level if t < 0.5 and round(1 - t, 9) in level]
        total = 0.5 * abs(yi - level[0.5])
        for lo, hi in pairs:
            a = 2 * lo
            l, u = level[lo], level[hi]
            total += a / 2 * ((u - l) + 2 / a * max(l - yi, 0) + 2 / a * max(yi - u, 0))
        out.append(total / (len(pairs) + 0.5))
    return np.array(out)


def _sr_wis(y, q, taus):
    """WIS built from scoringrules 0.10.0 pieces: interval_score per central interval and
    quantile_score (the pinball loss) at 0.5 for the median term, weights of Bracher et al."""
    pairs, mid = Q.central_pairs(taus)
    lo, hi = q[:, [i for i, _ in pairs]], q[:, [j for _, j in pairs]]
    alphas = 2 * taus[[i for i, _ in pairs]]
    iss = sr.interval_score(y, lo, hi, alphas, backend="numpy")
    median_term = sr.quantile_score(y, q[:, mid], 0.5, backend="numpy")     # = (1/2)|y - m|
    return (median_term + (alphas / 2 * iss).sum(axis=1)) / (len(pairs) + 0.5)


def test_wis_matches_scoringrules_and_a_loop():
    rng = np.random.default_rng(18)
    y, q, _, _ = _normal_quantiles(rng, 500, TAUS)
    got = Q.wis_from_quantiles(y, q, taus=TAUS)
    np.testing.assert_allclose(got.wis, _sr_wis(y, q, TAUS), rtol=1e-12)
    np.testing.assert_allclose(got.wis, _loop_wis(y, q, TAUS), rtol=1e-12)
    # scoringrules 0.10.0 crps_quantile (2/|Q| sum pinball) equals WIS on pairs + median
    np.testing.assert_allclose(got.wis, sr.crps_quantile(y, q, TAUS, backend="numpy"), rtol=1e-12)


def test_scoringrules_weighted_interval_score_numpy_backend_slip():
    # scoringrules 0.10.0 weighted_interval_score on its numpy backend adds w0 * m where the
    # definition (and its own numba gufunc, core/interval/_gufunc.py) has w0 * |y - m|
    # (core/interval/_score.py: ``WIS += w_median * median``). Pinned so that a fixed release
    # shows up here, and so that the direct comparison can then replace _sr_wis.
    rng = np.random.default_rng(18)
    y, q, _, _ = _normal_quantiles(rng, 50, TAUS)
    pairs, mid = Q.central_pairs(TAUS)
    lo, hi = q[:, [i for i, _ in pairs]], q[:, [j for _, j in pairs]]
    theirs = sr.weighted_interval_score(y, q[:, mid], lo, hi, 2 * TAUS[[i for i, _ in pairs]], backend="numpy")
    ours = Q.wis_from_quantiles(y, q, taus=TAUS).wis
    slip = 0.5 * (q[:, mid] - np.abs(y - q[:, mid])) / (len(pairs) + 0.5)
    np.testing.assert_allclose(theirs, ours + slip, rtol=1e-10, atol=1e-12)


def test_wis_parts_sum_and_match_the_interval_scores():
    rng = np.random.default_rng(7)
    y, q, _, _ = _normal_quantiles(rng, 300, TAUS, spread=0.6)
    parts = Q.wis_from_quantiles(y, q, taus=TAUS)
    np.testing.assert_allclose(parts.dispersion + parts.overprediction + parts.underprediction, parts.wis)
    pairs, mid = Q.central_pairs(TAUS)
    # scoringrules 0.10.0 interval_score, one column per interval: WIS rebuilt from its terms
    alphas = 2 * TAUS[[i for i, _ in pairs]]
    iss = sr.interval_score(y, q[:, [i for i, _ in pairs]], q[:, [j for _, j in pairs]], alphas, backend="numpy")
    rebuilt = (0.5 * np.abs(y - q[:, mid]) + (alphas / 2 * iss).sum(axis=1)) / (len(pairs) + 0.5)
    np.testing.assert_allclose(parts.wis, rebuilt, rtol=1e-12)
    # an actual far below every quantile is all overprediction, far above all underprediction
    low = Q.wis_from_quantiles([-100.0], q[:1] * 0 + np.arange(19), taus=TAUS)
    assert low.underprediction[0] == 0 and low.overprediction[0] > 10 * low.dispersion[0]
    high = Q.wis_from_quantiles([100.0], q[:1] * 0 + np.arange(19), taus=TAUS)
    assert high.overprediction[0] == 0 and high.underprediction[0] > 10 * high.dispersion[0]


def test_wis_equals_twice_the_mean_pinball_loss():
    # Bracher, Ray, Gneiting & Reich (2021), "Evaluating epidemic forecasts in an interval format"
    # (PLOS Comp. Biol. 17(2) e1008618), section "Interval score" and S1 Text: for the 2K + 1
    # levels of K central intervals and the median, WIS = 1/(2K+1) * sum_k QS_{tau_k}, with the
    # quantile score QS_tau = 2 {1(y <= q_tau) - tau}(q_tau - y) = 2 x pinball loss. The
    # identity holds only with their weights w0 = 1/2, w_k = alpha_k/2 (statement read in the
    # scoringutils documentation, which cites that SI; the equation number from memory).
    rng = np.random.default_rng(3)
    y, q, _, _ = _normal_quantiles(rng, 400, TAUS)
    wis = Q.wis_from_quantiles(y, q, taus=TAUS).wis
    e = y[:, None] - q
    pinball = np.maximum(TAUS * e, (TAUS - 1) * e).mean(axis=1)
    np.testing.assert_allclose(wis, 2 * pinball, rtol=1e-12)
    np.testing.assert_allclose(Q.quantile_crps(y, q, taus=TAUS), wis, rtol=1e-12)


def test_quantile_crps_matches_scoringrules_and_approaches_the_crps():
    rng = np.random.default_rng(11)
    taus = np.array([0.02, 0.1, 0.25, 0.5, 0.75, 0.9, 0.975])   # unpaired levels too
    y, q, mu, sigma = _normal_quantiles(rng, 200, taus)
    # scoringrules 0.10.0 crps_quantile: 2/|Q| sum_q pinball_q (Berrisch & Ziel 2023)
    want = sr.crps_quantile(y, q, taus, backend="numpy")
    np.testing.assert_allclose(Q.quantile_crps(y, q, taus=taus), want, rtol=1e-12)
    # 99 evenly spread levels of a normal forecast: within 3% of the exact normal CRPS
    # (scoringrules 0.10.0 crps_normal); the tolerance is ours, checked by the run, no source.
    fine = np.round(np.arange(1, 100) / 100, 2)
    y, q, mu, sigma = _normal_quantiles(rng, 2000, fine)
    exact = sr.crps_normal(y, mu, sigma, backend="numpy")
    assert Q.quantile_crps(y, q, taus=fine).mean() == pytest.approx(exact.mean(), rel=0.03)


def test_pinball_detail_matches_the_sktime_worked_example():
    # sktime PinballLoss documentation (seen, REFERENCES.md): y = [3, -0.5, 2, 7, 2] ->
    # mean loss per quantile [0.16625, 0.275, 0.09625], overall 0.1791666...
    y = np.array([3, -0.5, 2, 7, 2])
    q = np.array([[1.25, 2.5, 3.75], [0, 0, 0], [1, 2, 3], [4, 8, 12], [0.625, 1.25, 1.875]])
    taus = [0.05, 0.5, 0.95]
    e = y[:, None] - q
    per_tau = np.maximum(np.array(taus) * e, (np.array(taus) - 1) * e).mean(axis=0)
    np.testing.assert_allclose(per_tau, [0.16625, 0.275, 0.09625])
    assert Q.quantile_crps(y, q, taus=taus).mean() / 2 == pytest.approx(0.17916666666666667)
    # only one pair (0.05, 0.95) and the median: WIS = 2 x the mean pinball (identity above)
    assert Q.wis_from_quantiles(y, q, taus=taus).wis.mean() == pytest.approx(2 * 0.17916666666666667)


def test_point_stands_in_for_a_missing_median_and_pairs_are_found():
    assert Q.central_pairs([0.1, 0.3, 0.9]) == ([(0, 2)], None)
    got = Q.wis_from_quantiles([5.0], [[2.0, 3.0, 8.0]], taus=[0.1, 0.3, 0.9], point=[4.0])
    # by hand: (0.5 * |5 - 4| + 0.1 * (8 - 2)) / 1.5
    assert got.wis[0] == pytest.approx((0.5 + 0.6) / 1.5)
    with pytest.raises(ValueError, match="no symmetric pair"):
        Q.wis_from_quantiles([1.0], [[0.0, 1.0]], taus=[0.1, 0.3])
    with pytest.raises(ValueError, match="no median"):
        Q.wis_from_quantiles([1.0], [[0.0, 2.0]], taus=[0.1, 0.9])


@pytest.mark.parametrize("tau,name", [(0.1, "q10"), (0.05, "q05"), (0.975, "q975"), (0.5, "q50"), (0.9, "q90")])
def test_tau_names_follow_the_input_columns(tau, name):
    assert quantile_name(tau) == name


def test_pit_is_linear_between_quantiles_and_mid_tail_outside():
    taus = [0.1, 0.5, 0.9]
    q = [[0.0, 10.0, 20.0]] * 5
    pit = Q.pit_from_quantiles([5.0, 10.0, 15.0, -3.0, 30.0], q, taus=taus)
    np.testing.assert_allclose(pit, [0.3, 0.5, 0.7, 0.05, 0.95])


def test_pit_uniformity_accepts_calibrated_and_rejects_overconfident():
    rng = np.random.default_rng(5)
    y, q, _, _ = _normal_quantiles(rng, 2000, DECILES)
    x2, p, counts, widths = Q.pit_uniformity(Q.pit_from_quantiles(y, q, taus=DECILES), taus=DECILES)
    assert counts.sum() == 2000 and widths.sum() == pytest.approx(1.0)
    assert p > 0.001
    y, q, _, _ = _normal_quantiles(rng, 2000, DECILES, spread=0.6)
    _, p_narrow, counts, _ = Q.pit_uniformity(Q.pit_from_quantiles(y, q, taus=DECILES), taus=DECILES)
    assert p_narrow < 1e-6 and counts[0] > 2 * 200 and counts[-1] > 2 * 200


def test_pit_uniformity_false_rejections_near_nominal():
    # Under calibration the p-value is about uniform: at 5%, rejections ~ 5% (binomial 95% band
    # for 400 trials: 2.9%-7.3%, computed).
    rng = np.random.default_rng(99)
    rejections = 0
    for _ in range(400):
        y, q, _, _ = _normal_quantiles(rng, 120, DECILES)
        rejections += Q.pit_uniformity(Q.pit_from_quantiles(y, q, taus=DECILES), taus=DECILES)[1] <= 0.05
    assert 0.02 <= rejections / 400 <= 0.08


def test_below_shares_and_binomial_test():
    rng = np.random.default_rng(1)
    y, q, _, _ = _normal_quantiles(rng, 5000, DECILES)
    np.testing.assert_allclose(Q.below_shares(y, q, taus=DECILES), DECILES, atol=0.025)
    # exact two-sided binomial test, e.g. 3 of 20 below the median: p = 0.002576 (computed
    # with scipy.stats.binomtest; by hand 2 * sum_{k<=3} C(20, k) / 2^20 = 2 * 1351 / 1048576)
    assert Q.quantile_binomial(3, 20, tau=0.5) == pytest.approx(2 * 1351 / 2 ** 20)
    assert np.isnan(Q.quantile_binomial(0, 0, tau=0.5))


def test_bad_arguments_are_refused():
    with pytest.raises(ValueError, match="increasing"):
        Q.quantile_crps([1.0], [[1.0, 2.0]], taus=[0.9, 0.1])
    with pytest.raises(ValueError, match="decrease"):
        Q.quantile_crps([1.0], [[2.0, 1.0]], taus=[0.1, 0.9])
    with pytest.raises(ValueError, match="lower bound"):
        Q.weighted_interval_score([1.0], [1.0], [[3.0]], [[2.0]], alphas=[0.2])
