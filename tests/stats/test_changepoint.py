"""Change-point tests, long-run variance and the action figures, checked against reference
implementations (scipy, statsmodels, numpy) and seeded simulations whose tolerances a wrong
null could not meet."""

from __future__ import annotations

import math

import numpy as np
import pytest
import statsmodels.api as sm
from scipy import stats

from ledger.stats.changepoint import (
    bias_scan,
    bonferroni_pair,
    bridge_sup_sf,
    cusum_onset,
    long_run_variance,
    residual_phi,
    robust_spread,
    size_shift,
    whiten,
)
from ledger.stats.recalibration import conformal_factor, corrected_mae, excess_miss_cost, recalibration


def _ar1(rng, draws, n, phi):
    x = np.empty((draws, n))
    x[:, 0] = rng.standard_normal(draws)
    for t in range(1, n):
        x[:, t] = phi * x[:, t - 1] + math.sqrt(1 - phi * phi) * rng.standard_normal(draws)
    return x


def test_kolmogorov_distribution_matches_scipy_and_the_series():
    # Two-sided sup |B|: the Kolmogorov distribution, scipy.stats.kstwobign (reference
    # implementation) and the series 2 sum (-1)^(k-1) exp(-2 k^2 x^2) (Kolmogorov 1933).
    x = np.array([0.6, 1.0, 1.3581, 2.0])
    series = 2 * sum((-1) ** (k - 1) * np.exp(-2 * k * k * x * x) for k in range(1, 60))
    assert bridge_sup_sf(x) == pytest.approx(stats.kstwobign.sf(x), rel=1e-9)
    assert bridge_sup_sf(x) == pytest.approx(series, rel=1e-6)
    # 1.3581 is the 5% critical value of the Kolmogorov statistic (standard tables; from memory)
    assert bridge_sup_sf(1.3581) == pytest.approx(0.05, abs=2e-4)


def test_one_sided_bridge_supremum_by_simulation():
    # P(sup B > x) = exp(-2 x^2) (Doob 1949). Simulated bridges, 1,000 steps, 4,000 draws, seed 1:
    # the discrete maximum sits slightly below the continuous one, so the tolerance is one-sided-ish.
    rng = np.random.default_rng(1)
    w = np.cumsum(rng.standard_normal((4000, 1000)), axis=1) / math.sqrt(1000)
    bridge = w - np.linspace(1 / 1000, 1, 1000)[None, :] * w[:, -1:]
    x = math.sqrt(math.log(20) / 2)  # exp(-2 x^2) = 0.05
    share = float((bridge.max(axis=1) > x).mean())
    assert bridge_sup_sf(x, two_sided=False) == pytest.approx(0.05)
    assert 0.035 <= share <= 0.058, share


def test_bartlett_long_run_variance_matches_statsmodels_hac():
    # Newey-West (1987) with Bartlett weights: n x HAC variance of the mean from statsmodels'
    # OLS on a constant (reference implementation, no small-sample correction).
    rng = np.random.default_rng(2)
    x = _ar1(rng, 1, 200, 0.4)[0]
    ours = long_run_variance(x, method="bartlett", bandwidth=4)
    fit = sm.OLS(x, np.ones_like(x)).fit(cov_type="HAC", cov_kwds={"maxlags": 4, "use_correction": False})
    assert ours == pytest.approx(fit.bse[0] ** 2 * x.size, rel=1e-10)


def test_ar1_long_run_variance_on_a_long_record():
    # AR(1) with marginal variance 1: lrv = (1 + phi) / (1 - phi) = 3 at phi = 0.5 (Andrews 1991).
    rng = np.random.default_rng(3)
    x = _ar1(rng, 1, 40000, 0.5)[0]
    assert long_run_variance(x, robust=False) == pytest.approx(3.0, rel=0.05)
    assert long_run_variance(x) == pytest.approx(3.0, rel=0.06)
    assert long_run_variance(rng.standard_normal(40000)) == pytest.approx(1.0, rel=0.05)


def test_robust_spread_resists_outliers():
    rng = np.random.default_rng(4)
    x = rng.standard_normal(400)
    wild = x.copy()
    wild[:8] = 60.0
    assert robust_spread(x) == pytest.approx(1.0, rel=0.1)
    assert robust_spread(wild) < 1.25 < wild.std()


@pytest.mark.parametrize("n", [24, 36])
def test_bias_scan_false_alarm_rate_is_the_stated_one(n):
    # iid N(0, 1) errors, 3,000 seeded sequences: share with p <= 0.05 is 5% up to simulation
    # error (standard error 0.4%, the null itself is simulated from 2,000 draws).
    rng = np.random.default_rng(10 + n)
    p = bias_scan(rng.standard_normal((3000, n))).p_value
    assert 0.035 <= float((p <= 0.05).mean()) <= 0.065
    assert 0.005 <= float((p <= 0.01).mean()) <= 0.017


def test_bias_scan_finds_and_dates_a_step_and_a_bias_from_the_start():
    rng = np.random.default_rng(5)
    e = rng.standard_normal((500, 36))
    step = e + 2.0 * (np.arange(36) >= 10)
    r = bias_scan(step)
    assert (r.p_value <= 0.05).mean() >= 0.97
    assert np.median(r.start) == 10 and (np.abs(r.start - 10) <= 2).mean() >= 0.85
    assert r.shift.mean() == pytest.approx(2.0, abs=0.15)
    biased = bias_scan(e - 1.0)  # forecasts too high from the first cell
    assert (biased.p_value <= 0.05).mean() >= 0.97 and np.median(biased.start) <= 2
    assert (biased.shift < 0).all()


def test_size_shift_null_rate_and_a_doubled_spread():
    rng = np.random.default_rng(6)
    e = rng.standard_normal((3000, 36))
    p = size_shift(np.sqrt(np.abs(e))).p_value
    assert 0.035 <= float((p <= 0.05).mean()) <= 0.065
    grown = e * np.where(np.arange(36) >= 18, 3.0, 1.0)
    r = size_shift(np.sqrt(np.abs(grown[:500])))
    assert (r.p_value <= 0.05).mean() >= 0.85 and abs(np.median(r.start) - 18) <= 1  # measured 0.90


def test_pooled_autocorrelation_keeps_ar1_false_alarms_near_the_level():
    # AR(1) phi = 0.5 errors (multi-step-like): with the autocorrelation pooled over the rows,
    # as drift findings pool it over a model's series, the two-test p-value keeps its level.
    rng = np.random.default_rng(7)
    e = _ar1(rng, 3000, 36, 0.5)
    g = np.sqrt(np.abs(e))
    p = bonferroni_pair(bias_scan(e, phi=residual_phi("scan", e).mean()).p_value,
                        size_shift(g, phi=residual_phi("size", g).mean()).p_value)
    assert float((p <= 0.05).mean()) <= 0.065
    plain = bias_scan(e, phi=0.0).p_value  # ignoring the autocorrelation would false-alarm often
    assert float((plain <= 0.05).mean()) >= 0.15


def test_gls_scan_at_phi_zero_is_the_plain_scan():
    # At phi = 0 the GLS scan is max_k |sum_{t>=k} e_t| / sqrt(n - k) over k <= n - 3 (plain loop).
    rng = np.random.default_rng(11)
    e = rng.standard_normal((5, 20)) + 0.8 * (np.arange(20) >= 9)
    r = bias_scan(e, phi=0.0)
    for i in range(5):
        scores = [abs(e[i, k:].sum()) / math.sqrt(20 - k) for k in range(18)]
        k = int(np.argmax(scores))
        resid = e[i] - np.where(np.arange(20) >= k, e[i, k:].mean(), 0.0)
        assert r.statistic[i] == pytest.approx(max(scores) / robust_spread(resid), rel=1e-9)
        assert r.shift[i] == pytest.approx(e[i, r.start[i]:].mean())


def test_gls_step_estimate_matches_statsmodels_gls():
    # The scan's shift at its start is the GLS estimate of the step under AR(1) errors; the
    # reference is statsmodels' GLS with the AR(1) covariance phi^|i-j| / (1 - phi^2) (innovation
    # variance 1): same coefficient, and x~'x~ is the inverse of its unscaled variance.
    rng = np.random.default_rng(12)
    phi, n = 0.5, 30
    e = _ar1(rng, 1, n, phi)[0] * math.sqrt(1 - phi * phi) + 1.5 * (np.arange(n) >= 17)
    r = bias_scan(e, phi=phi)
    k = int(r.start[0])
    x = (np.arange(n) >= k).astype(float)[:, None]
    cov = phi ** np.abs(np.subtract.outer(np.arange(n), np.arange(n))) / (1 - phi * phi)
    fit = sm.GLS(e, x, sigma=cov).fit()
    assert r.shift[0] == pytest.approx(fit.params[0], rel=1e-9)
    xw = whiten(x[:, 0], phi)
    assert 1 / fit.normalized_cov_params[0, 0] == pytest.approx(xw @ xw, rel=1e-9)
    assert abs(k - 17) <= 2


def test_gls_scan_keeps_its_level_and_gains_power_under_ar1_errors():
    # AR(1) phi = 0.5 errors (marginal sd 1), autocorrelation pooled over 3,000 rows: the bias
    # scan alone rejects 5% at p <= 0.05 up to simulation error (two-sided tolerance, so a null
    # that is too wide or too narrow fails). A 2 sd step over the last 8 of 36 cells: the ideal
    # known-time GLS z-test at 0.025 has power 94% (z = 2 sqrt((1 + 7/4) / 0.75) = 3.83,
    # computed); the scan, which must also find the start, measured 73% (seed 13).
    rng = np.random.default_rng(13)
    e = _ar1(rng, 3000, 36, 0.5)
    p = bias_scan(e, phi=residual_phi("scan", e).mean()).p_value
    assert 0.035 <= float((p <= 0.05).mean()) <= 0.065
    step = e[:600] + 2.0 * (np.arange(36) >= 28)
    r = bias_scan(step, phi=residual_phi("scan", step).mean())
    assert 0.65 <= float((r.p_value <= 0.025).mean()) <= 0.94


def test_scan_dates_by_the_posterior_window_mode():
    # The date is the k maximising sum_{|j-k|<=2} p(j), p(j) proportional to
    # exp(N_j^2 / (2 D_j s^2)) / sqrt(D_j) (Smith 1975), recomputed here by a loop at phi = 0.
    rng = np.random.default_rng(15)
    e = rng.standard_normal((20, 24)) + 1.5 * (np.arange(24) >= 11)
    r = bias_scan(e, phi=0.0)
    for i in range(20):
        k0 = int(np.argmax([abs(e[i, k:].sum()) / math.sqrt(24 - k) for k in range(22)]))
        s2 = robust_spread(e[i] - np.where(np.arange(24) >= k0, e[i, k0:].mean(), 0.0)) ** 2
        ll = np.array([e[i, k:].sum() ** 2 / (2 * (24 - k) * s2) - 0.5 * math.log(24 - k) for k in range(22)])
        post = np.exp(ll - ll.max())
        window = [post[max(0, k - 2):k + 3].sum() for k in range(22)]
        assert r.start[i] == int(np.argmax(window))


def _cusum_loop(z, k, h, upward, from_cell):
    c, last_zero, out = 0.0, -1, (None, None)
    for t, v in enumerate(z):
        c = max(0.0, c + (v if upward else -v) - k)
        if c > h and t >= from_cell:
            return t, last_zero + 1
        if c == 0:
            last_zero = t
    return out


def test_cusum_onset_against_a_loop_and_dates_the_start_not_the_alarm():
    rng = np.random.default_rng(14)
    for i in range(40):
        z = rng.standard_normal(30) + (1.2 if i % 2 else -1.2) * (np.arange(30) >= 12)
        for upward in (True, False):
            assert cusum_onset(z, upward=upward, from_cell=8) == _cusum_loop(z, 0.5, 4.0, upward, 8)
    # A 1.5 sd step from cell 20 of 40 (iid N(0, 1) before it), 500 seeded sequences: the alarm
    # comes some cells after the step, the onset dates the step itself (median 20) and within
    # +-2 in 75% (measured; noise just before the step keeps the CUSUM above zero in the rest).
    z = rng.standard_normal((500, 40)) + 1.5 * (np.arange(40) >= 20)
    found = [cusum_onset(row, from_cell=15) for row in z]
    alarms = np.array([a for a, _ in found if a is not None])
    onsets = np.array([o for a, o in found if a is not None])
    assert alarms.size >= 480 and np.median(alarms) >= 22
    assert (onsets <= alarms).all() and np.median(onsets) == 20
    assert 0.68 <= float((np.abs(onsets - 20) <= 2).mean()) <= 0.9
    assert float((np.abs(alarms - 20) <= 2).mean()) <= 0.6  # the alarm alone would date it worse


def test_constant_correction_against_a_loop():
    rng = np.random.default_rng(8)
    e = rng.normal(-3.0, 1.0, 15)
    fixed, plain, n = corrected_mae(e)
    loop = [abs(e[i] - np.mean(e[:i])) for i in range(2, e.size)]
    assert (fixed, plain, n) == (pytest.approx(np.mean(loop)), pytest.approx(np.mean(np.abs(e[2:]))), 13)
    assert fixed < plain  # a steady bias is mostly removed
    assert math.isnan(corrected_mae([1.0, 2.0])[0])


def test_conformal_factor_matches_the_split_conformal_quantile():
    # Angelopoulos & Bates (2021), section 1: qhat is the ceil((n+1)(1-alpha))/n empirical
    # quantile of the scores, i.e. the k-th smallest, k = ceil((n+1)(1-alpha)): numpy's
    # inverted-CDF quantile (their code's method="higher" interpolates one order statistic up).
    rng = np.random.default_rng(9)
    r = np.abs(rng.standard_normal(57)) * 1.7
    for level in (80.0, 95.0):
        expected = np.quantile(r, math.ceil((r.size + 1) * level / 100) / r.size, method="inverted_cdf")
        assert conformal_factor(r, level) == expected
    assert conformal_factor(r[:5], 95.0) == r[:5].max()  # fewer cells than the level needs


def test_recalibration_out_of_sample_and_excess_cost():
    rng = np.random.default_rng(10)
    periods = np.repeat(np.arange(40), 10)
    ratio = np.abs(rng.standard_normal(400)) / 0.6  # intervals 0.6 of the honest width
    now, before, cover, n = recalibration(ratio, periods, 80.0, 28)
    assert n == 120 and now == conformal_factor(ratio[periods >= 28], 80.0)
    assert cover == pytest.approx(float(np.mean(ratio[periods >= 28] <= before)))
    assert 0.7 <= cover <= 0.9 and now == pytest.approx(1.2816 / 0.6, rel=0.15)
    # 4 misses of 10 at 80% (nominal 2): half the miss distance is excess
    assert excess_miss_cost([0, 1.0, 0, 3.0, 0, 0, 2.0, 0, 2.0, 0],
                            [0, 1, 0, 1, 0, 0, 1, 0, 1, 0], 80.0) == pytest.approx(8.0 * 0.5)
    assert excess_miss_cost([0.0, 1.0], [False, True], 40.0) == 0.0  # misses no more than stated
