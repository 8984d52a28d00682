"""Runs are immutable, re-sends are no-ops, supersede keeps the old run, revisions are kept."""

from __future__ import annotations

import datetime as dt

import duckdb
import pandas as pd
import pytest

from ledger import Ledger
from ledger.cli import app
from ledger.errors import NotALedger, RunConflict
from ledger.store import SCHEMA_VERSION, utc_now

from tests.helpers import table_hashes, write

RUN = pd.DataFrame({"series": ["A", "A", "B"], "period": ["2026-01", "2026-02", "2026-01"],
                    "forecast": [10.0, 11.0, 20.0], "lower_80": [8, 9, 18], "upper_80": [12, 13, 22]})
ACT = pd.DataFrame({"series": ["A", "A", "A", "B", "B"], "period": ["2025-11", "2025-12", "2026-01", "2025-12", "2026-01"],
                    "actual": [9.0, 10.0, 12.0, 19.0, 21.0]})


@pytest.fixture
def book(ledger_path):
    with Ledger.open(ledger_path) as b:
        yield b


def test_new_ledger_has_meta(book):
    meta = dict(book.store.con.execute("SELECT key, value FROM meta").fetchall())
    assert meta["schema_version"] == str(SCHEMA_VERSION)
    assert meta["writer_version"] == "0.1.0"
    assert dt.datetime.fromisoformat(meta["created_at"]) <= utc_now()


def test_same_run_twice_is_a_noop(book):
    first = book.snapshot(RUN, model="m", origin="2025-12")
    before = {t: book.store.table_hash(t) for t in ("runs", "forecasts", "bounds")}
    again = book.snapshot(RUN.iloc[::-1], model="m", origin="2025-12")   # row order does not matter
    assert [r.status for r in first.runs] == ["recorded"]
    assert [r.status for r in again.runs] == ["unchanged"]
    assert again.runs[0].run_id == first.runs[0].run_id
    assert {t: book.store.table_hash(t) for t in ("runs", "forecasts", "bounds")} == before


def test_number_spelling_does_not_change_the_hash(book, tmp_path):
    a = write(tmp_path / "a.csv", "series,period,forecast\nA,2026-01,10\n")
    b = write(tmp_path / "b.csv", "SERIES,Period,forecast\nA,2026-01-15,10.000\n")
    ra = book.snapshot(a, model="m", origin="2025-12")
    rb = book.snapshot(b, model="m", origin="2025-12")
    assert rb.runs[0].status == "unchanged" and rb.runs[0].run_id == ra.runs[0].run_id


def test_different_run_refused_then_superseded(book):
    book.record_actuals(ACT)
    old = book.snapshot(RUN, model="m", origin="2025-12").runs[0]
    changed = RUN.assign(forecast=RUN["forecast"] + 1)
    with pytest.raises(RunConflict, match="--supersede"):
        book.snapshot(changed, model="m", origin="2025-12")
    before = utc_now()
    new = book.snapshot(changed, model="m", origin="2025-12", supersede=True).runs[0]
    assert new.status == f"superseded {old.run_id}"
    runs = book.runs().set_index("run_id")
    assert runs.loc[old.run_id, "superseded_by"] == new.run_id and pd.isna(runs.loc[new.run_id, "superseded_by"])
    # scoring uses the newest run; the old run still scores as of before the supersede
    now = book.scores(by=["model"])
    then = book.scores(by=["model"], as_of=before)
    assert now["bias"].iloc[0] == pytest.approx(then["bias"].iloc[0] - 1)
    assert now["n"].iloc[0] == then["n"].iloc[0] == 2   # A 2026-02 has no actual yet


def test_revisions_are_appended_and_as_of_reproduces(book):
    book.snapshot(RUN, model="m", origin="2025-12")
    r1 = book.record_actuals(ACT)
    assert (r1.new, r1.revised, r1.unchanged) == (5, 0, 0)
    t1 = utc_now()
    r2 = book.record_actuals(ACT.assign(actual=[9.0, 10.0, 15.0, 19.0, 21.0]))
    assert (r2.new, r2.revised, r2.unchanged) == (0, 1, 4)
    revs = book.store.con.execute(
        "SELECT revision, value FROM actuals WHERE series = 'A' AND period = DATE '2026-01-01' ORDER BY revision").fetchall()
    assert revs == [(1, 12.0), (2, 15.0)]
    a_now = book.scores(by=["series"], series=["A"])
    a_then = book.scores(by=["series"], series=["A"], as_of=t1)
    assert a_now["mae"].iloc[0] == pytest.approx(5.0) and a_then["mae"].iloc[0] == pytest.approx(2.0)
    # as-of before anything was recorded: nothing to score
    assert book.scores(as_of="2000-01-01").empty


def test_backfill_file_holds_many_runs(book, tmp_path):
    f = write(tmp_path / "backfill.csv",
              "model,origin,series,period,forecast\n"
              "m,2025-11,A,2025-12,1\nm,2025-11,A,2026-01,2\nm,2025-12,A,2026-01,3\nn,2025-12,A,2026-01,4\n")
    result = book.snapshot(f)
    assert [(r.model, r.origin, r.cells) for r in result.runs] == [("m", "2025-11", 2), ("m", "2025-12", 1), ("n", "2025-12", 1)]
    book.record_actuals(ACT)
    s = book.scores(by=["model", "origin", "horizon"])
    assert s[["model", "origin", "horizon", "n"]].values.tolist() == [
        ["m", "2025-11", 1, 1], ["m", "2025-11", 2, 1], ["m", "2025-12", 1, 1], ["n", "2025-12", 1, 1]]


def test_a_failed_backfill_writes_nothing(book, tmp_path):
    book.snapshot(RUN, model="m", origin="2025-12")
    before = {t: book.store.table_hash(t) for t in ("series", "runs", "forecasts", "bounds")}
    f = write(tmp_path / "bf.csv", "model,origin,series,period,forecast\n"
              "z,2025-11,NEW,2025-12,1\nm,2025-12,A,2026-01,99\n")   # second run conflicts
    with pytest.raises(RunConflict):
        book.snapshot(f)
    assert {t: book.store.table_hash(t) for t in ("series", "runs", "forecasts", "bounds")} == before


def test_warnings_for_extra_columns_and_point_outside(book, tmp_path):
    f = write(tmp_path / "w.csv", "series,period,forecast,lower_80,upper_80,comment\nA,2026-01,20,8,12,hi\n")
    result = book.snapshot(f, model="m", origin="2025-12")
    assert result.warnings == ["w.csv: ignored column comment",
                               "w.csv: 1 point forecast(s) lie outside their own 80% interval (first at row 1)"]


def test_bom_and_case_insensitive_headers(book, tmp_path):
    f = tmp_path / "bom.csv"
    f.write_bytes("\ufeffSeries,PERIOD,Forecast,Lower_95,Upper_95,Q50\nA,2026Q1,1,0,2,1\n".encode("utf-8"))
    result = book.snapshot(f, model="m", origin="2025Q4")
    assert result.runs[0].cells == 1
    assert book.store.con.execute("SELECT level, lower, upper FROM bounds").fetchall() == [(95.0, 0.0, 2.0)]
    assert book.store.con.execute("SELECT tau, value FROM quantiles").fetchall() == [(0.5, 1.0)]


def test_parquet_input(book, tmp_path):
    f = tmp_path / "run.parquet"
    RUN.to_parquet(f)
    assert book.snapshot(f, model="m", origin="2025-12").runs[0].cells == 3


def test_non_ledger_duckdb_file_is_refused(tmp_path):
    path = tmp_path / "other.duckdb"
    con = duckdb.connect(str(path))
    con.execute("CREATE TABLE t (x INTEGER)")
    con.close()
    with pytest.raises(NotALedger, match="is a DuckDB file but not a Backsight ledger"):
        Ledger.open(path)


def test_cli_round_trip(tmp_path, runner):
    path = tmp_path / "l.duckdb"
    run = tmp_path / "run.csv"
    RUN.to_csv(run, index=False)
    act = tmp_path / "act.csv"
    ACT.to_csv(act, index=False)
    r = runner.invoke(app, ["--ledger", str(path), "snapshot", str(run), "--model", "m", "--origin", "2025-12"])
    assert r.exit_code == 0 and r.stdout.endswith("m at 2025-12: 3 cells recorded\n")
    r = runner.invoke(app, ["--ledger", str(path), "snapshot", str(run), "--model", "m", "--origin", "2025-12"])
    assert r.exit_code == 0 and r.stdout == "" and "is already in the ledger; nothing written" in r.stderr
    r = runner.invoke(app, ["--ledger", str(path), "actuals", str(act)])
    assert r.stdout == "5 new, 0 revised, 0 unchanged\n"
    r = runner.invoke(app, ["--ledger", str(path), "scores", "--format", "csv"])
    assert r.exit_code == 0
    lines = r.stdout.splitlines()
    assert lines[0] == ("model,horizon,n,mae,rmse,mape,smape,wape,mase,rmsse,bias,bias_pct,coverage_80,n_80,width_80,"
                        "interval_score_80,msis_80,wis,wis_dispersion,wis_overprediction,wis_underprediction,swis,"
                        "crps_q,n_zero_actual,n_unscaled,n_excluded")
    assert lines[1].startswith("m,1,2,1.5,1.5811388300841898,") and len(lines) == 2
    r = runner.invoke(app, ["--ledger", str(path), "scores", "--format", "json", "--by", "series"])
    assert r.exit_code == 0 and r.stdout.lstrip().startswith("[")
    r = runner.invoke(app, ["--ledger", str(path), "runs", "--format", "csv"])
    assert r.stdout.splitlines()[0] == "run_id,model,origin,recorded_at,cells,content_hash,superseded_by"
    before = table_hashes(path)
    assert runner.invoke(app, ["--ledger", str(path), "scores"]).exit_code == 0
    assert table_hashes(path) == before


def test_python_m_ledger_works(tmp_path):
    import subprocess
    import sys
    out = subprocess.run([sys.executable, "-m", "ledger", "--version"], capture_output=True, text=True, check=True)
    assert out.stdout == "backsight 0.1.0\n"


def test_env_var_names_the_ledger(tmp_path, runner):
    path = tmp_path / "env.duckdb"
    run = tmp_path / "run.csv"
    RUN.to_csv(run, index=False)
    r = runner.invoke(app, ["snapshot", str(run), "--model", "m", "--origin", "2025-12"], env={"BACKSIGHT_LEDGER": str(path)})
    assert r.exit_code == 0 and path.exists()


def test_no_connection_draws_a_progress_bar(ledger_path):
    """DuckDB draws its bar on stdout after 2 s, where `--format csv` output goes: every
    connection the ledger opens, writable or read-only, has it off."""
    with Ledger.open(ledger_path) as book:
        assert book.store.con.execute("SELECT current_setting('enable_progress_bar')").fetchone() == (False,)
    with Ledger.open(ledger_path, create=False, read_only=True) as book:
        assert book.store.con.execute("SELECT current_setting('enable_progress_bar')").fetchone() == (False,)
