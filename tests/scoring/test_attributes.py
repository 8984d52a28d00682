"""Series attributes, grouped and weighted scores, group totals.

Weighting follows the M5 competition's weighted scaled errors: per-series error weighted by the
series' share of recent volume (Makridakis, Spiliotis & Assimakopoulos 2022, "M5 accuracy
competition: results, findings, and conclusions", IJF 38(4); the scheme from memory, Backsight's
window is one season instead of M5's last 28 days).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from ledger import Ledger
from ledger.cli import app
from ledger.errors import UnknownName
from ledger.store import utc_now


@pytest.fixture
def book(ledger_path):
    with Ledger.open(ledger_path) as b:
        yield b


def small(book):
    # Yearly series (m = 1). A is big, B small; both forecast for 2022 at origin 2021.
    book.record_actuals(pd.DataFrame({"series": ["A", "A", "A", "B", "B", "B"],
                                      "period": ["2020", "2021", "2022"] * 2,
                                      "actual": [90.0, 100.0, 110.0, 8.0, 10.0, 15.0]}))
    book.snapshot(pd.DataFrame({"series": ["A", "B"], "period": ["2022", "2022"], "forecast": [100.0, 10.0]}),
                  model="m", origin="2021")
    book.record_attributes(pd.DataFrame({"series": ["A", "B"], "region": ["North", "North"],
                                         "unit_price": ["2", "8"]}))


def test_hand_worked_weighted_example(book):
    small(book)
    # A: e = 10, |e|/y = 10/110 -> MAPE 9.0909; scale q = mean(|100-90|) = 10 -> MASE 1.0
    # B: e = 5,  5/15 -> MAPE 33.333;          q = |10-8| = 2   -> MASE 2.5
    # volume = |y| over the one season (m = 1) before the first target 2022: A 100, B 10
    # weighted MAPE = (100·9.0909 + 10·33.333)/110 = (909.09 + 333.33)/110 = 11.2948
    # weighted MASE = (100·1.0 + 10·2.5)/110 = 125/110 = 1.13636
    # unweighted MAPE = (9.0909 + 33.333)/2 = 21.212
    got = book.scores(by=["region"], weight="volume").iloc[0]
    assert got["mape"] == pytest.approx(21.2121212, rel=1e-7)
    assert got["wmape"] == pytest.approx(1242.4242424 / 110, rel=1e-9)
    assert got["wmase"] == pytest.approx(125 / 110, rel=1e-12)
    assert got["weight_total"] == 110
    assert got["weighting"].startswith("volume: Σ|actual| over the season before")
    # revenue-style: price × volume -> A 200, B 80: wMASE = (200·1 + 80·2.5)/280 = 400/280
    rev = book.scores(by=["region"], weight="unit_price").iloc[0]
    assert rev["wmase"] == pytest.approx(400 / 280, rel=1e-12)
    assert rev["weighting"].startswith("unit_price × volume")


def test_group_by_attribute_and_where(book):
    small(book)
    book.record_attributes(pd.DataFrame({"series": ["A", "B"], "planner": ["kim", "lee"]}))
    by = book.scores(by=["planner", "model"])
    assert by["planner"].tolist() == ["kim", "lee"] and by["n"].tolist() == [1, 1]
    only = book.scores(by=["model"], where=["planner=lee"])
    assert only["mae"].tolist() == [5.0]
    with pytest.raises(UnknownName, match="known attributes: planner, region, unit_price"):
        book.scores(by=["model"], where=["zone=x"])
    with pytest.raises(UnknownName, match=r"cannot group by zone; .* or an attribute \(planner, region, unit_price\)"):
        book.scores(by=["zone"])


def test_attribute_versions_and_as_of(book):
    small(book)
    then = utc_now()
    result = book.record_attributes(pd.DataFrame({"series": ["A", "B"], "region": ["North", "South"]}))
    assert (result.changed, result.unchanged) == (1, 1)
    now = book.scores(by=["region"])
    old = book.scores(by=["region"], as_of=then)
    assert now["region"].tolist() == ["North", "South"] and old["region"].tolist() == ["North"]
    again = book.record_attributes(pd.DataFrame({"series": ["A", "B"], "region": ["North", "South"]}))
    assert again.changed == 0


def test_non_numeric_weight_attribute(book):
    small(book)
    book.record_attributes(pd.DataFrame({"series": ["A", "B"], "unit_price": ["2", "cheap"]}))
    with pytest.raises(UnknownName, match="series 'B' has unit_price = 'cheap', not a number"):
        book.scores(by=["model"], weight="unit_price")


def _random_ledger(book, seed):
    rng = np.random.default_rng(seed)
    keys = [f"s{i}" for i in range(12)]
    acts = []
    for k in keys:
        level = rng.uniform(5, 500)
        for q in range(16):
            if k == "s3" and q == 14:
                continue                       # a member with a missing actual
            acts.append((k, f"{2020 + q // 4}Q{q % 4 + 1}", round(level * rng.uniform(0.7, 1.3), 2)))
    book.record_actuals(pd.DataFrame(acts, columns=["series", "period", "actual"]))
    for model in ("a", "b"):
        for origin in (9, 11):
            rows = [(k, f"{2020 + t // 4}Q{t % 4 + 1}", round(rng.uniform(5, 500), 2))
                    for k in keys for t in range(origin + 1, origin + 4) if t < 16]
            book.snapshot(pd.DataFrame(rows, columns=["series", "period", "forecast"]), model=model,
                          origin=f"{2020 + origin // 4}Q{origin % 4 + 1}")
    book.record_attributes(pd.DataFrame({"series": keys, "region": rng.choice(["N", "S", "E"], len(keys)),
                                         "price": [str(round(rng.uniform(1, 9), 2)) for _ in keys]}))
    return pd.DataFrame(acts, columns=["series", "period", "actual"])


@pytest.mark.parametrize("seed", [3, 4])
def test_weighted_against_pandas_oracle(book, seed):
    _random_ledger(book, seed)
    got = book.scores(by=["region", "model"], weight="price").set_index(["region", "model"])
    per = book.scores(by=["region", "model", "series"])
    cells = book.cells()
    attrs = book.attributes().set_index("series")
    acts = book.store.con.execute("SELECT series, period_index, value FROM actuals").df()
    first = cells.groupby("series")["period_index"].min()
    vol = {s: acts[(acts.series == s) & (acts.period_index >= first[s] - 4) & (acts.period_index < first[s])]
           ["value"].abs().sum() for s in first.index}
    per["w"] = [vol[s] * float(attrs.loc[s, "price"]) for s in per["series"]]
    for (region, model), part in per.groupby(["region", "model"]):
        for metric, col in (("mape", "wmape"), ("mase", "wmase"), ("rmsse", "wrmsse"), ("bias_pct", "wbias_pct")):
            ok = part[metric].notna() & (part["w"] > 0)
            want = (part.loc[ok, "w"] * part.loc[ok, metric]).sum() / part.loc[ok, "w"].sum()
            assert got.loc[(region, model), col] == pytest.approx(want, rel=1e-9)


def test_totals_against_pandas_oracle(book):
    _random_ledger(book, 5)
    got = book.totals("region").set_index(["region", "model"])
    cells = book.cells()
    attrs = book.attributes()
    cells = cells.merge(attrs[["series", "region"]], on="series")
    size = attrs.groupby("region")["series"].nunique()
    summed = cells.groupby(["region", "model", "origin_index", "period_index"]).agg(
        point=("point", "sum"), actual=("actual", "sum"), k=("series", "nunique")).reset_index()
    complete = summed[summed["k"] == summed["region"].map(size)]
    left = summed[summed["k"] != summed["region"].map(size)].groupby(["region", "model"]).size()
    for (region, model), part in complete.groupby(["region", "model"]):
        e = part["actual"] - part["point"]
        row = got.loc[(region, model)]
        assert row["n"] == len(part)
        assert row["mae"] == pytest.approx(e.abs().mean(), rel=1e-12)
        assert row["bias_pct"] == pytest.approx(100 * e.sum() / part["actual"].abs().sum(), rel=1e-12)
        assert row["n_left_out"] == left.get((region, model), 0)
        assert row["forecast_of"] == "sum of members"
    # the member with a missing actual (s3, 2023Q3) leaves its group's total out for that period
    s3 = attrs.set_index("series").loc["s3", "region"]
    assert got.loc[(s3, "a"), "n_left_out"] >= 1


def test_direct_total_compared_with_bottom_up(book, runner):
    small(book)
    # the top-down number travels in the same run as the members' forecasts
    book.snapshot(pd.DataFrame({"series": ["A", "B", "north-total"], "period": ["2022"] * 3,
                                "forecast": [100.0, 10.0, 121.0]}), model="m", origin="2021", supersede=True)
    book.record_attributes(pd.DataFrame({"series": ["north-total"]}), total_of="region=North")
    got = book.totals("region").set_index("forecast_of")
    # summed actual 2022 = 125; bottom-up 110 -> e 15; direct 121 -> e 4; total scale |110-98| = 12
    assert got.loc["sum of members", "mae"] == 15 and got.loc["direct", "mae"] == 4
    assert got.loc["direct", "mase"] == pytest.approx(4 / 12)
    book.close()                     # the command opens the file itself
    r = runner.invoke(app, ["--ledger", str(book.path), "scores", "--totals", "region", "--format", "csv"])
    assert r.exit_code == 0
    assert r.stdout.splitlines()[0] == ("region,model,forecast_of,n,mae,rmse,mape,smape,wape,mase,rmsse,"
                                        "bias,bias_pct,n_left_out")
    assert "intervals are not scored for totals" in r.stderr


def test_flag_counts_by_attribute(ledger_path, runner):
    # A zero actual in A's history gives a data finding on a series of region North.
    with Ledger.open(ledger_path) as b:
        small(b)
        b.record_actuals(pd.DataFrame({"series": ["A", "A"], "period": ["2019", "2018"], "actual": [0.0, 80.0]}))
        frame = b.flags(kinds=["data"])
        counts = b.flag_counts("region", kinds=["data"])
    expected = frame[frame["severity"] != "note"].groupby("kind").size()
    assert counts["region"].tolist() == ["North"] * len(expected)
    assert dict(zip(counts["kind"], counts["findings"])) == expected.to_dict()
    r = runner.invoke(app, ["--ledger", str(ledger_path), "flags", "--kind", "data", "--by", "region", "--format", "csv"])
    assert r.exit_code == 0 and r.stdout.splitlines()[0] == "region,kind,findings"
    r = runner.invoke(app, ["--ledger", str(ledger_path), "flags", "--by", "zone"])
    assert r.exit_code == 1
    assert r.stderr == "Error: flags --by: no attribute named 'zone'; known attributes: region, unit_price\n"
