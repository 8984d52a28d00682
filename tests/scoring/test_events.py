"""Events and exclusions: excluded cells are exactly those an excluding event covers (numpy oracle),
counted in n_excluded, put back by include_excluded, and reproduced as they were with as-of."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from ledger import Ledger
from ledger.errors import InputError
from ledger.periods import index_start, period_index
from ledger.store import utc_now
from tests.helpers import copy_ledger

SERIES = ["n1", "n2", "s1", "s2"]
REGION = {"n1": "north", "n2": "north", "s1": "south", "s2": "south"}
START = period_index(pd.Timestamp("2024-01-01").date(), "monthly")


def _label(i: int) -> str:
    return index_start(i, "monthly").strftime("%Y-%m")


@pytest.fixture(scope="module")
def built(tmp_path_factory) -> Path:
    """The ledger every test starts from, built once: 30 snapshots took most of each test's time."""
    path = tmp_path_factory.mktemp("events") / "ev.duckdb"
    rng = np.random.default_rng(7)
    with Ledger.open(path) as book:
        acts = pd.DataFrame([{"series": s, "period": _label(i), "actual": round(float(rng.uniform(50, 150)), 1)}
                             for s in SERIES for i in range(START, START + 30)])
        book.record_actuals(acts)
        book.record_attributes(pd.DataFrame({"series": SERIES, "region": [REGION[s] for s in SERIES]}))
        for model in ("a", "b"):
            for origin in range(START + 13, START + 28):
                rows = [{"series": s, "period": _label(origin + h), "forecast": round(float(rng.uniform(50, 150)), 1)}
                        for s in SERIES for h in (1, 2)]
                book.snapshot(pd.DataFrame(rows), model=model, origin=_label(origin))
    return path


@pytest.fixture
def book(built, tmp_path):
    # the tests record events; each writes into its own copy, so none sees another's
    with Ledger.open(copy_ledger(built, tmp_path), create=False) as book:
        yield book


EVENTS = pd.DataFrame({
    "series": ["n1", "region=north", "*", "s2"],
    "first": ["2025-03", "2025-06", "2025-01", "2025-04-01"],
    "last": ["2025-04", "2025-06", "2025-12", "2025-04-30"],
    "label": ["stock-out", "promotion", "a mark only", "shutdown"],
    "exclude": ["yes", "Yes", "no", "yes"],
})


def _oracle_mask(cells: pd.DataFrame) -> np.ndarray:
    """Which cells the events above exclude, by a plain loop over the event rows."""
    period = pd.to_datetime(cells["period"]).to_numpy()
    series = cells["series"].to_numpy()
    mask = np.zeros(len(cells), dtype=bool)
    spans = [("n1", "2025-03-01", "2025-05-01"), ("n1", "2025-06-01", "2025-07-01"),
             ("n2", "2025-06-01", "2025-07-01"), ("s2", "2025-04-01", "2025-05-01")]
    for s, first, end in spans:
        mask |= (series == s) & (period >= np.datetime64(first)) & (period < np.datetime64(end))
    return mask


def test_events_exclude_exactly_their_cells(book):
    result = book.record_events(EVENTS)
    assert (result.events, result.changed, result.unchanged) == (4, 4, 0)
    every = book.cells(include_excluded=True)
    mask = _oracle_mask(every)
    # by hand: per model n1 2025-03 (1 cell: its h = 2 origin predates the runs) + 2025-04 (2) + 2025-06 (2),
    # n2 2025-06 (2), s2 2025-04 (2); the '*' event excludes nothing
    assert mask.sum() == 2 * (3 + 2 + 2 + 2)
    np.testing.assert_array_equal(every["excluded"].to_numpy(), mask)
    kept = book.cells()
    assert len(kept) == len(every) - mask.sum() and not kept["excluded"].any()

    got = book.scores(by=["model"])
    for model, row in got.set_index("model").iterrows():
        mine = every[(every["model"] == model).to_numpy() & ~mask]
        assert row["n"] == len(mine)
        assert row["n_excluded"] == int(((every["model"] == model).to_numpy() & mask).sum())
        assert row["mae"] == pytest.approx(np.mean(np.abs(mine["actual"] - mine["point"])), rel=1e-12)
    back = book.scores(by=["model"], include_excluded=True)
    assert back["n"].tolist() == every.groupby("model").size().tolist()
    assert back["n_excluded"].tolist() == [0, 0]


def test_a_group_with_every_cell_excluded_keeps_its_row(book):
    book.record_events(pd.DataFrame({"series": ["s1"], "first": ["2020-01"], "last": ["2030-12"],
                                     "label": ["discontinued"], "exclude": ["yes"]}))
    got = book.scores(by=["series"]).set_index("series")
    total = book.cells(include_excluded=True).groupby("series").size()
    assert got.loc["s1", "n"] == 0 and got.loc["s1", "n_excluded"] == total["s1"]
    assert got.loc["n1", "n_excluded"] == 0 and got.loc["n1", "n"] == total["n1"]


def test_versions_reproduce_with_as_of(book):
    book.record_events(EVENTS.iloc[[0]])
    between = utc_now()
    again = book.record_events(EVENTS.iloc[[0]])
    assert (again.changed, again.unchanged) == (0, 1)
    off = EVENTS.iloc[[0]].assign(exclude="no", label="stock-out (counted after all)")
    assert book.record_events(off).changed == 1
    then = book.scores(by=["series"], as_of=between).set_index("series")
    now = book.scores(by=["series"]).set_index("series")
    every = book.cells(include_excluded=True)
    n1 = every[every["series"] == "n1"]
    covered = ((pd.to_datetime(n1["period"]) >= "2025-03-01") & (pd.to_datetime(n1["period"]) < "2025-05-01")).sum()
    assert covered == 2 * 3   # per model: 2025-03 at h = 1, 2025-04 at h = 1 and 2
    assert then.loc["n1", "n_excluded"] == covered and now.loc["n1", "n_excluded"] == 0
    assert now.loc["n1", "n"] - then.loc["n1", "n"] == covered
    events_then = book.events(as_of=between)
    assert events_then["exclude"].tolist() == [True] and events_then["label"].tolist() == ["stock-out"]
    assert book.events()["label"].tolist() == ["stock-out (counted after all)"]


def test_findings_leave_excluded_cells_out(book):
    book.record_events(EVENTS)
    cells_used = book.cells()
    assert len(cells_used) < len(book.cells(include_excluded=True))
    # flags read the same cell query; a spot check that its input really shrank
    from ledger.findings.flags import flags
    from ledger.scoring.cells import score_cells
    sel = book.selection()
    assert len(score_cells(book.store, sel)) == len(cells_used)
    assert isinstance(flags(book.store, sel, kinds=["drift"]), pd.DataFrame)


@pytest.mark.parametrize("row, message", [
    ({"exclude": "maybe"}, "row 1 column exclude: 'maybe' is not yes or no"),
    ({"first": "2025-13"}, "row 1 column first: month 13 out of range"),
    ({"last": "2025-01", "first": "2025-03"}, "row 1 column last: last '2025-01' is before first '2025-03'"),
    ({"label": ""}, "row 1 column label: is empty"),
])
def test_bad_event_rows_name_row_and_column(book, row, message):
    frame = pd.DataFrame([{**EVENTS.iloc[0].to_dict(), **row}])
    with pytest.raises(InputError) as info:
        book.record_events(frame, name="events.csv")
    assert str(info.value).startswith(f"events.csv {message}")
    assert book.events().empty
