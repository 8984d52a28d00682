"""The WIS of bounds-only runs (summed row by row in ledger.scoring.grouped) against the pure functions.

The bounds rows of a run without quantiles carry their share of their cell's WIS, divided by
the cell's K (here K differs from cell to cell: some cells send one level only). Scored alone
or beside a run with quantiles, the cells must give the WIS of
ledger.stats.quantiles.weighted_interval_score (Bracher et al. 2021, eq. 2) with the point
forecast as the median."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from ledger import Ledger
from ledger.stats import quantiles as Q

MONTHS = pd.period_range("2024-01", periods=20, freq="M")
COLUMNS = ["wis", "wis_dispersion", "wis_overprediction", "wis_underprediction", "swis"]


@pytest.fixture(scope="module")
def book(tmp_path_factory):
    rng = np.random.default_rng(17)
    path = tmp_path_factory.mktemp("interval-wis") / "l.duckdb"
    series = [f"s{i}" for i in range(3)]
    actual = {(s, m): float(rng.normal(100, 10)) for s in series for m in range(len(MONTHS))}
    cells = []
    with Ledger.open(path) as led:
        led.record_actuals(pd.DataFrame([{"series": s, "period": str(MONTHS[m]), "actual": v}
                                         for (s, m), v in actual.items()]), name="actuals.csv")
        for origin in range(12, 17):
            bands, quant = [], []
            for s in series:
                for h in (1, 2):
                    t = origin + h
                    mu, sd = float(rng.normal(100, 4)), float(rng.uniform(3, 12))
                    row = {"series": s, "period": str(MONTHS[t]), "forecast": mu}
                    # some cells send one level only, so K differs from cell to cell
                    lo, hi, alphas = [mu - 1.3 * sd], [mu + 1.3 * sd], [0.2]
                    if (origin + h) % 3:
                        lo, hi, alphas = lo + [mu - 2 * sd], hi + [mu + 2 * sd], alphas + [0.05]
                        row.update(lower_95=lo[1], upper_95=hi[1])
                    row.update(lower_80=lo[0], upper_80=hi[0])
                    bands.append(row)
                    quant.append({"series": s, "period": str(MONTHS[t]), "forecast": mu,
                                  "q10": mu - sd, "q50": mu, "q90": mu + sd})
                    cells.append((h, actual[(s, t)], mu, lo, hi, alphas))
            led.snapshot(pd.DataFrame(bands), model="bands", origin=str(MONTHS[origin]), name="b.csv")
            led.snapshot(pd.DataFrame(quant), model="quant", origin=str(MONTHS[origin]), name="q.csv")
    return path, cells


def test_bounds_only_path_matches_the_pure_function(book):
    path, cells = book
    with Ledger.open(path, create=False, read_only=True) as led:
        got = led.scores(by=["model", "horizon"], models=["bands"])
    assert got["crps_q"].isna().all() and "pinball" not in got.columns
    for h in (1, 2):
        mine = [c for c in cells if c[0] == h]
        want = np.mean([Q.weighted_interval_score([y], [m], [lo], [hi], alphas=a).wis[0]
                        for _, y, m, lo, hi, a in mine])
        assert got.loc[got["horizon"] == h, "wis"].iloc[0] == pytest.approx(want, rel=1e-12)


@pytest.mark.parametrize("by", [["model", "horizon"], ["model", "series"], ["model"]])
def test_bounds_only_path_matches_the_general_query(book, by):
    path, _ = book
    with Ledger.open(path, create=False, read_only=True) as led:
        fast = led.scores(by=by, models=["bands"])
        general = led.scores(by=by)  # quant has quantiles: the general WIS query
    general = general[general["model"] == "bands"].reset_index(drop=True)
    assert len(fast) == len(general) > 0
    pd.testing.assert_frame_equal(fast[COLUMNS], general[COLUMNS], rtol=1e-12)
