"""report writes only into a new or empty folder, or one a report wrote before (its marker file);
otherwise it refuses naming a file, and nothing of the user's is overwritten."""

from __future__ import annotations

import pandas as pd
import pytest

from ledger import Ledger
from ledger.cli import app
from reports.names import MARKER

from tests.helpers import table_hashes


@pytest.fixture
def tiny(tmp_path):
    path = tmp_path / "l.duckdb"
    with Ledger.open(path) as book:
        book.record_actuals(pd.DataFrame({"series": ["a"] * 3, "period": ["2025-12", "2026-01", "2026-02"],
                                          "actual": [1.0, 2.0, 3.0]}))
        book.snapshot(pd.DataFrame({"series": ["a"], "period": ["2026-02"], "forecast": [2.5]}),
                      model="m", origin="2026-01")
    return path


def test_a_folder_of_the_users_is_refused(tiny, tmp_path, runner):
    out = tmp_path / "mine"
    out.mkdir()
    (out / "index.html").write_text("my own page")
    r = runner.invoke(app, ["--ledger", str(tiny), "report", str(out), "--as-of", "2026-12-01"])
    assert r.exit_code == 1
    assert r.stderr == (f"Error: {out} holds 'index.html', which no report wrote; give a new or empty folder "
                        "(a report writes only where it wrote before)\n")
    assert (out / "index.html").read_text() == "my own page" and sorted(p.name for p in out.iterdir()) == ["index.html"]


def test_a_ledger_named_like_a_page_is_never_overwritten(tmp_path, tiny, runner):
    out = tmp_path / "site"
    out.mkdir()
    ledger = out / "index.html"
    ledger.write_bytes(tiny.read_bytes())
    r = runner.invoke(app, ["--ledger", str(ledger), "report", str(out), "--as-of", "2026-12-01"])
    assert r.exit_code == 1 and "holds 'index.html', which no report wrote" in r.stderr
    assert ledger.read_bytes() == tiny.read_bytes()


def test_new_empty_and_own_folders_are_written(tiny, tmp_path, runner):
    for out in (tmp_path / "new" / "deeper", tmp_path / "empty"):
        if out.name == "empty":
            out.mkdir()
        first = runner.invoke(app, ["--ledger", str(tiny), "report", str(out), "--as-of", "2026-12-01"])
        assert first.exit_code == 0, first.output
        assert (out / MARKER).is_file() and (out / "index.html").is_file()
        again = runner.invoke(app, ["--ledger", str(tiny), "report", str(out), "--as-of", "2026-12-01"])
        assert again.exit_code == 0, again.output      # its own folder: written again


def test_outdir_that_is_a_file(tiny, tmp_path, runner):
    target = tmp_path / "plain"
    target.write_text("x")
    before = table_hashes(tiny)
    r = runner.invoke(app, ["--ledger", str(tiny), "report", str(target)])
    assert r.exit_code == 1 and r.stdout == ""
    assert r.stderr == f"Error: {target} is a file, not a folder; give a new or empty folder for the report\n"
    assert target.read_text() == "x" and table_hashes(tiny) == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["l.duckdb", "plain"]      # no partial folder left


def test_a_report_folder_is_replaced_whole_but_never_with_a_users_file(tiny, tmp_path, runner):
    # the report replaces its folder whole (all or nothing), so a file no report writes, added
    # to a report folder later, or the ledger moved into it, stops the report instead of being lost
    out = tmp_path / "site"
    args = ["--ledger", str(tiny), "report", str(out), "--as-of", "2026-12-01"]
    assert runner.invoke(app, args).exit_code == 0
    (out / "stale.html").write_text("a page an older report wrote")
    assert runner.invoke(app, args).exit_code == 0
    assert not (out / "stale.html").exists() and (out / "index.html").is_file()       # nothing stale survives
    (out / "notes.txt").write_text("mine")
    r = runner.invoke(app, args)
    assert r.exit_code == 1 and r.stderr.startswith(f"Error: {out} holds 'notes.txt', which no report wrote"), r.stderr
    assert (out / "notes.txt").read_text() == "mine"
    (out / "notes.txt").unlink()
    inside = out / "l.duckdb.html"             # a ledger named like a page, inside its own report folder
    inside.write_bytes(tiny.read_bytes())
    r = runner.invoke(app, ["--ledger", str(inside), "report", str(out), "--as-of", "2026-12-01"])
    assert r.exit_code == 1 and r.stderr.startswith(f"Error: the ledger {inside} is inside {out}"), r.stderr
    assert inside.read_bytes() == tiny.read_bytes()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["l.duckdb", "site"]
