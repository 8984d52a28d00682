"""compare, standings and advise through the ledger, on seeded invented data.

The challengers are simulated directly: their errors have a chosen standard deviation per
horizon (and per series), so which model is truly better, and where, is known.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest

from ledger.stats.comparison import dm_hln
from ledger.errors import LedgerError, UnknownName
from ledger.wording import pval

from tests.planted import build

N = 20


@pytest.fixture(scope="module")
def book(tmp_path_factory):
    """inc: sd 5 at every horizon. h1only: sd 3 at horizon 1, 5 later. better: 3 everywhere.
    mixed: 3 at horizon 1, 8 at horizon 3. worse: 6 everywhere."""
    path = tmp_path_factory.mktemp("standings") / "l.duckdb"
    models = {
        "inc": {"sigma": 5.0},
        "h1only": {"sigma": {1: 3.0, 2: 5.0, 3: 5.0}},
        "better": {"sigma": 3.0},
        "mixed": {"sigma": {1: 3.0, 2: 5.0, 3: 8.0}},
        "worse": {"sigma": 6.0},
    }
    b = build(path, n_series=N, horizons=(1, 2, 3), seed=21, models=models)
    yield b
    b.close()


def test_compare_finds_the_horizon_where_the_challenger_is_better(book):
    got = book.compare("inc", "h1only")
    assert got["horizon"].tolist() == [1, 2, 3]
    assert got["better"].tolist() == ["h1only", "", ""]
    assert got.loc[0, "p_value"] < 0.001 and (got.loc[1:, "p_value"] > 0.05).all()
    assert got.loc[0, "rel_mae"] == pytest.approx(0.6, abs=0.1)  # MAE ratio 3/5 in expectation
    assert got.loc[0, "win_share_b"] >= 0.9
    assert got.attrs["verdict"] == ("h1only is more accurate than inc at horizon 1 (p < 0.001); "
                                    "no significant difference at horizons 2–3")
    assert got.loc[0, "verdict"].startswith("h1only more accurate (DM-HLN ")


def test_compare_matches_an_oracle_from_the_cells(book):
    # The DM test series: per target period, the mean over series of (|e_a| - |e_b|) / q.
    got = book.compare("inc", "better", horizons=[2])
    cells = book.cells(horizons=[2])
    a = cells[cells["model"] == "inc"].set_index(["series", "period_index"])
    b = cells[cells["model"] == "better"].set_index(["series", "period_index"])
    common = a.index.intersection(b.index)
    a, b = a.loc[common], b.loc[common]
    d = ((a["e"].abs() - b["e"].abs()) / a["q"]).groupby(level="period_index").mean().sort_index()
    dm = dm_hln(d.to_numpy(), h=2)
    row = got.iloc[0]
    assert (row["n"], row["periods"]) == (len(common), len(d))
    assert row["mae_a"] == pytest.approx(a["e"].abs().mean())
    assert row["mase_b"] == pytest.approx((b["e"].abs() / b["q"]).mean())
    assert (row["dm_statistic"], row["p_value"]) == pytest.approx((dm.statistic, dm.p_value))
    # Davydenko & Fildes (2013) relative MAE: weighted geometric mean of per-series MAE ratios
    ratio = (b["e"].abs().groupby(level="series").mean() / a["e"].abs().groupby(level="series").mean())
    weights = a["e"].groupby(level="series").size()
    assert row["rel_mae"] == pytest.approx(math.exp((weights * np.log(ratio)).sum() / weights.sum()))


def test_compare_edges(book):
    # Through the API a horizon no run has is a mistake (issue 15); the comparison itself still
    # answers an empty horizon with a verdict that says so.
    with pytest.raises(UnknownName, match="--horizon 9: no run has this horizon"):
        book.compare("inc", "better", horizons=[9])
    from ledger.findings.standings import compare
    empty = compare(book.store, book.selection(), "inc", "better", horizons=[9])
    assert empty["n"].tolist() == [0] and empty["better"].tolist() == [""]
    assert empty.attrs["verdict"].startswith("no common cells: inc and better never forecast")
    with pytest.raises(UnknownName, match="unknown model 'zzz'; known models: better, h1only, inc, mixed, worse"):
        book.compare("inc", "zzz")
    with pytest.raises(LedgerError, match="both models are 'inc'"):
        book.compare("inc", "inc")


def _advice(book, **kw):
    frame = book.advise("inc", **kw)
    return frame.set_index("challenger")


def test_advise_recommends_only_when_warranted(book):
    got = _advice(book)
    assert got.loc["better", "recommend"] and got.loc["better", "reason"] == "recommended"
    assert got.loc["better", "advice"].startswith(
        "replace inc with better: better over the last 12 evaluation periods (relative MAE ")
    assert got.loc["h1only", "reason"] == "not significant" and not got.loc["h1only", "recommend"]
    assert "not significantly more accurate at horizons 2–3" in got.loc["h1only", "advice"]
    assert got.loc["mixed", "reason"] == "mixed by horizon"
    assert got.loc["mixed", "advice"].startswith("keep inc: mixed is significantly more accurate at horizon 1 "
                                                 "but less accurate at horizon 3; DM-HLN over all 36 common periods: ")
    assert got.loc["worse", "reason"] == "not better"
    assert got["recommend"].sum() == 1


def test_advise_names_both_test_windows_and_the_one_its_rule_uses(book):
    # Issue 13: the sentence names its window, states DM-HLN over the recent window and over all
    # common periods, and says which one the rule uses and why; the figures match compare().
    got = _advice(book, challengers=["h1only"])
    text = got.loc["h1only", "advice"]
    assert "not significantly more accurate at horizons 2–3 over all 36 common periods" in text
    everything = book.compare("inc", "h1only")
    listed = ", ".join(f"{h}: {pval(p)}" for h, p in zip(everything["horizon"], everything["p_value"]))
    assert f"; DM-HLN over all 36 common periods: {listed}; over the last 12: " in text
    assert text.endswith("; the rule tests all common periods, because 12 periods give the test little power, "
                         "and uses the recent window to judge which model is better now")


def test_advise_at_the_horizons_that_matter(book):
    got = _advice(book, horizons=[1], challengers=["h1only"])
    assert got.index.tolist() == ["h1only"] and bool(got.loc["h1only", "recommend"])
    assert got.loc["h1only", "horizons_better"] == "1"


def test_advise_needs_enough_periods(book):
    got = _advice(book, window=40, challengers=["better"])
    assert got.loc["better", "reason"] == "not enough data"
    assert got.loc["better", "advice"] == ("keep inc: only 36 common evaluation periods with better; "
                                           "the recent window needs 40")


def test_advise_mixed_by_series(tmp_path):
    # The challenger is far better on 8 of 20 series (sd 0.2 instead of 5) and clearly worse on
    # 12 (sd 7): significantly better on average at every horizon, but not on a majority of series.
    sd = np.r_[np.full(8, 0.2), np.full(12, 7.0)]
    with build(tmp_path / "l.duckdb", n_series=N, horizons=(1, 2, 3), seed=22,
               models={"inc": {"sigma": 5.0}, "split": {"sigma": sd}}) as b:
        got = b.advise("inc").set_index("challenger")
    assert got.loc["split", "reason"] == "mixed by series"
    assert got.loc["split", "horizons_better"] == "1,2,3"
    assert got.loc["split", "advice"].startswith(
        "keep inc: split is significantly more accurate overall but better on only ")
    assert got.loc["split", "series_won"] < 0.5


def test_incumbent_setting(book, tmp_path):
    with build(tmp_path / "l.duckdb", n_series=3, n_targets=14, seed=2,
               models={"a": {"sigma": 5.0}, "b": {"sigma": 3.0}}) as small:
        with pytest.raises(LedgerError, match="advise: no incumbent model; pass --incumbent MODEL"):
            small.advise()
        with pytest.raises(UnknownName, match="unknown model 'c'"):
            small.set_incumbent("c")
        small.set_incumbent("b")
        assert small.incumbent == "b"
        assert small.advise()["incumbent"].tolist() == ["b"]


def test_standings_per_period(book):
    got = book.standings(horizons=[1])
    assert set(got["n_models"]) == {5}
    periods = got["period"].unique()
    assert len(periods) == 36
    # ranks 1..5 in every period; shares of series won add up to 1
    assert all(sorted(r) == [1, 2, 3, 4, 5] for _, r in got.groupby("period")["rank"])
    assert got.groupby("period")["series_won"].sum().to_numpy() == pytest.approx(np.ones(36))
    # oracle for the first period: mean |e| / q per model over its cells
    cells = book.cells(horizons=[1])
    first = cells[cells["period_index"] == cells["period_index"].min()]
    want = (first["e"].abs() / first["q"]).groupby(first["model"]).mean()
    have = got[got["period"] == periods[0]].set_index("model")["mase"]
    assert have.sort_index().to_numpy() == pytest.approx(want.sort_index().to_numpy())
    # the truly better models rank first most of the time (sd 3 against 5 and 6)
    top = got[got["rank"] == 1]["model"].value_counts()
    assert top.get("better", 0) + top.get("h1only", 0) + top.get("mixed", 0) >= 30


def test_standings_let_a_late_model_join(tmp_path):
    with build(tmp_path / "l.duckdb", n_series=4, n_targets=6, seed=3, models={"a": {"sigma": 5.0}}) as b:
        late = b.cells(models=["a"])
        late = late[late["period_index"] >= late["period_index"].max() - 1]
        b.snapshot(pd.DataFrame({"series": late["series"], "period": late["period"].dt.strftime("%Y-%m"),
                                 "origin": late["origin"].dt.strftime("%Y-%m"), "forecast": late["actual"]}),
                   model="late")
        got = b.standings()
    counts = got.groupby("period")["n_models"].first()
    assert counts.tolist() == [1, 1, 1, 1, 2, 2]
    assert (got.loc[got["model"] == "late", "rank"] == 1).all()  # perfect forecasts
