"""Reference methods (ledger.methods.forecasters) and rolling-origin backtests (ledger.methods.rolling)."""

from __future__ import annotations

import math
import warnings

import numpy as np
import pandas as pd
import pytest
from statsmodels.tsa.exponential_smoothing.ets import ETSModel
from statsmodels.tsa.forecasting.theta import ThetaModel
from statsmodels.tsa.seasonal import seasonal_decompose

import ledger.methods.rolling as bt
from ledger.methods.rolling import backtest
from ledger.methods.forecasters import (
    _ses_fit,
    dominant_period,
    forecast,
    seasonal_test,
    seasonality_check,
)
from ledger.methods.names import METHODS
from ledger.wording import format_level
from ledger.errors import GapInHistory, InputError, MethodNotApplicable, NotEnoughData, UnknownName

# A short invented series, T = 8, used for the hand computations.
Y8 = np.array([10.0, 12.0, 11.0, 14.0, 13.0, 15.0, 17.0, 16.0])

# Normal multipliers, FPP3 Table 5.1 (Hyndman & Athanasopoulos, Forecasting: Principles and
# Practice, 3rd ed., section 5.5; seen): 80% -> 1.28, 95% -> 1.96 (two decimals).
Z80, Z95 = 1.2815515655446004, 1.959963984540054


def _seasonal(n: int, period: int, seed: int, trend: float = 0.3, noise: float = 1.0) -> np.ndarray:
    rng = np.random.default_rng(seed)
    pattern = rng.normal(0.0, 6.0, period)
    t = np.arange(n)
    return 100.0 + trend * t + pattern[t % period] + rng.normal(0.0, noise, n)


# ---------------------------------------------------------------------------------------------
# naive family against the book's formulas (FPP3 section 5.5, eq. 5.1 and Table 5.2; seen)


def test_multipliers_match_book_table():
    out = forecast(Y8, method="naive", h=1, m=1, levels=(80, 95))
    sd = (out["upper_95"][0] - out["forecast"][0]) / Z95
    assert round((out["upper_80"][0] - out["forecast"][0]) / sd, 2) == 1.28
    assert round((out["upper_95"][0] - out["forecast"][0]) / sd, 2) == 1.96


def test_naive_interval_is_sigma_sqrt_h():
    # sigma from eq. (5.1): K = 0 parameters, M = 1 missing residual -> divide by T - 1.
    e = [Y8[i] - Y8[i - 1] for i in range(1, 8)]
    sigma = math.sqrt(sum(x * x for x in e) / (8 - 1))
    out = forecast(Y8, method="naive", h=5, m=1)
    for h in range(1, 6):
        assert out["forecast"][h - 1] == 16.0
        assert out["upper_95"][h - 1] == pytest.approx(16.0 + Z95 * sigma * math.sqrt(h), rel=1e-12)
        assert out["lower_80"][h - 1] == pytest.approx(16.0 - Z80 * sigma * math.sqrt(h), rel=1e-12)


def test_seasonal_naive_interval_is_sigma_sqrt_k_plus_1():
    m = 4
    e = [Y8[i] - Y8[i - m] for i in range(m, 8)]
    sigma = math.sqrt(sum(x * x for x in e) / (8 - m))  # K = 0, M = m
    out = forecast(Y8, method="snaive", h=9, m=m)
    for h in range(1, 10):
        k = (h - 1) // m
        assert out["forecast"][h - 1] == Y8[8 - m + (h - 1) % m]
        assert out["upper_95"][h - 1] == pytest.approx(out["forecast"][h - 1] + Z95 * sigma * math.sqrt(k + 1))


def test_mean_interval_is_sigma_sqrt_1_plus_1_over_T():
    mean = sum(Y8) / 8
    sigma = math.sqrt(sum((x - mean) ** 2 for x in Y8) / (8 - 1))  # K = 1, M = 0
    out = forecast(Y8, method="mean", h=3, m=1)
    assert out["forecast"] == pytest.approx([mean] * 3)
    assert out["lower_95"] == pytest.approx([mean - Z95 * sigma * math.sqrt(1 + 1 / 8)] * 3)


def test_drift_interval_is_sigma_sqrt_h_1_plus_h_over_T_minus_1():
    T = 8
    slope = (Y8[-1] - Y8[0]) / (T - 1)
    e = [Y8[i] - Y8[i - 1] - slope for i in range(1, T)]
    sigma = math.sqrt(sum(x * x for x in e) / (T - 2))  # K = 1, M = 1
    out = forecast(Y8, method="drift", h=4, m=1)
    for h in range(1, 5):
        assert out["forecast"][h - 1] == pytest.approx(16.0 + h * slope)
        # Table 5.2 of the current online edition prints h(1 + h/(T - 1)).
        half = Z80 * sigma * math.sqrt(h * (1 + h / (T - 1)))
        assert out["upper_80"][h - 1] == pytest.approx(16.0 + h * slope + half)


def test_any_level_is_formatted_and_nested():
    out = forecast(Y8, method="naive", h=2, m=1, levels=(50, 97.5, 80))
    assert sorted(out) == ["forecast", "lower_50", "lower_80", "lower_97.5", "upper_50", "upper_80", "upper_97.5"]
    assert np.all(out["lower_97.5"] < out["lower_80"]) and np.all(out["lower_80"] < out["lower_50"])
    assert format_level(80) == "80" and format_level(97.5) == "97.5" and format_level(99.0) == "99"


# ---------------------------------------------------------------------------------------------
# statsmodels wrappers: statsmodels' own forecasts are the reference

ETS_FORMS = {
    "ses": {},
    "holt": {"trend": "add"},
    "damped": {"trend": "add", "damped_trend": True},
    "hw": {"trend": "add", "seasonal": "add", "seasonal_periods": 4},
    "hw-damped": {"trend": "add", "damped_trend": True, "seasonal": "add", "seasonal_periods": 4},
}


def _ets_reference(y: np.ndarray, h: int, form: dict, alpha: float) -> pd.DataFrame:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        fit = ETSModel(pd.Series(y), error="add", **form).fit(disp=False)
        return fit.get_prediction(start=y.size, end=y.size + h - 1).summary_frame(alpha=alpha)


@pytest.mark.parametrize("method", sorted(ETS_FORMS))
def test_ets_wrappers_match_statsmodels(method):
    y = _seasonal(40, 4, seed=3)
    out = forecast(y, method=method, h=6, m=4, levels=(80, 95))
    for level in (80, 95):
        ref = _ets_reference(y, 6, ETS_FORMS[method], 1 - level / 100)
        np.testing.assert_allclose(out["forecast"], ref["mean"], rtol=1e-9)
        np.testing.assert_allclose(out[f"lower_{level}"], ref["pi_lower"], rtol=1e-9)
        np.testing.assert_allclose(out[f"upper_{level}"], ref["pi_upper"], rtol=1e-9)


@pytest.mark.parametrize("m", [1, 12])
@pytest.mark.parametrize("levels", [(), (80,)])
def test_theta_points_match_statsmodels(m, levels):
    y = _seasonal(60, 12, seed=5)
    out = forecast(y, method="theta", h=8, m=m, levels=levels)
    fit = ThetaModel(y, period=m, deseasonalize=m > 1).fit()
    # Backsight fits Theta's SES itself (_ses_fit); statsmodels' L-BFGS stops within ~1e-5 of it.
    np.testing.assert_allclose(out["forecast"], fit.forecast(8), rtol=1e-5)


@pytest.mark.parametrize("seed", [5, 6, 7])
def test_theta_ses_fit_is_statsmodels_optimum_or_better(seed):
    x = _seasonal(60, 1, seed=seed)
    ours, _ = _ses_fit(x)
    theirs = float(ThetaModel(x, period=1, deseasonalize=False).fit().params["alpha"])
    sse = lambda a: sum(e * e for e in _ses_errors(x, a))
    assert abs(ours - theirs) < 1e-3
    assert sse(ours) <= sse(theirs) * (1 + 1e-12)


def _ses_errors(x: np.ndarray, alpha: float) -> list[float]:
    # SES started at the first value (ThetaModel's initial_level=y[0], "known"): l_1 = x_1.
    level, errors = x[0], []
    for value in x[1:]:
        errors.append(value - level)
        level = level + alpha * (value - level)
    return errors


def test_theta_intervals_are_ets_ann_on_the_adjusted_scale_by_hand():
    # Hyndman, Koehler, Ord & Snyder (2008), Forecasting with Exponential Smoothing, Table 6.1,
    # class 1 (from memory): ETS(A,N,N) h-step variance sigma^2 (1 + (h - 1) alpha^2).
    y, h, T = _seasonal(60, 12, seed=5), 14, 60
    fit = ThetaModel(y, period=12, deseasonalize=True).fit()
    comp = fit.forecast_components(h)
    assert fit.model.method == "mul" and np.ptp(comp["seasonal"]) > 0.05  # reseasonalised case
    season = seasonal_decompose(y, model="multiplicative", period=12).seasonal
    alpha, _ = _ses_fit(y / season)
    e = _ses_errors(y / season, alpha)
    sigma = math.sqrt(sum(x * x for x in e) / (T - 2))  # FPP3 eq. (5.1): K = 1 (alpha), M = 1
    out = forecast(y, method="theta", h=h, m=12, levels=(80, 95))
    for j in range(h):
        centre = comp["ses"].iloc[j] + comp["trend"].iloc[j] / 2  # theta = 2
        s = comp["seasonal"].iloc[j]
        half = sigma * math.sqrt(1 + j * alpha**2)  # j = h - 1
        # centre from statsmodels' own fit: equal to ~1e-5 (its optimiser's tolerance)
        assert out["forecast"][j] == pytest.approx(centre * s, rel=1e-5)
        assert out["lower_95"][j] - out["forecast"][j] == pytest.approx(-Z95 * half * s, rel=1e-9)
        assert out["upper_80"][j] - out["forecast"][j] == pytest.approx(Z80 * half * s, rel=1e-9)


def test_theta_interval_spread_equals_statsmodels_ets_ann_for_the_same_alpha_and_sigma():
    # Outside check of the variance formula: statsmodels' ETSModel ETS(A,N,N) with Theta's own
    # alpha and the same known start level. Its sigma^2 is the mean of all T squared errors
    # (e_1 = 0 included), ours divides by T - 2, hence the factor sqrt(T / (T - 2)).
    y, h, T = _seasonal(50, 1, seed=13, trend=0.5, noise=3.0), 10, 50
    alpha, _ = _ses_fit(y)
    ets = ETSModel(pd.Series(y), error="add", initialization_method="known", initial_level=y[0]).smooth([alpha])
    out = forecast(y, method="theta", h=h, m=1, levels=(80, 95))
    for level in (80, 95):
        ref = ets.get_prediction(start=T, end=T + h - 1).summary_frame(alpha=1 - level / 100)
        ours = out[f"upper_{level}"] - out["forecast"]
        theirs = (ref["pi_upper"] - ref["mean"]).to_numpy() * math.sqrt(T / (T - 2))
        np.testing.assert_allclose(ours, theirs, rtol=1e-9)
        np.testing.assert_allclose(out["forecast"] - out[f"lower_{level}"], theirs, rtol=1e-9)
    assert np.all(np.diff(out["upper_95"] - out["forecast"]) > 0)  # alpha > 0: the spread grows


def test_shd_is_the_equal_weight_mean_of_its_members():
    y = _seasonal(30, 1, seed=8, trend=0.8)
    members = [forecast(y, method=name, h=4, m=1) for name in ("ses", "holt", "damped")]
    out = forecast(y, method="shd", h=4, m=1)
    for key in ("forecast", "lower_80", "upper_95"):
        np.testing.assert_allclose(out[key], sum(f[key] for f in members) / 3, rtol=1e-12)


# ---------------------------------------------------------------------------------------------
# Naive2 and its seasonality test (Makridakis & Hibon 2000, M3 benchmark)


def test_seasonal_test_matches_the_formula_by_hand():
    y = _seasonal(36, 4, seed=2)
    n, x = y.size, y - y.mean()
    r = [sum(x[k:] * x[: n - k]) / sum(x * x) for k in range(5)]
    limit = 1.645 * math.sqrt((1 + 2 * (r[1] ** 2 + r[2] ** 2 + r[3] ** 2)) / n)
    assert seasonal_test(y, 4) == (abs(r[4]) > limit)
    assert seasonal_test(y, 4)  # the pattern is strong; the test must see it
    assert not seasonal_test(y[:11], 4)  # fewer than three seasons: never seasonal


def test_naive2_deseasonalises_then_reseasonalises():
    y = _seasonal(48, 4, seed=4)
    index = seasonal_decompose(y, model="multiplicative", period=4).seasonal[:4]
    adjusted = y / index[np.arange(48) % 4]
    out = forecast(y, method="naive2", h=6, m=4)
    expected = adjusted[-1] * index[(48 + np.arange(6)) % 4]
    np.testing.assert_allclose(out["forecast"], expected, rtol=1e-12)


def test_naive2_without_seasonality_is_naive():
    y = 50 + np.random.default_rng(11).normal(size=40)
    assert not seasonal_test(y, 12)
    a, b = forecast(y, method="naive2", h=5, m=12), forecast(y, method="naive", h=5, m=1)
    for key in a:
        np.testing.assert_array_equal(a[key], b[key])


# ---------------------------------------------------------------------------------------------
# errors


def test_nan_in_history_is_a_value_error_naming_the_method():
    y = Y8.copy()
    y[3] = np.nan
    with pytest.raises(ValueError, match="method drift"):
        forecast(y, method="drift", h=2, m=1)
    with pytest.raises(GapInHistory):
        forecast(y, method="naive", h=2, m=1)


def test_too_short_names_method_n_and_need():
    with pytest.raises(NotEnoughData, match=r"method hw needs at least 26 .* n=20"):
        forecast(np.arange(20.0) + 1, method="hw", h=3, m=12)


def test_hw_needs_a_season_and_unknown_methods_are_refused():
    with pytest.raises(MethodNotApplicable, match="m >= 2"):
        forecast(_seasonal(30, 1, seed=1), method="hw", h=3, m=1)
    with pytest.raises(UnknownName, match="arima"):
        forecast(Y8, method="arima", h=3, m=1)
    with pytest.raises(UnknownName, match="level 120"):
        forecast(Y8, method="naive", h=3, m=1, levels=(120,))


# ---------------------------------------------------------------------------------------------
# seasonality check


def test_monthly_declared_series_with_period_4_is_flagged():
    y = _seasonal(72, 4, seed=7)
    assert dominant_period(y, max_lag=24)[0] == 4
    notes = seasonality_check(y, m=12)
    assert len(notes) == 1 and "every 4 periods" in notes[0] and "m = 12" in notes[0]
    assert seasonality_check(y, m=4) == []


def test_series_shorter_than_three_seasons_is_flagged():
    notes = seasonality_check(_seasonal(30, 12, seed=1), m=12)
    assert len(notes) == 1 and "fewer than three seasons" in notes[0] and "36" in notes[0]


def test_no_note_for_agreeing_or_aperiodic_series():
    assert seasonality_check(_seasonal(96, 12, seed=9), m=12) == []
    rng = np.random.default_rng(12)
    assert seasonality_check(rng.normal(size=120), m=12) == []
    assert seasonality_check(np.cumsum(rng.normal(size=120)), m=12) == []


def test_declared_non_seasonal_but_periodic_is_flagged():
    notes = seasonality_check(_seasonal(40, 4, seed=6), m=1)
    assert len(notes) == 1 and "non-seasonal" in notes[0]


# ---------------------------------------------------------------------------------------------
# backtest


def _history(n: int = 60, series=("A", "B"), seed: int = 0) -> pd.DataFrame:
    frames = [
        pd.DataFrame({"series": s, "t": np.arange(n), "actual": _seasonal(n, 12, seed=seed + i)})
        for i, s in enumerate(series)
    ]
    return pd.concat(frames, ignore_index=True)


FAST = ["naive", "snaive", "drift", "mean", "naive2", "theta", "ses"]


def test_no_look_ahead_poisoned_future_changes_nothing():
    clean = _history()
    full, _ = backtest(clean, methods=FAST, horizon=6, m=12, origins=(40, 52, 6), jobs=1)
    for origin in (40, 46, 52):
        poisoned = clean.copy()
        poisoned.loc[poisoned["t"] > origin, "actual"] = 1e9
        got, _ = backtest(poisoned, methods=FAST, horizon=6, m=12, origins=(origin, origin, 1), jobs=1)
        want = full[full["origin"] == origin].reset_index(drop=True)
        pd.testing.assert_frame_equal(got, want)


def test_no_look_ahead_spy_sees_only_t_up_to_origin(monkeypatch):
    clean = _history(n=50, series=("A",))
    seen = []

    def spy(y, *, method, h, m, levels, quantiles=()):
        seen.append((method, y.copy()))
        return {"forecast": np.zeros(h), **{f"{s}_{format_level(L)}": np.zeros(h) for L in levels for s in ("lower", "upper")}}

    monkeypatch.setattr(bt, "forecast", spy)
    backtest(clean, methods=list(METHODS), horizon=3, m=4, origins=(20, 47, 9), jobs=1)
    actual = clean["actual"].to_numpy()
    assert {method for method, _ in seen} == set(METHODS)
    assert sorted({y.size for _, y in seen}) == [21, 30, 39, 48]
    for _, y in seen:
        np.testing.assert_array_equal(y, actual[: y.size])


def test_parallel_run_equals_serial_run_and_reports_progress():
    clean = _history(series=tuple("ABCDE"))
    calls = []
    serial, n1 = backtest(clean, methods=["naive", "theta"], horizon=4, m=12, holdout=4, jobs=1)
    par, n2 = backtest(
        clean, methods=["naive", "theta"], horizon=4, m=12, holdout=4, jobs=2,
        progress=lambda done, total: calls.append((done, total)),
    )
    pd.testing.assert_frame_equal(serial, par)
    assert n1 == n2
    assert calls[-1] == (5, 5) and [d for d, _ in calls] == sorted(d for d, _ in calls)


def test_output_shape_names_and_holdout_origin():
    clean = _history()
    out, _ = backtest(clean, methods=["snaive", "drift"], horizon=6, m={"A": 12, "B": 4}, holdout=6, jobs=1)
    assert list(out.columns) == ["model", "series", "origin", "t", "horizon", "forecast",
                                 "lower_80", "upper_80", "lower_95", "upper_95"]
    assert set(out["model"]) == {"ref-snaive", "ref-drift"}
    assert set(out["origin"]) == {53}
    assert (out["t"] - out["origin"] == out["horizon"]).all() and set(out["horizon"]) == set(range(1, 7))
    a = out[(out["series"] == "A") & (out["model"] == "ref-snaive")]["forecast"].to_numpy()
    b = out[(out["series"] == "B") & (out["model"] == "ref-snaive")]["forecast"].to_numpy()
    ya = clean[clean["series"] == "A"]["actual"].to_numpy()
    yb = clean[clean["series"] == "B"]["actual"].to_numpy()
    np.testing.assert_array_equal(a, ya[42:48])  # m = 12: same month a year before
    np.testing.assert_array_equal(b, np.concatenate([yb[50:54], yb[50:52]]))  # m = 4


def test_gap_skips_origins_with_a_note_unless_filled():
    clean = _history(series=("A", "B"))
    gapped = clean[~((clean["series"] == "A") & (clean["t"] == 30))]
    out, notes = backtest(gapped, methods=["mean"], horizon=2, m=12, origins=(24, 40, 8), jobs=1)
    assert set(out[out["series"] == "A"]["origin"]) == {24}
    assert set(out[out["series"] == "B"]["origin"]) == {24, 32, 40}
    gap_notes = [n for n in notes if "missing" in n]
    assert gap_notes == [
        "Series 'A', origins 32-40 (2 origins): history has 1 missing period(s) (t = 30); "
        "skipped (fill it explicitly with --fill linear or --fill previous)."
    ]
    filled, notes = backtest(gapped, methods=["mean"], horizon=2, m=12, origins=(32, 32, 1), fill="previous", jobs=1)
    y = clean[clean["series"] == "A"]["actual"].to_numpy()[:33].copy()
    y[30] = y[29]
    got = filled[filled["series"] == "A"]["forecast"].to_numpy()
    np.testing.assert_allclose(got, [y.mean()] * 2, rtol=1e-12)
    assert any("filled by 'previous'" in n and "origin 32" in n for n in notes)


def test_linear_fill_at_the_origin_cannot_look_ahead():
    clean = _history(series=("A",))
    gapped = clean[clean["t"] != 40]
    poisoned = gapped.copy()
    poisoned.loc[poisoned["t"] > 40, "actual"] = -1e9
    a, _ = backtest(gapped, methods=["naive"], horizon=2, m=12, origins=(40, 40, 1), fill="linear", jobs=1)
    b, _ = backtest(poisoned, methods=["naive"], horizon=2, m=12, origins=(40, 40, 1), fill="linear", jobs=1)
    pd.testing.assert_frame_equal(a, b)
    assert a["forecast"].iloc[0] == clean["actual"].iloc[39]  # held at the last actual


def test_short_history_and_skipped_methods_are_noted():
    clean = _history(n=40, series=("A",))
    out, notes = backtest(clean, methods=["hw", "naive"], horizon=3, m=12, origins=(20, 30, 5), jobs=1)
    assert set(out[out["model"] == "ref-hw"]["origin"]) == {25, 30}
    assert "Series 'A', origins 20-30 (3 origins): history is shorter than three seasons (36 values for m = 12)." in notes
    assert "Series 'A', origin 20: ref-hw skipped: it needs at least 26 history values (m = 12)." in notes


def test_period_disagreement_is_noted_once_per_series():
    frame = pd.DataFrame({"series": "Q", "t": np.arange(72), "actual": _seasonal(72, 4, seed=7)})
    _, notes = backtest(frame, methods=["naive"], horizon=2, m=12, origins=(60, 70, 5), jobs=1)
    period = [n for n in notes if "repeats every" in n]
    assert len(period) == 1 and period[0].startswith("Series 'Q': ") and "up to t = 70" in period[0]


def test_bad_arguments_are_refused_with_clear_messages():
    clean = _history()
    with pytest.raises(UnknownName, match="not both"):
        backtest(clean, methods=["naive"], horizon=2, m=12, holdout=2, origins=(1, 2, 1))
    with pytest.raises(UnknownName, match="tea-leaves"):
        backtest(clean, methods=["tea-leaves"], horizon=2, m=12, holdout=2)
    with pytest.raises(UnknownName, match="'B' has no season length"):
        backtest(clean, methods=["naive"], horizon=2, m={"A": 12}, holdout=2)
    with pytest.raises(InputError, match="missing column"):
        backtest(clean.drop(columns="t"), methods=["naive"], horizon=2, m=12, holdout=2)
    with pytest.raises(InputError, match="more than once"):
        backtest(pd.concat([clean, clean.head(1)]), methods=["naive"], horizon=2, m=12, holdout=2)
