"""The read API for reports (ledger.scoring.reads through Ledger methods), checked against
pandas computations on a tiny invented ledger: a revised actual, a superseded run, a pending
cell, a missed interval and a --since filter."""

from __future__ import annotations

import pandas as pd
import pytest

from ledger import Ledger

AS_OF = "2100-01-01"


@pytest.fixture
def book(ledger_path):
    runs = pd.DataFrame([
        # model a at origin 2026-01: horizons 1-3 (2026-04 has no actual: pending)
        {"series": "s1", "model": "a", "origin": "2026-01", "period": "2026-02", "forecast": 10.0, "lower_80": 9.0, "upper_80": 11.0},
        {"series": "s1", "model": "a", "origin": "2026-01", "period": "2026-03", "forecast": 10.0, "lower_80": 9.0, "upper_80": 11.0},
        {"series": "s1", "model": "a", "origin": "2026-01", "period": "2026-04", "forecast": 10.0, "lower_80": 9.0, "upper_80": 11.0},
        {"series": "s1", "model": "b", "origin": "2026-01", "period": "2026-02", "forecast": 12.0},
        {"series": "s1", "model": "b", "origin": "2026-02", "period": "2026-03", "forecast": 13.0},
    ])
    acts = pd.DataFrame([{"series": "s1", "period": p, "actual": v}
                         for p, v in (("2026-01", 9.0), ("2026-02", 10.5), ("2026-03", 20.0))])
    with Ledger.open(ledger_path) as b:
        b.snapshot(runs, name="runs.csv")
        b.record_actuals(acts, name="acts.csv")
        # a revision: 2026-02 becomes 10.8 (still inside a's 80% interval)
        b.record_actuals(pd.DataFrame([{"series": "s1", "period": "2026-02", "actual": 10.8}]), name="rev.csv")
        # a's origin-2026-01 run superseded: same cells, the 2026-03 forecast now 19.5
        b.snapshot(runs[runs["model"] == "a"].assign(forecast=[10.0, 19.5, 10.0]), name="runs2.csv", supersede=True)
        yield b


def test_actual_history_takes_the_newest_revision(book):
    got = book.actual_history(as_of=AS_OF)
    assert got["value"].tolist() == [9.0, 10.8, 20.0]


def test_live_runs_exclude_the_superseded_run(book):
    runs = book.live_runs(as_of=AS_OF)
    assert sorted(runs["model"]) == ["a", "b", "b"]
    assert runs["n_cells"].sum() == 3 + 1 + 1


def test_pending_cells_and_since_filter(book):
    assert book.pending_cells(as_of=AS_OF) == 1                    # a's 2026-04
    assert book.pending_cells(as_of=AS_OF, until="2026-03") == 0
    assert book.pending_cells(as_of=AS_OF, since="2026-04") == 1


def test_latest_forecasts_are_each_models_newest_run_with_bounds(book):
    got = book.latest_forecasts(as_of=AS_OF)
    a = got[got["model"] == "a"]
    assert a["point"].tolist() == [10.0, 19.5, 10.0]               # the superseding run
    assert a["lower_80"].tolist() == [9.0, 9.0, 9.0]
    b = got[got["model"] == "b"]
    assert b["origin_index"].nunique() == 1 and b["point"].tolist() == [13.0]
    assert b["lower_80"].isna().all()


def test_interval_counts_match_interval_cells(book):
    counts = book.interval_counts(book.selection(as_of=AS_OF, horizons=[2]), as_of=AS_OF)
    cells = book.interval_cells(as_of=AS_OF)
    expect = cells.assign(miss=cells["below"] | cells["above"]).groupby(["model", "horizon", "level"])["miss"].agg(["size", "sum"])
    totals = counts.groupby(["model", "horizon", "level"])[["n", "misses"]].sum()
    assert totals["n"].tolist() == expect["size"].tolist() == [1, 1]
    assert totals["misses"].tolist() == expect["sum"].tolist() == [0, 1]   # 20 is outside [9, 11]
    assert counts.loc[counts["in_head"], "horizon"].tolist() == [2]


def test_scored_models_series_and_frequency(book):
    assert book.scored_models(as_of=AS_OF) == ["a", "b"]
    assert book.scored_models(as_of=AS_OF, since="2026-04") == []
    assert book.series_table(as_of=AS_OF)["series"].tolist() == ["s1"]
    assert book.main_frequency(as_of=AS_OF) == "monthly"
    assert book.main_frequency(as_of="2000-01-01") is None


def test_report_state_hash_covers_attributes_and_settings(book):
    """Two groupings of the same forecasts carry different hashes; a later write does not change
    the hash at an earlier as-of."""
    before = book.report_state_hash(as_of=AS_OF)
    assert before == book.report_state_hash(as_of=AS_OF)
    book.record_attributes(pd.DataFrame([{"series": "s1", "region": "north"}]), name="attrs.csv")
    north = book.report_state_hash(as_of=AS_OF)
    book.record_attributes(pd.DataFrame([{"series": "s1", "region": "south"}]), name="attrs2.csv")
    south = book.report_state_hash(as_of=AS_OF)
    assert len({before, north, south}) == 3
    book.set_incumbent("a")
    assert book.report_state_hash(as_of=AS_OF) != south
    assert book.report_state_hash(as_of="2000-01-01") == book.report_state_hash(as_of="2000-01-02")
