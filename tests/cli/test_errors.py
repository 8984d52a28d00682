"""Bad input through the command line: exit code 1, one exact ``Error:`` line, nothing written.

Each case starts from the same small ledger (series A monthly with two actuals and one run) and
checks that a content hash of every table is unchanged afterwards.
"""

from __future__ import annotations


import pytest
from typer.testing import CliRunner

from ledger.cli import app
from ledger.store import SCHEMA_VERSION

from tests.helpers import copy_ledger, table_hashes, write

FORECAST_CASES = {
    "missing_col": ("series,period\nA,2026-01\n",
                    "missing_col.csv: missing required column forecast; expected series, period, forecast (found series, period)"),
    "not_number": ("series,period,forecast\nA,2026-01,10\nA,2026-02,ten\n",
                   "not_number.csv row 2 column forecast: 'ten' is not a finite number"),
    "nan": ("series,period,forecast\nA,2026-01,NaN\n", "nan.csv row 1 column forecast: 'NaN' is not a finite number"),
    "inf": ("series,period,forecast\nA,2026-01,-inf\n", "inf.csv row 1 column forecast: '-inf' is not a finite number"),
    "blank_point": ("series,period,forecast\nA,2026-01,\n", "blank_point.csv row 1 column forecast: is empty"),
    "bad_period": ("series,period,forecast\nA,2026-01,1\nA,2026-13,1\n",
                   "bad_period.csv row 2 column period: month 13 out of range in '2026-13'"),
    "empty": ("", "empty.csv: the file is empty"),
    "header_only": ("series,period,forecast\n", "header_only.csv: the file has a header but no data rows"),
    "dup": ("series,period,forecast\nA,2026-01,1\nA,2026-02,1\nA,2026-01,2\n",
            "dup.csv row 3 column period: a second forecast for the same series, period, model and origin (first at row 1)"),
    "not_after": ("series,period,forecast\nA,2026-01,1\nA,2025-11,1\n",
                  "not_after.csv row 2 column period: target period 2025-11 is not after the origin 2025-11"),
    "crossed": ("series,period,forecast,lower_80,upper_80\nA,2026-01,1,3,2\n",
                "crossed.csv row 1 column lower_80: lower bound 3 is above the upper bound 2"),
    "lower_only": ("series,period,forecast,lower_80\nA,2026-01,1,0\n",
                   "lower_only.csv column lower_80: has no matching upper_80 column"),
    "half_bound": ("series,period,forecast,lower_80,upper_80\nA,2026-01,1,0,2\nA,2026-02,1,0,\n",
                   "half_bound.csv row 2 column upper_80: is empty but lower_80 is given; give both bounds or neither"),
    "level_out": ("series,period,forecast,lower_120,upper_120\nA,2026-01,1,0,2\n",
                  "level_out.csv column lower_120: level 120 is outside (0, 100)"),
    "q_out": ("series,period,forecast,q00\nA,2026-01,1,1\n", "q_out.csv column q00: quantile level 0 is outside (0, 1)"),
    "q_decr": ("series,period,forecast,q10,q90\nA,2026-01,1,0,2\nA,2026-02,1,3,2\n",
               "q_decr.csv row 2 column q90: quantiles decrease: q10 = 3 is above q90 = 2"),
    "misspelt": ("series,period,forecast,lower80,upper80\nA,2026-01,1,0,2\n",
                 "misspelt.csv: 2 problems; nothing was written\n"
                 "misspelt.csv column lower80: looks like an interval bound; name it lower_80\n"
                 "misspelt.csv column upper80: looks like an interval bound; name it upper_80"),
    "hi_95": ("series,period,forecast,hi_95\nA,2026-01,1,2\n",
              "hi_95.csv column hi_95: looks like an interval bound; name it upper_95"),
    "p90": ("series,period,forecast,p90\nA,2026-01,1,2\n",
            "p90.csv column p90: looks like a quantile; name it q90 (q10 is the 0.10 quantile)"),
    "mixed": ("series,period,forecast\nA,2026-01,1\nA,2026Q2,1\n",
              "mixed.csv row 2 column period: mixes monthly and quarterly labels; one file holds one frequency"),
    "model_differs": ("series,period,forecast,model\nA,2026-01,1,other\n",
                      "model_differs.csv row 1 column model: 'other' differs from --model m; give one or the other"),
    "empty_key": ("series,period,forecast\n,2026-01,1\n", "empty_key.csv row 1 column series: is empty"),
    "dup_header": ("series,period,forecast,Forecast\nA,2026-01,1,2\n",
                   "dup_header.csv: the header names forecast more than once (column names are case-insensitive)"),
}


@pytest.fixture(scope="module")
def built(tmp_path_factory):
    """The small ledger every test starts from, recorded once for the module."""
    root = tmp_path_factory.mktemp("errors")
    path, runner = root / "l.duckdb", CliRunner()
    act = write(root / "act.csv", "series,period,actual\nA,2025-11,5\nA,2025-12,6\n")
    run = write(root / "run.csv", "series,period,forecast\nA,2026-01,7\n")
    assert runner.invoke(app, ["--ledger", str(path), "actuals", str(act)]).exit_code == 0
    assert runner.invoke(app, ["--ledger", str(path), "snapshot", str(run), "--model", "m",
                               "--origin", "2025-12"]).exit_code == 0
    return path


@pytest.fixture
def base(built, tmp_path):
    # most tests try to write (and some do), so each gets its own copy of the file
    return copy_ledger(built, tmp_path)


def _refused(runner, path, args, expected):
    before = table_hashes(path)
    result = runner.invoke(app, ["--ledger", str(path), *args])
    assert result.exit_code == 1, result.output
    assert result.stderr.strip().splitlines() == f"Error: {expected}".splitlines()
    assert result.stdout == ""
    assert table_hashes(path) == before


@pytest.mark.parametrize("name", sorted(FORECAST_CASES))
def test_bad_forecast_file_is_refused_whole(tmp_path, runner, base, name):
    text, expected = FORECAST_CASES[name]
    f = write(tmp_path / f"{name}.csv", text)
    _refused(runner, base, ["snapshot", str(f), "--model", "m", "--origin", "2025-11"], expected)


def test_missing_model_and_origin(tmp_path, runner, base):
    f = write(tmp_path / "nomodel.csv", "series,period,forecast\nA,2026-01,1\n")
    _refused(runner, base, ["snapshot", str(f), "--origin", "2025-12"],
             "nomodel.csv: has no model column and no --model was given")


def test_frequency_contradicting_the_record(tmp_path, runner, base):
    f = write(tmp_path / "q.csv", "series,period,forecast\nA,2026Q1,1\n")
    _refused(runner, base, ["snapshot", str(f), "--model", "m", "--origin", "2025Q4"],
             "q.csv row 1 column series: series 'A' is recorded as monthly, but this file is quarterly; "
             "a series keeps the frequency it was first recorded with")


def test_bare_dates_of_a_new_series_need_freq(tmp_path, runner, base):
    f = write(tmp_path / "d.csv", "series,period,forecast\nNEW,2026-01-31,1\n")
    _refused(runner, base, ["snapshot", str(f), "--model", "m", "--origin", "2025-12-31"],
             "d.csv row 1 column period: holds bare dates, which fit several frequencies; say which with --freq "
             "(yearly, quarterly, monthly, weekly, daily)")


def test_bare_dates_of_a_known_series_use_its_frequency(tmp_path, runner, base):
    f = write(tmp_path / "d.csv", "series,period,forecast\nA,2026-02-28,1\n")
    result = runner.invoke(app, ["--ledger", str(base), "snapshot", str(f), "--model", "m2", "--origin", "2025-12-31"])
    assert result.exit_code == 0, result.output
    assert "m2 at 2025-12: 1 cell recorded" in result.stdout


def test_unknown_freq_value(tmp_path, runner, base):
    f = write(tmp_path / "x.csv", "series,period,forecast\nA,2026-01,1\n")
    _refused(runner, base, ["snapshot", str(f), "--model", "m", "--origin", "2025-12", "--freq", "fortnightly"],
             "--freq: unknown frequency 'fortnightly'; use one of yearly, quarterly, monthly, weekly, daily")


def test_conflicting_run_names_supersede(tmp_path, runner, base):
    f = write(tmp_path / "run2.csv", "series,period,forecast\nA,2026-01,8\n")
    before = table_hashes(base)
    result = runner.invoke(app, ["--ledger", str(base), "snapshot", str(f), "--model", "m", "--origin", "2025-12"])
    assert result.exit_code == 1
    assert result.stderr.startswith("Error: run2.csv: model 'm' already has a different run at origin 2025-12 (run ")
    assert result.stderr.rstrip().endswith("to replace it (the old run is kept), use --supersede")
    assert table_hashes(base) == before


ACTUALS_CASES = {
    "act_missing": ("series,period\nA,2026-01\n",
                    "act_missing.csv: missing required column actual; expected series, period, actual (found series, period)"),
    "act_dup": ("series,period,actual\nA,2026-01,1\nA,2026-01,2\n",
                "act_dup.csv row 2 column period: a second actual for the same series and period (first at row 1)"),
    "act_text": ("series,period,actual\nA,2026-01,n/a\n", "act_text.csv row 1 column actual: 'n/a' is not a finite number"),
    "act_period": ("series,period,actual\nA,Jan 2026,1\n",
                   "act_period.csv row 1 column period: 'Jan 2026' is not a period; use an ISO date (2026-07-31) "
                   "or a label such as 2026, 2026Q3, 2026-11 or 2026-W05"),
}


@pytest.mark.parametrize("name", sorted(ACTUALS_CASES))
def test_bad_actuals_file_is_refused_whole(tmp_path, runner, base, name):
    text, expected = ACTUALS_CASES[name]
    f = write(tmp_path / f"{name}.csv", text)
    _refused(runner, base, ["actuals", str(f)], expected)


def test_missing_file(tmp_path, runner, base):
    _refused(runner, base, ["actuals", str(tmp_path / "nope.csv")], f"nope.csv: no such file: {tmp_path / 'nope.csv'}")


def test_not_a_ledger(tmp_path, runner):
    bogus = write(tmp_path / "notes.duckdb", "this is not a database\n")
    result = runner.invoke(app, ["--ledger", str(bogus), "scores"])
    assert result.exit_code == 1
    assert result.stderr.startswith(f"Error: {bogus} ")
    assert "ledger" in result.stderr


def test_no_ledger_yet(tmp_path, runner):
    missing = tmp_path / "none.duckdb"
    result = runner.invoke(app, ["--ledger", str(missing), "runs"])
    assert result.exit_code == 1
    assert result.stderr == (f"Error: no ledger at {missing}; record something first (backsight snapshot FILE or "
                             "backsight actuals FILE), or point --ledger at an existing file\n")
    assert not missing.exists()


def test_newer_schema_is_refused_precisely(tmp_path, runner, base):
    import duckdb
    con = duckdb.connect(str(base))
    con.execute("UPDATE meta SET value = ? WHERE key = 'schema_version'", [str(SCHEMA_VERSION + 98)])
    con.close()
    result = runner.invoke(app, ["--ledger", str(base), "runs"])
    assert result.exit_code == 1
    assert result.stderr == (f"Error: {base} has schema version {SCHEMA_VERSION + 98}, newer than this Backsight "
                             f"(0.1.0) understands ({SCHEMA_VERSION}); upgrade Backsight\n")


def test_usage_errors_keep_exit_code_2(runner, base):
    result = runner.invoke(app, ["--ledger", str(base), "scores", "--format", "xml"])
    assert result.exit_code == 2


def test_unknown_group_key(runner, base):
    result = runner.invoke(app, ["--ledger", str(base), "scores", "--by", "model,region"])
    assert result.exit_code == 1
    assert result.stderr == "Error: cannot group by region; use a comma list of series, model, horizon, origin, period\n"
