"""An inbox replayed over three simulated months: each review records only what is new, re-running
is a no-op, a bad file leaves the ledger untouched and every problem is listed; changes between
reviews equal a hand-computed diff."""

from __future__ import annotations

import datetime as dt
import shutil

import numpy as np
import pandas as pd
import pytest

from ledger import Ledger
from ledger.errors import ReviewRefused
from ledger.cycle.changes import changes
from tests.helpers import table_hashes

SERIES = ["east/pumps", "west/pumps", "west/valves"]
MONTHS = pd.period_range("2023-01", "2026-03", freq="M")
RNG = np.random.default_rng(19)
TRUTH = {s: 100 + 20 * np.sin(np.arange(len(MONTHS)) * 2 * np.pi / 12) + RNG.normal(0, 5, len(MONTHS))
         for s in SERIES}


def _actuals(months) -> pd.DataFrame:
    return pd.DataFrame([{"series": s, "period": str(m), "actual": round(float(TRUTH[s][MONTHS.get_loc(m)]), 2)}
                         for s in SERIES for m in months])


def _run(origin: str, bias: float, seed: int) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    o = MONTHS.get_loc(pd.Period(origin, "M"))
    rows = []
    for s in SERIES:
        for h in (1, 2, 3):
            if o + h < len(MONTHS):
                f = TRUTH[s][o + h] + bias + rng.normal(0, 4)
                rows.append({"series": s, "period": str(MONTHS[o + h]), "forecast": round(float(f), 2),
                             "lower_80": round(float(f - 8), 2), "upper_80": round(float(f + 8), 2)})
    return pd.DataFrame(rows)


def _month(inbox, k: int) -> None:
    """Drop month k's files into the inbox (earlier months' files stay, as they do in a real inbox)."""
    origin = ["2025-12", "2026-01", "2026-02"][k]
    (inbox / "actuals").mkdir(parents=True, exist_ok=True)
    if k == 0:
        _actuals(MONTHS[MONTHS <= pd.Period(origin, "M")]).to_csv(inbox / "actuals" / "history.csv", index=False)
        backfill = pd.concat([_run(o, 3.0, i).assign(model="planner", origin=o)
                              for i, o in enumerate(["2025-09", "2025-10", "2025-11"])])
        backfill.to_csv(inbox / "planner-backfill.csv", index=False)
    else:
        _actuals([pd.Period(origin, "M")]).to_csv(inbox / "actuals" / f"{origin}.csv", index=False)
    for model, bias in (("stat-a", 0.0), ("stat-b", 6.0)):
        (inbox / model).mkdir(exist_ok=True)
        _run(origin, bias, 100 + k).to_csv(inbox / model / f"{origin}.csv", index=False)


def _narrow_inbox(inbox):
    """An invented inbox whose one model's 80% intervals are far too narrow (±0.5 around 100 for
    actuals of sd 10): its calibration finding is of the upper severity."""
    rng = np.random.default_rng(5)
    months = pd.period_range("2022-01", "2025-12", freq="M")
    names = ["n1", "n2", "n3"]
    y = {s: 100 + rng.normal(0, 10, len(months)) for s in names}
    (inbox / "narrow").mkdir(parents=True)
    pd.DataFrame([{"series": s, "period": str(m), "actual": round(float(y[s][i]), 2)}
                  for s in names for i, m in enumerate(months)]).to_csv(inbox / "actuals.csv", index=False)
    for o in range(24, len(months) - 1):
        pd.DataFrame([{"series": s, "period": str(months[o + 1]), "forecast": 100.0, "lower_80": 99.5,
                       "upper_80": 100.5} for s in names]).to_csv(inbox / "narrow" / f"{months[o]}.csv", index=False)


@pytest.fixture
def book(tmp_path):
    with Ledger.open(tmp_path / "cycle.duckdb") as book:
        yield book


def test_three_months_record_only_what_is_new(book, tmp_path):
    inbox = tmp_path / "inbox"
    expected = [(2 + 3, 36 * 3), (2, 3), (2, 3)]   # (runs, actuals) new in each month
    for k in range(3):
        _month(inbox, k)
        result = book.review(inbox)
        assert result.stored and result.review_id == k + 1
        assert (result.runs_new, result.actuals_new) == expected[k]
        assert result.state_hash == book.report_state_hash(as_of=result.as_of)
        assert result.findings["key"].is_unique
    assert len(book.runs()) == 3 + 2 * 3
    listed = book.reviews()
    assert listed["review"].tolist() == [1, 2, 3]
    assert listed["runs_new"].tolist() == [5, 2, 2] and listed["files"].tolist() == [4, 7, 10]


def test_rerunning_a_review_is_a_no_op(book, tmp_path):
    inbox = tmp_path / "inbox"
    _month(inbox, 0)
    first = book.review(inbox)
    path = book.path
    book.close()
    before = table_hashes(path)
    with Ledger.open(path) as again:
        second = again.review(inbox)
    assert not second.stored and second.review_id == first.review_id and second.as_of == first.as_of
    assert (second.runs_new, second.actuals_new) == (0, 0)
    pd.testing.assert_frame_equal(second.findings, first.findings)
    assert table_hashes(path) == before


def test_a_bad_file_refuses_the_whole_review_and_lists_every_problem(book, tmp_path):
    inbox = tmp_path / "inbox"
    _month(inbox, 0)
    book.review(inbox)
    _month(inbox, 1)
    (inbox / "stat-a" / "2026-01.csv").write_text(
        "series,period,forecast\neast/pumps,2026-02,10\nwest/pumps,2026-02,ten\n", encoding="utf-8")
    (inbox / "notes.csv").write_text("series,period,comment\nx,2026-01,hello\n", encoding="utf-8")
    (inbox / "stray-run.csv").write_text("series,period,forecast\nx,2026-02,1\n", encoding="utf-8")
    path = book.path
    book.close()
    before = table_hashes(path)
    with Ledger.open(path) as again, pytest.raises(ReviewRefused) as info:
        again.review(inbox)
    text = str(info.value)
    assert text.startswith(f"review of {inbox} refused, nothing written; 3 problem(s):\n")
    lines = text.splitlines()[1:]
    assert lines == [
        "  notes.csv: neither an actuals file (series, period, actual) nor a forecast file (series, period, "
        "forecast); found series, period, comment",
        "  stray-run.csv: a forecast file outside MODEL/ORIGIN.csv needs model and origin column(s); move it to "
        "a folder named after its model, named after its origin",
        "  stat-a/2026-01.csv row 2 column forecast: 'ten' is not a finite number",
    ]
    assert table_hashes(path) == before


def test_a_conflicting_run_refuses_the_review_after_staging(book, tmp_path):
    inbox = tmp_path / "inbox"
    _month(inbox, 0)
    book.review(inbox)
    _run("2025-12", 50.0, 1).to_csv(inbox / "stat-a" / "2025-12.csv", index=False)   # a different run
    _month(inbox, 1)
    path = book.path
    book.close()
    before = table_hashes(path)
    with Ledger.open(path) as again, pytest.raises(ReviewRefused) as info:
        again.review(inbox)
    assert "model 'stat-a' already has a different run at origin 2025-12" in str(info.value)
    assert table_hashes(path) == before    # the month-2 actuals and runs were rolled back too


def _store_review(store, review_id: int, keys: list[tuple[str, str]], mase: dict[str, float],
                  as_of: dt.datetime | None = None) -> None:
    """A stored review with the given (key, severity) findings and model MASE, written by hand."""
    store.con.execute("INSERT INTO reviews VALUES (?, ?, 'h', 'inbox', 0, 0, 0)",
                      [review_id, as_of or dt.datetime(2026, review_id, 1)])
    for key, severity in keys:
        kind, model, series, level, _ = key.split("|")
        store.con.execute("INSERT INTO review_findings VALUES (?, 0, ?, ?, ?, ?, ?, ?, '2026-01', 1.0, 'why')",
                          [review_id, key, kind, model, series, float(level) if level else None, severity])
    for model, value in mase.items():
        store.con.execute("INSERT INTO review_models VALUES (?, ?, ?, 30, 12)", [review_id, model, value])


def test_changes_equal_a_hand_computed_diff(book):
    k_drift, k_cal, k_val, k_note = ("drift|a|s1||", "calibration|a||80|1", "value|b|||", "calibration|b||95|all")
    _store_review(book.store, 1, [(k_drift, "act"), (k_cal, "watch"), (k_note, "note")], {"a": 0.80, "b": 1.00})
    _store_review(book.store, 2, [(k_cal, "act"), (k_val, "act")], {"a": 0.95, "b": 1.05, "c": 0.7})
    got = changes(book.store)
    # by hand: drift resolved, calibration persisting (watch -> act), value new; notes are not findings
    assert (got.then, got.now) == (1, 2)
    assert list(zip(got.findings["status"], got.findings["key"])) == [
        ("new", k_val), ("persisting", k_cal), ("resolved", k_drift)]
    persisting = got.findings.iloc[1]
    assert (persisting["severity_then"], persisting["severity_now"]) == ("watch", "act")
    models = got.models.set_index("model")
    assert models.loc["a", "change"] == pytest.approx(0.15) and models.loc["a", "moved"]
    assert models.loc["b", "change"] == pytest.approx(0.05) and not models.loc["b", "moved"]
    assert np.isnan(models.loc["c", "mase_then"]) and not models.loc["c", "moved"]
    assert changes(book.store, since_review=1, mase_change=0.01).models.set_index("model").loc["b", "moved"]
    first = changes(book.store, since_review=2)
    assert first.then == 2 and first.findings["status"].tolist() == ["persisting", "persisting"]


def test_the_latest_review_counts_whatever_the_wall_clock_says(book):
    # A review's as-of is the ledger's clock, strictly after every recorded time; a wall clock set
    # back (or records made while it ran ahead) can leave the newest review "in the future". The
    # comparison then once fell back to the review before it, silently.
    ahead = dt.datetime(2100, 1, 1)
    _store_review(book.store, 1, [("drift|a|s1||", "act")], {"a": 0.8})
    _store_review(book.store, 2, [("value|b|||", "act")], {"a": 0.9}, as_of=ahead)
    got = changes(book.store)
    assert (got.then, got.now) == (1, 2)
    assert got.findings["status"].tolist() == ["new", "resolved"]
    assert (book.changes().then, book.changes().now) == (1, 2)
    earlier = changes(book.store, as_of=dt.datetime(2099, 1, 1))      # an explicit as-of still filters
    assert (earlier.then, earlier.now) == (None, 1)


def test_changes_of_real_reviews_match_the_sets_of_keys(book, tmp_path):
    inbox = tmp_path / "inbox"
    _narrow_inbox(inbox)
    keys = []
    for k in range(2):
        if k == 1:   # a second model with the same too-narrow intervals: one new finding
            shutil.copytree(inbox / "narrow", inbox / "narrow-copy")
        found = book.review(inbox).findings
        keys.append(set(found.loc[found["severity"] != "note", "key"]))
    got = book.changes().findings
    for status, want in (("new", keys[1] - keys[0]), ("resolved", keys[0] - keys[1]),
                         ("persisting", keys[0] & keys[1])):
        assert set(got.loc[got["status"] == status, "key"]) == want
    assert (len(keys[1] - keys[0]), len(keys[0] & keys[1])) == (1, 1)
