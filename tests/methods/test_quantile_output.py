"""Quantile output of the reference methods and of ``backtest --quantiles``.

The naive method's predictive distribution is N(y_T, sigma^2 h) with sigma the residual
standard deviation of FPP3 eq. (5.1) (Hyndman & Athanasopoulos, *Forecasting: Principles and
Practice*, 3rd ed., section 5.5), so its tau quantile is y_T + Phi^-1(tau) sigma sqrt(h),
computed here with scipy.stats.norm.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from ledger import Ledger
from ledger.cli import app
from ledger.errors import UnknownName
from ledger.methods.forecasters import forecast

TAUS = (0.05, 0.1, 0.25, 0.5, 0.75, 0.9, 0.95)


def _history(n=40, seed=4):
    rng = np.random.default_rng(seed)
    return 100 + np.cumsum(rng.normal(0, 2, n)) + 6 * np.sin(2 * np.pi * np.arange(n) / 12)


def test_naive_quantiles_are_its_normal_quantiles():
    y = _history()
    out = forecast(y, method="naive", h=4, m=12, levels=(80,), quantiles=TAUS)
    sigma = math.sqrt(np.sum(np.diff(y) ** 2) / (y.size - 1))
    for tau in TAUS:
        name = f"q{round(tau * 100):02d}"
        want = y[-1] + stats.norm.ppf(tau) * sigma * np.sqrt(np.arange(1, 5))
        np.testing.assert_allclose(out[name], want, rtol=1e-12)
    assert sorted(k for k in out if k.startswith(("lower", "upper"))) == ["lower_80", "upper_80"]
    np.testing.assert_allclose(out["q10"], out["lower_80"])


@pytest.mark.parametrize("method", ["snaive", "ses", "theta", "naive2", "shd"])
def test_quantiles_increase_and_the_median_is_the_point(method):
    y = _history(60)
    out = forecast(y, method=method, h=6, m=12, levels=(), quantiles=TAUS)
    q = np.column_stack([out[f"q{round(t * 100):02d}"] for t in TAUS])
    assert (np.diff(q, axis=1) > 0).all()
    np.testing.assert_allclose(out["q50"], out["forecast"])


def test_bad_quantile_levels_are_refused():
    with pytest.raises(UnknownName, match="outside"):
        forecast(_history(), method="naive", h=2, m=12, quantiles=(0.5, 1.5))


def test_backtest_records_quantiles_that_score(tmp_path, runner):
    months = [str(pd.Period("2019-01", freq="M") + i) for i in range(48)]
    rows = [{"series": f"s{k}", "period": p, "actual": round(float(v), 3)}
            for k in range(3) for p, v in zip(months, _history(48, seed=k))]
    hist = tmp_path / "hist.csv"
    pd.DataFrame(rows).to_csv(hist, index=False)
    path = tmp_path / "l.duckdb"
    result = runner.invoke(app, ["--ledger", str(path), "backtest", str(hist), "--methods", "naive",
                                 "--origins", "2021-06:2022-06", "--horizon", "3", "--jobs", "1",
                                 "--quantiles", "0.1,0.25,0.5,0.75,0.9"])
    assert result.exit_code == 0, result.output
    with Ledger.open(path, create=False, read_only=True) as book:
        taus = book.store.con.execute("SELECT DISTINCT tau FROM quantiles ORDER BY tau").fetchall()
        got = book.scores(by=["model"]).iloc[0]
    assert [round(t[0], 6) for t in taus] == [0.1, 0.25, 0.5, 0.75, 0.9]
    assert got["crps_q"] > 0 and got["wis"] > 0
    bad = runner.invoke(app, ["--ledger", str(path), "backtest", str(hist), "--methods", "naive",
                              "--holdout", "3", "--quantiles", "0.1,ten"])
    assert bad.exit_code == 2 and "comma list of numbers" in bad.output
