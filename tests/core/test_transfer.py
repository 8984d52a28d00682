"""Exports carry a manifest; import takes exactly one export from a folder, refuses two (naming
them) and files that no longer match their manifest; a ledger holding only attributes is not empty."""

from __future__ import annotations

import json
import shutil

import pandas as pd
import pytest

from ledger import Ledger
from ledger.cli import app
from ledger.manifest import MANIFEST_NAME, file_checksum
from ledger.store import SCHEMA_VERSION, TABLES

from tests.helpers import table_hashes


@pytest.fixture
def filled(tmp_path):
    path = tmp_path / "l.duckdb"
    with Ledger.open(path) as book:
        book.record_actuals(pd.DataFrame({"series": ["a", "b"], "period": "2026-01", "actual": [1.0, 2.0]}))
        book.snapshot(pd.DataFrame({"series": ["a", "b"], "period": "2026-02", "forecast": [1.0, 2.0]}),
                      model="m", origin="2026-01")
        book.record_attributes(pd.DataFrame({"series": ["a"], "region": ["north"]}))
    return path


@pytest.mark.parametrize("fmt", ["parquet", "csv"])
def test_export_writes_a_manifest(filled, tmp_path, fmt):
    out = tmp_path / "out"
    with Ledger.open(filled, read_only=True) as book:
        book.export(out, fmt=fmt)
        counts = {t: book.store.con.execute(f"SELECT count(*) FROM {t}").fetchone()[0] for t in TABLES}
        upto = book.store.con.execute("SELECT max(recorded_at) FROM runs").fetchone()[0]
        state = book.store.state_hash(max(upto, book.store.con.execute(
            "SELECT max(recorded_at) FROM actuals").fetchone()[0]))
    body = json.loads((out / MANIFEST_NAME).read_text())
    assert (body["layout"], body["format"], body["schema_version"]) == ("flat", fmt, SCHEMA_VERSION)
    assert body["tables"] == counts and body["state_hash"] == state
    assert {f["path"]: f["sha256"] for f in body["files"]} == {f"{t}.{fmt}": file_checksum(out / f"{t}.{fmt}")
                                                                for t in TABLES}


def test_a_second_export_of_another_format_is_refused(filled, tmp_path, runner):
    out = tmp_path / "out"
    assert runner.invoke(app, ["--ledger", str(filled), "export", str(out)]).exit_code == 0
    r = runner.invoke(app, ["--ledger", str(filled), "export", str(out), "--format", "csv"])
    assert r.exit_code == 1
    assert r.stderr == f"Error: {out} already holds a Parquet export; export into another folder (one folder, one export)\n"


def test_import_refuses_a_folder_holding_two_exports(filled, tmp_path, runner):
    a, b, both = tmp_path / "a", tmp_path / "b", tmp_path / "both"
    with Ledger.open(filled, read_only=True) as book:
        book.export(a, fmt="parquet")
        book.export(b, fmt="csv")
    shutil.copytree(a, both)
    for f in b.iterdir():
        if f.suffix == ".csv":
            shutil.copy(f, both / f.name)
    new = tmp_path / "new.duckdb"
    r = runner.invoke(app, ["--ledger", str(new), "import", str(both)])
    assert r.exit_code == 1
    assert r.stderr == (f"Error: {both} holds more than one export: a Parquet export (meta.parquet, series.parquet, "
                        f"runs.parquet and {len(TABLES) - 3} more) and a CSV export (meta.csv, series.csv, runs.csv "
                        f"and {len(TABLES) - 3} more); move one of them to another folder and import again\n")


def test_import_refuses_files_that_do_not_match_the_manifest(filled, tmp_path, runner):
    out = tmp_path / "out"
    with Ledger.open(filled, read_only=True) as book:
        book.export(out, fmt="csv")
    (out / "actuals.csv").write_text((out / "actuals.csv").read_text().replace("2.0", "3.0"))
    new = tmp_path / "new.duckdb"
    r = runner.invoke(app, ["--ledger", str(new), "import", str(out)])
    assert r.exit_code == 1 and "actuals.csv: " in r.stderr and "do not match the export's manifest" in r.stderr
    with Ledger.open(new, read_only=True) as book:
        assert book.store.con.execute("SELECT count(*) FROM actuals").fetchone() == (0,)


def test_import_into_a_ledger_holding_only_attributes_is_refused(filled, tmp_path, runner):
    out = tmp_path / "out"
    with Ledger.open(filled, read_only=True) as book:
        book.export(out)
    target = tmp_path / "attrs.duckdb"
    with Ledger.open(target) as book:
        book.record_attributes(pd.DataFrame({"series": ["a"], "region": ["north"]}))
    before = table_hashes(target)
    r = runner.invoke(app, ["--ledger", str(target), "import", str(out)])
    assert r.exit_code == 1 and r.stderr == f"Error: {target} is not empty; import into a new ledger file (--ledger NEW.duckdb)\n"
    assert table_hashes(target) == before


def test_corrupt_export_file_gives_one_line(filled, tmp_path, runner):
    out = tmp_path / "out"
    with Ledger.open(filled, read_only=True) as book:
        book.export(out)
    (out / MANIFEST_NAME).unlink()              # an export from before manifests, then damaged
    (out / "runs.parquet").write_bytes(b"PAR1 not really")
    r = runner.invoke(app, ["--ledger", str(tmp_path / "new.duckdb"), "import", str(out)])
    assert r.exit_code == 1 and r.stderr.startswith("Error: the export's runs cannot be read (") and \
        r.stderr.count("\n") == 1
