"""A refused file reports every problem at once (issue 15 item 5): how many, then one line each in
file order, at most 20 and "and K more"; an option's problem names the option; misspelt columns
get the expected name. Nothing is written: every table's hash is unchanged."""

from __future__ import annotations

import pandas as pd
import pytest

from ledger import Ledger
from ledger.cli import app

from tests.helpers import table_hashes, write


@pytest.fixture
def base(tmp_path):
    path = tmp_path / "l.duckdb"
    with Ledger.open(path) as book:
        book.record_actuals(pd.DataFrame({"series": ["A", "A"], "period": ["2025-11", "2025-12"], "actual": [1.0, 2.0]}))
        book.record_actuals(pd.DataFrame({"series": ["W"], "period": ["2025-W18"], "actual": [1.0]}))
    return path


def _refused(runner, path, *args):
    before = table_hashes(path)
    result = runner.invoke(app, ["--ledger", str(path), *args])
    assert result.exit_code == 1, result.output
    assert table_hashes(path) == before
    return result.stderr.rstrip("\n").splitlines()


SIX = ("series,period,forecast,lower_80,upper_80\n"
       "A,2026-01,10,8,12\n"
       "A,2026-13,10,8,12\n"
       ",2026-03,10,8,12\n"
       "A,2026-04,ten,8,12\n"
       "A,2026-05,10,13,12\n"
       "A,2026-01,11,8,12\n"
       "A,2025-10,10,8,12\n"
       "A,2026-08,10,8,12\n")


def test_six_faults_all_reported_in_file_order(runner, base, tmp_path):
    f = write(tmp_path / "six.csv", SIX)
    lines = _refused(runner, base, "snapshot", str(f), "--model", "m", "--origin", "2025-12")
    assert lines == [
        "Error: six.csv: 6 problems; nothing was written",
        "six.csv row 2 column period: month 13 out of range in '2026-13'",
        "six.csv row 3 column series: is empty",
        "six.csv row 4 column forecast: 'ten' is not a finite number",
        "six.csv row 5 column lower_80: lower bound 13 is above the upper bound 12",
        "six.csv row 6 column period: a second forecast for the same series, period, model and origin (first at row 1)",
        "six.csv row 7 column period: target period 2025-10 is not after the origin 2025-12",
    ]


MIXED = ("series,period,forecast\n"
         "A,2026-01,10\n"
         "A,2026-01,11\n"
         "A,2025-10,10\n"
         "A,2026-W03,10\n"
         "A,2026-02,x\n"
         "A,2026-02,10\n"
         "A,2026-02,12\n"
         "A,2025-11,10\n"
         "A,2026Q2,10\n"
         "W,2026-03,10\n"
         "W,2026-04,10\n")


def test_whole_file_checks_name_every_row_beside_the_per_row_ones(runner, base, tmp_path):
    # Two rows of other frequencies, three repeats, two periods before the origin, one bad number and
    # one series recorded weekly: all reported in one pass (the other-frequency rows do not stop
    # the duplicate and horizon checks); the recorded frequency is named once per series.
    f = write(tmp_path / "mixed.csv", MIXED)
    lines = _refused(runner, base, "snapshot", str(f), "--model", "m", "--origin", "2025-12")
    assert lines == [
        "Error: mixed.csv: 9 problems; nothing was written",
        "mixed.csv row 2 column period: a second forecast for the same series, period, model and origin (first at row 1)",
        "mixed.csv row 3 column period: target period 2025-10 is not after the origin 2025-12",
        "mixed.csv row 4 column period: mixes monthly and weekly labels; one file holds one frequency",
        "mixed.csv row 5 column forecast: 'x' is not a finite number",
        "mixed.csv row 6 column period: a second forecast for the same series, period, model and origin (first at row 5)",
        "mixed.csv row 7 column period: a second forecast for the same series, period, model and origin (first at row 5)",
        "mixed.csv row 8 column period: target period 2025-11 is not after the origin 2025-12",
        "mixed.csv row 9 column period: mixes monthly and quarterly labels; one file holds one frequency",
        "mixed.csv row 10 column series: series 'W' is recorded as weekly, but this file is monthly; "
        "a series keeps the frequency it was first recorded with",
    ]


def test_the_file_frequency_is_its_majority_and_freq_names_every_other_row(runner, base, tmp_path):
    f = write(tmp_path / "q.csv", "series,period,actual\nB,2026Q1,1\nB,2026-02,1\nB,2026-03,1\nB,2026-04,1\n"
                                 "B,2026Q3,1\n")
    assert _refused(runner, base, "actuals", str(f)) == [
        "Error: q.csv: 2 problems; nothing was written",
        "q.csv row 1 column period: mixes monthly and quarterly labels; one file holds one frequency",
        "q.csv row 5 column period: mixes monthly and quarterly labels; one file holds one frequency",
    ]
    assert _refused(runner, base, "actuals", str(f), "--freq", "quarterly") == [
        "Error: q.csv: 3 problems; nothing was written",
        "q.csv row 2 column period: is a monthly label but --freq is quarterly",
        "q.csv row 3 column period: is a monthly label but --freq is quarterly",
        "q.csv row 4 column period: is a monthly label but --freq is quarterly",
    ]


def test_at_most_twenty_then_how_many_more(runner, base, tmp_path):
    rows = "".join(f"A,2026-{m:02d},x{m}\n" for m in range(1, 13)) + "".join(
        f"A,2027-{m:02d},y{m}\n" for m in range(1, 13)) + "A,2028-01,z\n"
    f = write(tmp_path / "many.csv", "series,period,forecast\n" + rows)
    lines = _refused(runner, base, "snapshot", str(f), "--model", "m", "--origin", "2025-12")
    assert lines[0] == "Error: many.csv: 25 problems; nothing was written"
    assert lines[1] == "many.csv row 1 column forecast: 'x1' is not a finite number"
    assert lines[20] == "many.csv row 20 column forecast: 'y8' is not a finite number"
    assert lines[21:] == ["and 5 more"]


def test_actuals_problems_in_one_pass(runner, base, tmp_path):
    f = write(tmp_path / "act.csv", "series,period,actual\nA,2026-01,1\n,2026-02,x\nA,2026-99,2\n")
    assert _refused(runner, base, "actuals", str(f)) == [
        "Error: act.csv: 3 problems; nothing was written",
        "act.csv row 2 column series: is empty",
        "act.csv row 2 column actual: 'x' is not a finite number",
        "act.csv row 3 column period: month 99 out of range in '2026-99'",
    ]


def test_an_options_problem_names_the_option(runner, base, tmp_path):
    f = write(tmp_path / "w.csv", "series,period,forecast\nW,2025-05-05,1\n")
    lines = _refused(runner, base, "snapshot", str(f), "--model", "m", "--origin", "2025-04")
    assert lines == ["Error: w.csv: --origin 2025-04: is a monthly label, but series 'W' is recorded as weekly; "
                     "a series keeps the frequency it was first recorded with"]
    g = write(tmp_path / "o.csv", "series,period,forecast\nA,2026-01,1\nA,2026-02,1\n")
    assert _refused(runner, base, "snapshot", str(g), "--model", "m", "--origin", "2025-13") == [
        "Error: o.csv: --origin 2025-13: month 13 out of range in '2025-13'"]


def test_misspelt_columns_get_the_expected_name(runner, base, tmp_path):
    f = write(tmp_path / "m.csv", "series,period,forcast\nA,2026-01,1\n")
    assert _refused(runner, base, "snapshot", str(f), "--model", "m", "--origin", "2025-12") == [
        "Error: m.csv: missing required column forecast; expected series, period, forecast "
        "(found series, period, forcast); forcast looks like forecast: rename it forecast"]
    g = write(tmp_path / "b.csv", "series,period,forecast,lower80,upper_80\nA,2026-01,1,0,2\n")
    lines = _refused(runner, base, "snapshot", str(g), "--model", "m", "--origin", "2025-12")
    assert lines == ["Error: b.csv: 2 problems; nothing was written",
                     "b.csv column upper_80: has no matching lower_80 column; lower80 looks like it: rename it lower_80",
                     "b.csv column lower80: looks like an interval bound; name it lower_80"]
