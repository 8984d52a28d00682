"""Quantile calibration findings on simulated quantile forecasts (fixed seeds).

Calibrated forecasts: the quantiles of the very normal distribution the actuals are drawn from.
Miscalibrated: the same centre with the spread shrunk to 0.6 (over-confident), or shifted up by
half a standard deviation (too high). The rates asserted are this module's own simulation
results with their seeds; the 5% ceiling for calibrated models is the issue's target.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from ledger import Ledger
from ledger.findings.base import FlagOptions
from ledger.findings.quantiles import quantile_findings

DECILES = np.round(np.arange(1, 10) / 10, 1)


def simulate(rng, models: dict[str, tuple[float, float]], *, series=8, periods=24, horizons=(1, 2, 3),
             taus=DECILES) -> pd.DataFrame:
    """Rows shaped like ``quantile_cells``: model -> (spread factor, shift in sds) of its quantiles."""
    rows = []
    z = stats.norm.ppf(taus)
    for model, (spread, shift) in models.items():
        n = series * periods * len(horizons)
        mu = rng.normal(100, 10, n)
        y = rng.normal(mu, 5.0)
        q = mu[:, None] + 5.0 * (shift + spread * z[None, :])
        cell = np.arange(n)
        frame = pd.DataFrame({
            "model": model, "frequency": "monthly",
            "series": np.repeat([f"s{i}" for i in range(series)], periods * len(horizons))[cell].repeat(len(taus)),
            "period_index": (24300 + cell % periods).repeat(len(taus)),
            "horizon": np.tile(np.repeat(horizons, periods), series)[cell].repeat(len(taus)),
            "tau": np.tile(taus, n), "value": q.ravel(), "actual": y.repeat(len(taus)),
        })
        frame["below"] = frame["actual"] < frame["value"]
        rows.append(frame)
    return pd.concat(rows, ignore_index=True)


def _flagged(found) -> set[str]:
    return {f.model for f in found if f.severity != "note"}


def test_calibrated_models_are_rarely_flagged():
    rng = np.random.default_rng(20261202)
    trials, flagged = 40, 0
    models = {f"honest-{i}": (1.0, 0.0) for i in range(4)}
    for _ in range(trials):
        flagged += len(_flagged(quantile_findings(simulate(rng, models), FlagOptions())))
    rate = flagged / (trials * len(models))
    assert rate <= 0.05, rate


def test_overconfident_and_shifted_models_are_found_and_described():
    rng = np.random.default_rng(7)
    models = {"honest": (1.0, 0.0), "narrow": (0.6, 0.0), "high": (1.0, 0.5)}
    found = quantile_findings(simulate(rng, models), FlagOptions())
    by_model = {f.model: f for f in found if f.severity != "note"}
    assert set(by_model) == {"narrow", "high"}
    narrow = by_model["narrow"]
    assert narrow.kind == "quantiles" and narrow.check == "too narrow (over-confident)"
    assert "PIT histogram not uniform" in narrow.evidence and narrow.p_value <= 0.05
    assert narrow.figure == pytest.approx(stats.norm.cdf(0.6 * stats.norm.ppf(0.1)) - 0.1, abs=0.06)
    assert by_model["high"].check.startswith("too high")


def test_overconfidence_is_found_in_most_trials():
    rng = np.random.default_rng(11)
    trials = 30
    hits = sum("narrow" in _flagged(quantile_findings(simulate(rng, {"narrow": (0.7, 0.0)}, series=4),
                                                      FlagOptions())) for _ in range(trials))
    assert hits / trials >= 0.9


def test_small_groups_get_a_note_not_a_test():
    rng = np.random.default_rng(3)
    frame = simulate(rng, {"few": (0.3, 0.0)}, series=1, periods=3, horizons=(1,))
    found = quantile_findings(frame, FlagOptions())
    assert [f.severity for f in found] == ["note"]
    assert "not enough data to judge (need 8)" in found[0].evidence


def test_flags_reads_quantiles_from_the_ledger(tmp_path):
    rng = np.random.default_rng(5)
    months = pd.period_range("2023-01", periods=40, freq="M")
    series = [f"s{i}" for i in range(6)]
    actual = {(s, m): float(rng.normal(100, 5)) for s in series for m in range(40)}
    with Ledger.open(tmp_path / "l.duckdb") as book:
        book.record_actuals(pd.DataFrame([{"series": s, "period": str(months[m]), "actual": v}
                                          for (s, m), v in actual.items()]), name="a.csv")
        z = stats.norm.ppf(DECILES)
        for origin in range(12, 38):
            rows = {"wide-enough": [], "narrow": []}
            for s in series:
                key = {"series": s, "period": str(months[origin + 1]), "forecast": 100.0}
                for model, spread in (("wide-enough", 5.0), ("narrow", 2.0)):
                    rows[model].append({**key, **{f"q{round(t * 100):02d}": 100 + spread * zz
                                                  for t, zz in zip(DECILES, z)}})
            for model, r in rows.items():
                book.snapshot(pd.DataFrame(r), model=model, origin=str(months[origin]), name=f"{model}.csv")
        found = book.flags(kinds=["quantiles"])
    assert found["model"].tolist() == ["narrow"]
    assert found["kind"].tolist() == ["quantiles"]
    assert "q10" in found["evidence"].iloc[0]
