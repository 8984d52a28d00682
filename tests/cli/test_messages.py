"""Message snapshots (issue 20 item 3): periods printed as labels of the series' frequency, names as
written with unprintable characters escaped, the empty name as (empty), compressed files and
incomplete exports named for what they are."""

from __future__ import annotations

import gzip

import pandas as pd
import pytest

from ledger import Ledger
from ledger.cli import app

from tests.helpers import table_hashes, write


@pytest.fixture
def daily(tmp_path):
    path = tmp_path / "l.duckdb"
    with Ledger.open(path) as book:
        book.record_actuals(pd.DataFrame({"series": ["A"] * 3, "period": ["2021-01-01", "2021-01-02", "2021-01-03"],
                                          "actual": [1.0, 1.0, 1.0]}), freq="daily")
    return path


def _run(runner, path, *args):
    return runner.invoke(app, ["--ledger", str(path), *args])


def test_daily_origins_are_labels_in_every_message(runner, daily, tmp_path):
    f = write(tmp_path / "d.csv", "series,period,forecast\nA,2021-01-03,1\nA,2021-01-04,1\n")
    first = _run(runner, daily, "snapshot", str(f), "--model", "m", "--origin", "2021-01-02", "--freq", "daily")
    run_id = first.stdout.split()[1]
    assert first.stdout == f"run {run_id}  m at 2021-01-02: 2 cells recorded\n"
    again = _run(runner, daily, "snapshot", str(f), "--model", "m", "--origin", "2021-01-02", "--freq", "daily")
    assert again.stderr == f"run {run_id} (m at 2021-01-02) is already in the ledger; nothing written\n"
    g = write(tmp_path / "e.csv", "series,period,forecast\nA,2021-01-03,2\n")
    other = _run(runner, daily, "snapshot", str(g), "--model", "m", "--origin", "2021-01-02", "--freq", "daily")
    assert other.exit_code == 1
    assert other.stderr == (f"Error: e.csv: model 'm' already has a different run at origin 2021-01-02 "
                            f"(run {run_id}); to replace it (the old run is kept), use --supersede\n")
    runs = _run(runner, daily, "runs", "--format", "csv")
    assert runs.stdout.splitlines()[1].split(",")[2] == "2021-01-02"     # the same label as runs prints


def test_unprintable_and_empty_names_in_errors(runner, daily):
    bad = _run(runner, daily, "scores", "--model", "a\x1fb\x1b[2J")
    assert bad.exit_code == 1
    assert bad.stderr == "Error: unknown model 'a\\x1fb\\x1b[2J'; known models: none recorded yet\n"
    empty = _run(runner, daily, "scores", "--series", "")
    assert empty.exit_code == 1 and empty.stderr == "Error: unknown series (empty); known series: A\n"


def test_a_gzip_file_passed_as_csv(runner, daily, tmp_path):
    f = tmp_path / "run.csv"
    f.write_bytes(gzip.compress(b"series,period,forecast\nA,2021-01-05,1\n"))
    before = table_hashes(daily)
    result = _run(runner, daily, "snapshot", str(f), "--model", "m", "--origin", "2021-01-02")
    assert result.exit_code == 1 and table_hashes(daily) == before
    assert result.stderr == "Error: run.csv: is a gzip-compressed file, not CSV text; unpack it first and give the CSV inside\n"


def test_two_empty_header_names(runner, daily, tmp_path):
    f = write(tmp_path / "h.csv", "series,period,forecast,,\nA,2021-01-05,1,,\n")
    result = _run(runner, daily, "snapshot", str(f), "--model", "m", "--origin", "2021-01-02")
    assert result.exit_code == 1
    assert result.stderr == ("Error: h.csv: the header names (empty) more than once "
                             "(column names are case-insensitive)\n")


def test_an_incomplete_csv_export_names_the_missing_csv_files(runner, daily, tmp_path):
    out = tmp_path / "exp"
    assert _run(runner, daily, "export", str(out), "--format", "csv").exit_code == 0
    (out / "bounds.csv").unlink()
    (out / "actuals.csv").unlink()
    result = _run(runner, tmp_path / "new.duckdb", "import", str(out))
    assert result.exit_code == 1
    assert result.stderr.startswith(f"Error: {out} does not hold a complete export (missing ")
    missing = result.stderr.split("(missing ", 1)[1].rstrip(")\n").split(", ")
    assert sorted(missing) == ["actuals.csv", "bounds.csv"]
