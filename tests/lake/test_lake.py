"""The partitioned Parquet lake: layout, manifest, incremental exports, import and verify."""

from __future__ import annotations

import json

import pandas as pd
import pytest

from ledger import Ledger
from ledger.cli import app
from ledger.lake import WHOLE_TABLES, escape_partition_value, export_lake
from ledger.manifest import MANIFEST_NAME, file_checksum, read_manifest
from ledger.store import SCHEMA_VERSION, TABLES, Store

from ..helpers import table_hashes

HOSTILE = ["=1+1", "-north", "'quoted", "a,b", "North/Hoses", "x=y", "ünïcode ✓", "<b>b</b>"]
MODEL = "=cmd|' /C calc'!A0 / a=b"


def _run(series, origin, value, **extra):
    return pd.DataFrame({"series": series, "period": pd.Period(origin, "M").__add__(1).strftime("%Y-%m"),
                         "forecast": value, "lower_80": value - 1, "upper_80": value + 1, "q10": value - 2, **extra})


@pytest.fixture
def book_path(tmp_path):
    path = tmp_path / "l.duckdb"
    with Ledger.open(path) as book:
        book.record_actuals(pd.DataFrame({"series": HOSTILE, "period": "2026-01", "actual": range(len(HOSTILE))}))
        book.snapshot(_run(HOSTILE, "2026-01", 1.25), model=MODEL, origin="2026-01", note="-2+3")
        book.snapshot(_run(HOSTILE, "2026-02", 2.5), model="plain", origin="2026-02")
    return path


def _counts(path) -> dict[str, int]:
    with Store.open(path, read_only=True) as store:
        return {t: store.con.execute(f"SELECT count(*) FROM {t}").fetchone()[0] for t in TABLES}


def test_partition_values_are_escaped_as_hive_does():
    # Hive/Spark escape these characters in partition folder names as %XX (Spark's
    # ExternalCatalogUtils.escapePathName; the character set from memory).
    assert escape_partition_value("a/b=c:d%") == "a%2Fb%3Dc%3Ad%25"
    assert escape_partition_value("incumbent-hw") == "incumbent-hw"


def test_lake_layout_and_manifest(book_path, tmp_path, runner):
    lake = tmp_path / "lake"
    r = runner.invoke(app, ["--ledger", str(book_path), "export", str(lake), "--partition"])
    assert r.exit_code == 0, r.output
    manifest = read_manifest(lake)
    assert r.stdout == (f"wrote {len(manifest.files)} files to {lake} (2 new runs, {len(HOSTILE)} new actual "
                        "revisions; export 1)\n")
    paths = {f.path for f in manifest.files}
    escaped = escape_partition_value(MODEL)
    assert f"forecasts/model={escaped}/origin_year=2026/origin_month=01/part-00001.parquet" in paths
    assert "bounds/model=plain/origin_year=2026/origin_month=02/part-00001.parquet" in paths
    assert "quantiles/model=plain/origin_year=2026/origin_month=02/part-00001.parquet" in paths
    assert any(p.startswith("actuals/recorded_month=") for p in paths)
    assert manifest.tables == {t: n for t, n in _counts(book_path).items() if n or t in WHOLE_TABLES}
    for f in manifest.files:
        assert file_checksum(lake / f.path) == f.sha256
    with Store.open(book_path, read_only=True) as store:
        assert manifest.state_hash == store.state_hash(pd.Timestamp(manifest.recorded_up_to).to_pydatetime())
    body = json.loads((lake / MANIFEST_NAME).read_text())
    assert body["schema_version"] == SCHEMA_VERSION and body["tables"]["forecasts"] == 2 * len(HOSTILE)


def test_lake_import_rebuilds_the_same_ledger(book_path, tmp_path, runner):
    lake = tmp_path / "lake"
    assert runner.invoke(app, ["--ledger", str(book_path), "export", str(lake), "--partition"]).exit_code == 0
    assert runner.invoke(app, ["verify", str(lake)]).stdout == f"{lake}: sound\n"
    new = tmp_path / "new.duckdb"
    r = runner.invoke(app, ["--ledger", str(new), "import", str(lake)])
    assert r.exit_code == 0, r.output
    assert table_hashes(new) == table_hashes(book_path)


def test_second_export_writes_only_what_is_new(book_path, tmp_path):
    lake = tmp_path / "lake"
    with Ledger.open(book_path) as book:
        first = book.export_lake(lake)
        book.record_actuals(pd.DataFrame({"series": HOSTILE[:2], "period": "2026-01", "actual": [50.0, 60.0]}))
        book.snapshot(_run(HOSTILE, "2026-02", 3.0), model="plain", origin="2026-02", supersede=True)
        second = book.export_lake(lake)
    assert (first.runs_added, second.runs_added, second.revisions_added) == (2, 1, 2)
    new_big = sorted(p.relative_to(lake).as_posix() for p in second.written
                     if p.parts[len(lake.parts)] not in WHOLE_TABLES)
    assert new_big == ["actuals/recorded_month=" + new_big[0].split("=")[1].split("/")[0] + "/part-00002.parquet",
                       "bounds/model=plain/origin_year=2026/origin_month=02/part-00002.parquet",
                       "forecasts/model=plain/origin_year=2026/origin_month=02/part-00002.parquet",
                       "quantiles/model=plain/origin_year=2026/origin_month=02/part-00002.parquet"]
    assert not (lake / "runs" / "part-00001.parquet").exists()       # replaced whole, old file removed
    manifest = read_manifest(lake)
    assert manifest.exports == 2 and manifest.tables["runs"] == 3
    assert manifest.tables == {t: n for t, n in _counts(book_path).items() if n or t in WHOLE_TABLES}
    new = tmp_path / "new.duckdb"
    with Ledger.open(new) as other:
        other.import_export(lake)
    assert table_hashes(new) == table_hashes(book_path)              # superseded_by carried over too
    assert Ledger.verify_export(lake) == []


def test_a_failed_export_leaves_the_previous_lake(book_path, tmp_path, monkeypatch):
    lake = tmp_path / "lake"
    with Ledger.open(book_path) as book:
        book.export_lake(lake)
        before = (lake / MANIFEST_NAME).read_bytes()
        files = sorted(p for p in lake.rglob("*") if p.is_file())
        book.snapshot(_run(HOSTILE, "2026-03", 4.0), model="plain", origin="2026-03")

        def crash(*_):
            raise OSError("disk full")
        monkeypatch.setattr("ledger.lake.write_manifest", crash)
        with pytest.raises(OSError, match="disk full"):
            book.export_lake(lake)
    assert (lake / MANIFEST_NAME).read_bytes() == before
    assert sorted(p for p in lake.rglob("*") if p.is_file()) == files
    assert Ledger.verify_export(lake) == []


def test_tampered_lake_is_reported_and_not_imported(book_path, tmp_path, runner):
    lake = tmp_path / "lake"
    with Ledger.open(book_path, read_only=True) as book:
        book.export_lake(lake)
    victim = next(f for f in read_manifest(lake).files if f.table == "forecasts")
    data = bytearray((lake / victim.path).read_bytes())
    data[len(data) // 2] ^= 0xFF
    (lake / victim.path).write_bytes(bytes(data))
    r = runner.invoke(app, ["verify", str(lake)])
    assert r.exit_code == 1 and r.stdout == f"problem: export file: {victim.path}: checksum differs from the manifest\n"
    new = tmp_path / "new.duckdb"
    r = runner.invoke(app, ["--ledger", str(new), "import", str(lake)])
    assert r.exit_code == 1
    assert r.stderr == (f"Error: {lake}: {victim.path}: checksum differs from the manifest; run backsight verify "
                        f"{lake}; nothing was imported\n")
    assert _counts(new)["runs"] == 0


def test_lake_of_another_ledger_is_refused(book_path, tmp_path):
    lake = tmp_path / "lake"
    with Ledger.open(book_path, read_only=True) as book:
        book.export_lake(lake)
    with Ledger.open(tmp_path / "other.duckdb") as other:
        other.record_actuals(pd.DataFrame({"series": ["s"], "period": "2026-01", "actual": [1.0]}))
        with pytest.raises(Exception, match="holds the lake of another ledger"):
            other.export_lake(lake)


def test_partition_needs_parquet(book_path, tmp_path, runner):
    r = runner.invoke(app, ["--ledger", str(book_path), "export", str(tmp_path / "x"), "--partition", "--format", "csv"])
    assert r.exit_code == 2 and "--partition writes Parquet" in r.output
