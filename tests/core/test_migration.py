"""Schema migration: an older ledger is brought to the current schema once, after one backup,
under the write lock, and ends up exactly as if the current Backsight had written it."""

from __future__ import annotations

import os
import subprocess
import sys

import duckdb
import pandas as pd
import pytest

from ledger import Ledger
from ledger.cli import app
from ledger.hashing import run_rows
from ledger.migrations import v1_run_hash
from ledger.store import SCHEMA_VERSION, TABLES, Store

from tests.helpers import REPO, table_hashes


@pytest.fixture
def filled(tmp_path):
    path = tmp_path / "l.duckdb"
    with Ledger.open(path) as book:
        book.record_actuals(pd.DataFrame({"series": ["a", "b;c", "b"], "period": "2026-01", "actual": [1, 2, -0.0]}))
        book.record_actuals(pd.DataFrame({"series": ["a"], "period": "2026-01", "actual": [9.5]}))
        book.snapshot(pd.DataFrame({"series": ["a", "b"], "period": "2026-02", "forecast": 1.25, "lower_80": 0.5,
                                    "upper_80": 2.0, "q10": 0.25, "q90": 2.5}), model="m", origin="2026-01")
        book.record_attributes(pd.DataFrame({"series": ["a"], "region": ["north"]}))
    return path


def downgrade(path, version: int) -> None:
    """Rewrite a current ledger as Backsight wrote schema ``version`` (1 to 4)."""
    con = duckdb.connect(str(path))
    con.execute("DROP TABLE overrides")                                        # new in version 5
    for table in ("events", "reviews", "review_findings", "review_models"):   # new in version 4
        if version <= 3:
            con.execute(f"DROP TABLE {table}")
    if version <= 2:
        con.execute("DROP TABLE actual_writes")
        con.execute("ALTER TABLE actuals DROP COLUMN chain_hash")
        for run_id, model, freq, origin_index in con.execute(
                "SELECT run_id, model, frequency, origin_index FROM runs").fetchall():
            part, levels, taus = run_rows(con, run_id)
            con.execute("UPDATE runs SET content_hash = ? WHERE run_id = ?",
                        [v1_run_hash(model, freq, origin_index, part, levels, taus), run_id])
    if version == 1:
        con.execute("DROP TABLE attributes")
    con.execute("UPDATE meta SET value = ? WHERE key = 'schema_version'", [str(version)])
    con.close()


@pytest.mark.parametrize("version", [1, 2, 3, 4])
def test_older_schema_is_migrated_after_a_backup(filled, runner, version):
    before = table_hashes(filled)
    downgrade(filled, version)
    r = runner.invoke(app, ["--ledger", str(filled), "runs", "--format", "csv"])
    assert r.exit_code == 0, r.output
    backup = filled.with_name(filled.name + f".schema-v{version}.bak")
    assert r.stderr == f"migrated {filled} from schema version {version}; the old file is kept at {backup}\n"
    old = duckdb.connect(str(backup), read_only=True)
    assert old.execute("SELECT value FROM meta WHERE key = 'schema_version'").fetchall() == [(str(version),)]
    old.close()
    after = table_hashes(filled)
    # the re-hash gives back exactly what the current Backsight writes; attributes are new in version 2
    expect = {t: h for t, h in before.items() if not (version == 1 and t == "attributes")}
    assert {t: after[t] for t in expect} == expect
    with Ledger.open(filled) as book:
        assert book.store.get_setting("schema_version") == str(SCHEMA_VERSION)
        assert book.verify() == []
        again = book.snapshot(pd.DataFrame({"series": ["b", "a"], "period": "2026-02", "forecast": 1.25,
                                            "lower_80": 0.5, "upper_80": 2.0, "q10": 0.25, "q90": 2.5}),
                              model="m", origin="2026-01")
        assert [r.status for r in again.runs] == ["unchanged"]    # re-sending is still a no-op


def test_a_version_4_ledger_gets_an_empty_override_relation_it_can_record(filled):
    with Ledger.open(filled) as book:
        book.snapshot(pd.DataFrame({"series": ["a"], "period": "2026-02", "forecast": 2.0}), model="o", origin="2026-01")
    downgrade(filled, 4)
    with Ledger.open(filled) as book:
        assert book.store.migrated[0] == 4
        assert book.overrides() == {}
        assert book.record_overrides({"o": "m"}).changed == 1
        assert book.overrides() == {"o": "m"} and book.verify() == []
    old = duckdb.connect(str(filled.with_name(filled.name + ".schema-v4.bak")), read_only=True)
    tables = {r[0] for r in old.execute("SELECT table_name FROM information_schema.tables").fetchall()}
    old.close()
    assert "events" in tables and "overrides" not in tables           # the backup is the version-4 file


def test_a_run_damaged_before_migration_stays_reported(filled):
    downgrade(filled, 2)
    con = duckdb.connect(str(filled))
    con.execute("UPDATE forecasts SET point = 7 WHERE series = 'a'")
    con.close()
    with Ledger.open(filled) as book:
        problems = [str(p) for p in book.verify()]
    assert len(problems) == 1 and problems[0].startswith("content hash: run ")


CHILD = """
import sys
from ledger.cli import app
sys.argv = ["backsight", "--ledger", sys.argv[1], "--wait", "60", "runs", "--format", "csv"]
app()
"""


def test_parallel_commands_on_an_old_ledger_migrate_once(filled, tmp_path):
    downgrade(filled, 2)
    env = dict(os.environ, PYTHONPATH=str(REPO))
    children = [subprocess.Popen([sys.executable, "-c", CHILD, str(filled)], stdout=subprocess.PIPE,
                                 stderr=subprocess.PIPE, text=True, env=env) for _ in range(4)]
    outs = [c.communicate(timeout=120) for c in children]
    assert [c.returncode for c in children] == [0] * 4, outs
    notes = [err for _, err in outs if err.startswith("migrated")]
    assert len(notes) == 1, outs                                  # one migration …
    assert sorted(p.name for p in tmp_path.iterdir() if ".bak" in p.name) == ["l.duckdb.schema-v2.bak"]  # … one backup
    assert all(out.splitlines()[0].startswith("run_id,") for out, _ in outs)


def test_parallel_first_use_creates_the_ledger_once(tmp_path):
    path = tmp_path / "new.duckdb"
    env = dict(os.environ, PYTHONPATH=str(REPO))
    files = []
    for i in range(10):
        f = tmp_path / f"run{i}.csv"
        f.write_text(f"series,period,forecast\ns{i},2026-02,{i}\n")
        files.append(f)
    code = ("import sys; from ledger.cli import app; sys.argv = ['backsight', '--ledger', sys.argv[1], '--wait', "
            "'120', 'snapshot', sys.argv[2], '--model', sys.argv[3], '--origin', '2026-01']; app()")
    children = [subprocess.Popen([sys.executable, "-c", code, str(path), str(f), f"m{i}"], stdout=subprocess.PIPE,
                                 stderr=subprocess.PIPE, text=True, env=env) for i, f in enumerate(files)]
    outs = [c.communicate(timeout=300) for c in children]
    assert [c.returncode for c in children] == [0] * 10, outs
    with Ledger.open(path, create=False, read_only=True) as book:
        assert sorted(book.runs()["model"]) == sorted(f"m{i}" for i in range(10))
        assert book.verify() == []
