"""verify, waiting for a busy ledger, schema migration, export and import."""

from __future__ import annotations

import subprocess
import sys
import textwrap

import duckdb
import pandas as pd
import pytest

from ledger import Ledger
from ledger.cli import app
from ledger.errors import LedgerBusy, LedgerError
from ledger.store import SCHEMA_VERSION, TABLES, Store

HOSTILE = ["NULL", "=1+1", "-north", "+x", "@sum", "'quoted", "a,b", "no\u00a0break space", '"dq"',
           "<script>alert(1)</script>", "../../etc", "North/Hoses", "north/hoses", "ünïcode ✓"]


@pytest.fixture
def filled(tmp_path):
    path = tmp_path / "l.duckdb"
    with Ledger.open(path) as book:
        book.record_actuals(pd.DataFrame({"series": HOSTILE, "period": "2026-01", "actual": range(len(HOSTILE))}))
        book.record_actuals(pd.DataFrame({"series": HOSTILE[:3], "period": "2026-01", "actual": [9.5, 8.5, 7.5]}))
        book.snapshot(pd.DataFrame({"series": HOSTILE, "period": "2026-02", "forecast": 1.25, "lower_80": 0.5,
                                    "upper_80": 2.0, "q10": 0.25, "q90": 2.5}),
                      model="=cmd|' /C calc'!A0", origin="2026-01", note="-2+3")
    return path


def test_verify_sound_then_finds_tampering(filled, runner):
    r = runner.invoke(app, ["--ledger", str(filled), "verify"])
    assert r.exit_code == 0 and r.stdout == f"{filled}: sound\n"
    con = duckdb.connect(str(filled))
    con.execute("UPDATE forecasts SET point = point + 1 WHERE series = 'NULL'")
    con.execute("INSERT INTO bounds VALUES ('nope', 'x', 1, 80, 0, 1)")
    con.execute("DELETE FROM actuals WHERE series = '=1+1' AND revision = 1")
    con.close()
    r = runner.invoke(app, ["--ledger", str(filled), "verify"])
    assert r.exit_code == 1
    assert r.stdout.splitlines() == [
        "problem: bounds without a forecast: 1 row(s)",
        "problem: orphaned or missing revisions: 1 row(s)",
        "problem: actual revisions whose chain hash does not match: 1 row(s)",   # revision 2 lost its predecessor
        "problem: writes of actuals whose rows were changed or deleted: 1 row(s)",
        f"problem: content hash: run {_run_id(filled)} (=cmd|' /C calc'!A0) does not match its recorded hash",
    ]


def _run_id(path):
    with Ledger.open(path, create=False, read_only=True) as book:
        return book.runs()["run_id"].iloc[0]


def test_busy_ledger_waits_then_fails_clearly(filled):
    holder = subprocess.Popen([sys.executable, "-c", textwrap.dedent(f"""
        import duckdb, sys, time
        con = duckdb.connect({str(filled)!r})
        print("holding", flush=True)
        sys.stdin.readline()
    """)], stdin=subprocess.PIPE, stdout=subprocess.PIPE, text=True)
    try:
        assert holder.stdout.readline().strip() == "holding"
        with pytest.raises(LedgerBusy) as info:
            Ledger.open(filled, wait=0.3)
        assert str(info.value) == f"the ledger {filled} is in use by another process; try again"
        with pytest.raises(LedgerBusy):
            Ledger.open(filled, read_only=True, wait=0.0)     # readers are refused the same way
    finally:
        holder.communicate("\n", timeout=30)
    with Ledger.open(filled, wait=0.0) as book:                 # free again: opens at once
        assert book.verify() == []


def test_waiting_writer_gets_in_when_the_holder_finishes(filled):
    holder = subprocess.Popen([sys.executable, "-c", textwrap.dedent(f"""
        import duckdb, time
        con = duckdb.connect({str(filled)!r})
        print("holding", flush=True)
        time.sleep(1.0)
        con.close()
    """)], stdout=subprocess.PIPE, text=True)
    assert holder.stdout.readline().strip() == "holding"
    with Ledger.open(filled, wait=20) as book:
        assert len(book.runs()) == 1
    holder.wait(timeout=30)


def test_unmigratable_schema_is_refused(filled):
    con = duckdb.connect(str(filled))
    con.execute("UPDATE meta SET value = '0' WHERE key = 'schema_version'")
    con.close()
    with pytest.raises(LedgerError, match="has schema version 0, which this Backsight cannot migrate"):
        Ledger.open(filled)


@pytest.mark.parametrize("fmt", ["parquet", "csv"])
def test_export_import_round_trip(filled, tmp_path, runner, fmt):
    out = tmp_path / f"export-{fmt}"
    r = runner.invoke(app, ["--ledger", str(filled), "export", str(out), "--format", fmt])
    assert r.exit_code == 0 and r.stdout == f"wrote {len(TABLES)} files to {out}\n"
    new = tmp_path / f"new-{fmt}.duckdb"
    r = runner.invoke(app, ["--ledger", str(new), "import", str(out)])
    assert r.exit_code == 0, r.output
    with Store.open(filled) as a, Store.open(new) as b:
        assert {t: a.table_hash(t) for t in TABLES} == {t: b.table_hash(t) for t in TABLES}
    assert runner.invoke(app, ["--ledger", str(new), "verify"]).exit_code == 0
    r = runner.invoke(app, ["--ledger", str(new), "import", str(out)])
    assert r.exit_code == 1 and r.stderr == f"Error: {new} is not empty; import into a new ledger file (--ledger NEW.duckdb)\n"


def test_csv_export_defuses_formulas(filled, tmp_path):
    out = tmp_path / "csv"
    with Ledger.open(filled, read_only=True) as book:
        book.export(out, fmt="csv")
    series = pd.read_csv(out / "series.csv", dtype=str, keep_default_na=False)["series"]
    risky = [s for s in series if s[:1] in "=+-@\t\r"]
    assert risky == []                               # every risky value now starts with an apostrophe
    assert "'=1+1" in set(series) and "'-north" in set(series) and "''quoted" in set(series)
    runs = pd.read_csv(out / "runs.csv", dtype=str, keep_default_na=False)
    assert runs["model"].tolist() == ["'=cmd|' /C calc'!A0"] and runs["note"].tolist() == ["'-2+3"]
    forecasts = pd.read_csv(out / "forecasts.csv")
    assert (forecasts["point"] == 1.25).all()        # numbers are never prefixed
