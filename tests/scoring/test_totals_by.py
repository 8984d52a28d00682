"""Group totals per --by key, and n_L beside coverage_L, against numpy oracles built from the inputs.

Invented data: six monthly series in three regions (tests/planted.py), two models at horizons
1–3; one member's actual is missing, so its region's total leaves that period out.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from ledger import Ledger
from ledger.cli import app
from ledger.errors import UnknownName

from tests import planted

REGION = {f"s{i:02d}": ("coast", "inland", "north")[i % 3] for i in range(6)}
HALF = {"s00", "s01", "s02"}          # model "half" sends 80% bounds for these series only


@pytest.fixture(scope="module")
def ledger(tmp_path_factory):
    p = tmp_path_factory.mktemp("totals") / "l.duckdb"
    y = planted.actuals(6, planted.HISTORY + 12, seed=21)
    acts = planted.actual_frame(y)
    missing = planted.month(planted.HISTORY + 4)
    acts = acts[~((acts["series"] == "s04") & (acts["period"] == missing))]
    runs = {}
    origins = range(planted.HISTORY - 1, planted.HISTORY + 11)
    for k, model in enumerate(("full", "half")):
        frame = planted.run_frame(y, origins=origins, horizons=(1, 2, 3), sigma=4.0 + k, seed=70 + k)
        if model == "half":
            off = ~frame["series"].isin(HALF)
            frame.loc[off, ["lower_80", "upper_80"]] = np.nan
        runs[model] = frame
    with Ledger.open(p) as book:
        book.record_actuals(acts)
        for model, frame in runs.items():
            book.snapshot(frame, model=model)
        book.record_attributes(pd.DataFrame({"series": list(REGION), "region": list(REGION.values())}))
    return str(p), acts, runs


def _oracle_cells(acts: pd.DataFrame, runs: dict) -> pd.DataFrame:
    parts = [f.assign(model=m) for m, f in runs.items()]
    cells = pd.concat(parts).merge(acts, on=["series", "period"])
    cells["region"] = cells["series"].map(REGION)
    index = {planted.month(i): i for i in range(planted.HISTORY + 12)}
    cells["horizon"] = cells["period"].map(index) - cells["origin"].map(index)
    return cells


def _oracle_totals(acts, runs, keys):
    cells = _oracle_cells(acts, runs)
    members = pd.Series(REGION).value_counts()
    summed = cells.groupby(["region", "model", "origin", "period", "horizon"]).agg(
        f=("forecast", "sum"), y=("actual", "sum"), k=("series", "nunique")).reset_index()
    whole = summed["k"].to_numpy() == summed["region"].map(members).to_numpy()
    out = {}
    for key, part in summed[whole].groupby(["region", *keys]):
        e = part["y"].to_numpy() - part["f"].to_numpy()
        out[key] = {"n": len(e), "mae": np.mean(np.abs(e)), "rmse": np.sqrt(np.mean(e * e)), "bias": np.mean(e)}
    lost = summed[~whole].groupby(["region", *keys]).size()
    return out, lost


@pytest.mark.parametrize("keys", [["model", "horizon"], ["model", "origin"], ["horizon"]])
def test_totals_by_keys_against_numpy(ledger, keys):
    path, acts, runs = ledger
    with Ledger.open(path, create=False, read_only=True) as book:
        got = book.totals("region", by=keys)
    want, lost = _oracle_totals(acts, runs, keys)
    assert list(got.columns[:len(keys) + 2]) == ["region", *keys, "forecast_of"]
    assert len(got) == len(want)
    for row in got.to_dict("records"):
        key = tuple(row[k] for k in ["region", *keys])
        for metric, value in want[key].items():
            assert row[metric] == pytest.approx(value, rel=1e-12), (key, metric)
        assert row["n_left_out"] == lost.get(key, 0)
    assert got["n_left_out"].sum() > 0        # the missing actual of s04 leaves its region's period out


def test_totals_by_series_refused(ledger, runner):
    path, _, _ = ledger
    with Ledger.open(path, create=False, read_only=True) as book:
        with pytest.raises(UnknownName, match="a total has no series"):
            book.totals("region", by=["model", "series"])
    result = runner.invoke(app, ["--ledger", path, "scores", "--totals", "region", "--by", "series"])
    assert result.exit_code == 1
    assert result.stderr == ("Error: --totals region --by series: a total has no series (it sums the series of "
                             "each region); group totals by model, horizon, origin, period or another attribute\n")


def test_totals_cli_per_horizon(ledger, runner):
    path, _, _ = ledger
    result = runner.invoke(app, ["--ledger", path, "scores", "--totals", "region", "--by", "model,horizon",
                                 "--format", "csv"])
    assert result.exit_code == 0, result.output
    assert result.stdout.splitlines()[0].startswith("region,model,horizon,forecast_of,n,mae,")


def test_n_level_counts_the_cells_with_bounds(ledger):
    path, acts, runs = ledger
    cells = _oracle_cells(acts, runs)
    with Ledger.open(path, create=False, read_only=True) as book:
        got = book.scores(by=["model", "horizon"]).set_index(["model", "horizon"])
        weighted = book.scores(by=["model"], weight="volume").set_index("model")
    for (model, h), part in cells.groupby(["model", "horizon"]):
        with_bounds = part["lower_80"].notna().to_numpy()
        assert got.loc[(model, h), "n_80"] == np.count_nonzero(with_bounds)
        assert got.loc[(model, h), "n"] == len(part)
        inside = (part["lower_80"] <= part["actual"]) & (part["actual"] <= part["upper_80"])
        assert got.loc[(model, h), "coverage_80"] == pytest.approx(inside[with_bounds].mean(), rel=1e-12)
    half = cells[cells["model"] == "half"]
    assert weighted.loc["half", "n_80"] == half["lower_80"].notna().sum() < len(half)
    assert weighted.loc["full", "n_80"] == (cells["model"] == "full").sum()
    columns = list(got.columns)
    assert columns[columns.index("coverage_80") + 1] == "n_80"
