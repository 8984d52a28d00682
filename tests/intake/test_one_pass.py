"""One pass over a refused file finds every problem (issue 15 item 5): the whole-file checks in SQL
(duplicate keys, target period not after the origin, a series' recorded frequency) name every
offending row, not only the first, and a missing required column does not stop the other checks.
Nothing is written: every table's hash is unchanged."""

from __future__ import annotations

import pandas as pd
import pytest

from ledger import Ledger

from tests.cli.test_every_problem import _refused   # exit 1, every table's hash unchanged, the lines
from tests.helpers import write


@pytest.fixture
def base(tmp_path):
    path = tmp_path / "l.duckdb"
    with Ledger.open(path) as book:       # W is weekly: a monthly row of W is a recorded-frequency fault
        book.record_actuals(pd.DataFrame({"series": ["W"], "period": ["2025-W18"], "actual": [1.0]}))
    return path


# Six kinds of fault; the two whole-file kinds that need every row (duplicates, horizons) twice each.
SIX_KINDS = ("model,origin,series,period,forcast,lower_80,upper_80\n"
             "m,2025-12,A,2026-01,10,8,12\n"          # row 1: fine
             "m,2025-12,A,2026-02,10,\"12,5\",13\n"   # row 2: a decimal comma in lower_80
             "m,2025-12,A,2026-13,10,8,12\n"          # row 3: no month 13
             "m,2025-12,A,2026-01,10,8,12\n"          # row 4: repeats row 1
             "m,2025-12,A,2025-11,10,8,12\n"          # row 5: target before the origin
             "m,2025-12,W,2026-03,10,8,12\n"          # row 6: W is recorded as weekly
             "m,2025-12,A,2026-01,11,8,12\n"          # row 7: repeats row 1 again
             "m,2025-12,B,2025-12,10,8,12\n")         # row 8: target at the origin


def test_six_kinds_of_fault_every_row_in_one_pass(runner, base, tmp_path):
    f = write(tmp_path / "six.csv", SIX_KINDS)
    assert _refused(runner, base, "snapshot", str(f)) == [
        "Error: six.csv: 8 problems; nothing was written",
        "six.csv: missing required column forecast; expected series, period, forecast (found model, origin, "
        "series, period, forcast, lower_80, upper_80); forcast looks like forecast: rename it forecast",
        "six.csv row 2 column lower_80: '12,5' is not a finite number; write the decimal mark as a point (10.5)",
        "six.csv row 3 column period: month 13 out of range in '2026-13'",
        "six.csv row 4 column period: a second forecast for the same series, period, model and origin (first at row 1)",
        "six.csv row 5 column period: target period 2025-11 is not after the origin 2025-12",
        "six.csv row 6 column series: series 'W' is recorded as weekly, but this file is monthly; "
        "a series keeps the frequency it was first recorded with",
        "six.csv row 7 column period: a second forecast for the same series, period, model and origin (first at row 1)",
        "six.csv row 8 column period: target period 2025-12 is not after the origin 2025-12",
    ]


def test_a_whole_file_check_counts_every_row_beyond_twenty(runner, base, tmp_path):
    rows = "A,2026-01,1\n" + "".join(f"A,2026-01,{i}\n" for i in range(2, 27))       # rows 2..26 repeat row 1
    f = write(tmp_path / "dup.csv", "series,period,forecast\n" + rows)
    lines = _refused(runner, base, "snapshot", str(f), "--model", "m", "--origin", "2025-12")
    dup = "a second forecast for the same series, period, model and origin (first at row 1)"
    assert lines[0] == "Error: dup.csv: 25 problems; nothing was written"
    assert lines[1:21] == [f"dup.csv row {r} column period: {dup}" for r in range(2, 22)]
    assert lines[21:] == ["and 5 more"]


def test_every_series_recorded_with_another_frequency(runner, tmp_path):
    path = tmp_path / "w.duckdb"
    with Ledger.open(path) as book:
        book.record_actuals(pd.DataFrame({"series": ["W1", "W2"], "period": ["2025-W18", "2025-W18"],
                                          "actual": [1.0, 2.0]}))
    f = write(tmp_path / "a.csv", "series,period,actual\nM,2026-01,1\nW2,2026-01,1\nW1,2026-02,1\nW2,2026-02,1\n")
    rule = "but this file is monthly; a series keeps the frequency it was first recorded with"
    assert _refused(runner, path, "actuals", str(f)) == [
        "Error: a.csv: 2 problems; nothing was written",
        f"a.csv row 2 column series: series 'W2' is recorded as weekly, {rule}",
        f"a.csv row 3 column series: series 'W1' is recorded as weekly, {rule}",
    ]


def test_a_missing_actuals_column_with_the_other_problems(runner, base, tmp_path):
    f = write(tmp_path / "act.csv", "series,period,actul\nA,2026-01,1\nA,2026-13,2\nA,2026-01,3\n")
    assert _refused(runner, base, "actuals", str(f)) == [
        "Error: act.csv: 3 problems; nothing was written",
        "act.csv: missing required column actual; expected series, period, actual (found series, period, actul); "
        "actul looks like actual: rename it actual",
        "act.csv row 2 column period: month 13 out of range in '2026-13'",
        "act.csv row 3 column period: a second actual for the same series and period (first at row 1)",
    ]


def test_a_missing_model_column_is_one_problem_however_many_chunks(runner, base, tmp_path, monkeypatch):
    from ledger.intake import sources
    monkeypatch.setattr(sources, "CHUNK_ROWS", 2)
    f = write(tmp_path / "nm.csv", "series,period,forecast\n" + "".join(f"A,2026-{m:02d},1\n" for m in range(1, 8)))
    assert _refused(runner, base, "snapshot", str(f), "--origin", "2025-12") == [
        "Error: nm.csv: has no model column and no --model was given"]
