"""Operating-system errors become one `Error:` line naming the path and what to do (exit 1), in
one place (ledger.errors.describe_os_error), and the ledger is left unchanged. Disk full is
forced for real on a 3 MB tmpfs (in a private mount namespace); the rest by real paths or a
patched call where a root test process cannot provoke them."""

from __future__ import annotations

import errno
import hashlib
import json
import os
import shutil
import subprocess
import sys
import textwrap

import duckdb
import pandas as pd
import pytest

from ledger import Ledger
from ledger.cli import app
from ledger.errors import describe_os_error, naming_file

from tests.helpers import REPO, table_hashes


@pytest.fixture
def base(tmp_path):
    path = tmp_path / "l.duckdb"
    with Ledger.open(path) as book:
        book.record_actuals(pd.DataFrame({"series": ["a"], "period": ["2026-01"], "actual": [1.0]}))
    return path


@pytest.mark.parametrize("code,needle", [
    (errno.ENOSPC, "no space is left on the device holding /x/f; free some space"),
    (errno.EACCES, "permission denied for /x/f; make the folder /x writable, or use another folder"),
    (errno.ENOTDIR, "a part of /x/f is a file, not a folder"),
    (errno.EISDIR, "/x/f is a folder; give a file"),
    (errno.EEXIST, "/x/f already exists and is not a folder"),
    (errno.EROFS, "/x/f is on a read-only file system"),
])
def test_each_os_error_is_worded_with_its_path(code, needle):
    assert describe_os_error(OSError(code, os.strerror(code), "/x/f")).startswith(needle)
    # DuckDB reports the same errors in its own words, the path quoted (sometimes inside JSON)
    text = f'IO Error: {{"exception_message":"Could not write file \\"/x/f\\": {os.strerror(code)}"}}'
    if code != errno.EEXIST:
        assert describe_os_error(duckdb.IOException(text)).startswith(needle)
    assert describe_os_error(ValueError("a bug, not the file system")) is None


def test_a_write_that_names_no_file_gets_the_path():
    # a failed write() or close() on an open file carries no file name; the path is added
    with pytest.raises(OSError) as info, naming_file("/x/page.html"):
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))
    assert describe_os_error(info.value).startswith("no space is left on the device holding /x/page.html;")
    with pytest.raises(OSError) as info, naming_file("/x/page.html"):
        raise OSError(errno.EACCES, os.strerror(errno.EACCES), "/y/other")
    assert info.value.filename == "/y/other"          # a name it already has is kept


def _one_error_line(result) -> str:
    assert result.exit_code == 1, result.output
    assert result.stdout == ""
    lines = result.stderr.splitlines()
    assert len(lines) == 1 and lines[0].startswith("Error: "), result.stderr
    return lines[0]


def test_permission_denied_on_the_ledger_folder(base, runner, monkeypatch, tmp_path):
    # a root test process is never refused by chmod, so DuckDB's refusal is patched in
    before = table_hashes(base)

    def refuse(path, read_only=False):
        raise duckdb.IOException(f'IO Error: Cannot open file "{path}.wal": Permission denied')

    monkeypatch.setattr("ledger.store.duckdb.connect", refuse)
    data = tmp_path / "a.csv"
    data.write_text("series,period,actual\na,2026-02,2\n")
    line = _one_error_line(runner.invoke(app, ["--ledger", str(base), "actuals", str(data)]))
    assert line == (f"Error: permission denied for {base}.wal; a ledger writes its .wal file beside itself: "
                    f"make the folder {base.parent} writable, or move the ledger to a writable folder")
    monkeypatch.undo()
    assert table_hashes(base) == before


def test_unwritable_ledger_folder_for_real(base, tmp_path):
    # a real refusal: the folder is made read-only and root's override is dropped (setpriv, _cli)
    before = table_hashes(base)
    data = tmp_path / "a.csv"
    data.write_text("series,period,actual\na,2026-02,2\n")
    base.parent.chmod(0o555)
    try:
        line = _only_error_line(_cli("--ledger", str(base), "actuals", str(data), tmp_path=tmp_path))
    finally:
        base.parent.chmod(0o755)
    assert line.startswith(f"Error: permission denied for {base}"), line
    assert f"make the folder {base.parent} writable" in line and ".duckdb" not in line.split(";", 1)[1], line
    assert table_hashes(base) == before


def test_unwritable_export_folder(base, runner, monkeypatch, tmp_path):
    before = table_hashes(base)
    out = tmp_path / "locked" / "out"

    def refuse(self, *args, **kwargs):
        raise PermissionError(errno.EACCES, "Permission denied", str(self))

    monkeypatch.setattr("pathlib.Path.mkdir", refuse)
    line = _one_error_line(runner.invoke(app, ["--ledger", str(base), "export", str(out)]))
    monkeypatch.undo()
    assert line == f"Error: permission denied for {out}; make the folder {out.parent} writable, or use another folder"
    assert table_hashes(base) == before


def test_outdir_that_is_a_file(base, runner, tmp_path):
    before = table_hashes(base)
    target = tmp_path / "a-file"
    target.write_text("mine")
    line = _one_error_line(runner.invoke(app, ["--ledger", str(base), "export", str(target)]))
    assert line == f"Error: {target} already exists and is not a folder; give a new or empty folder"
    assert target.read_text() == "mine" and table_hashes(base) == before


def test_ledger_below_a_file(runner, tmp_path):
    blocker = tmp_path / "plain"
    blocker.write_text("x")
    data = tmp_path / "a.csv"
    data.write_text("series,period,actual\na,2026-02,2\n")
    line = _one_error_line(runner.invoke(app, ["--ledger", str(blocker / "l.duckdb"), "actuals", str(data)]))
    assert "not a folder" in line or "Not a directory" in line, line


def test_fifo_and_stdin_never_block(base, runner, tmp_path):
    fifo = tmp_path / "f.csv"
    os.mkfifo(fifo)
    before = table_hashes(base)
    for path, name in ((fifo, "f.csv"), ("/dev/stdin", "stdin")):
        line = _one_error_line(runner.invoke(app, ["--ledger", str(base), "actuals", str(path)]))
        assert line == (f"Error: {name}: this is not a regular file but a pipe, a device or standard input; "
                        "save the data to a file and give that")
    assert table_hashes(base) == before


def test_empty_file_left_by_a_kill_during_creation(runner, tmp_path):
    path = tmp_path / "l.duckdb"
    path.touch()
    os.utime(path, (0, 0))                     # an old empty file: a left-over, not a creation under way
    line = _one_error_line(runner.invoke(app, ["--ledger", str(path), "runs"]))
    assert line == (f"Error: {path} is empty (0 bytes), probably left by a command stopped while creating it; "
                    "delete it and run the command again")


SCRIPT = """
set -e
mount -t tmpfs -o size=3m tmpfs "$1"
cd "$3"
printf 'series,period,actual\\na,2026-01,1\\n' > a.csv
"$PY" -m ledger --ledger "$1/l.duckdb" actuals a.csv > /dev/null
"$PY" -c "$HASHES" "$1/l.duckdb" > before.json
set +e
"$PY" -m ledger --ledger "$1/l.duckdb" snapshot "$2" --model m --origin 2025-12 2> snap.err; echo $? > snap.rc
"$PY" -m ledger --ledger "$1/l.duckdb" export "$1/out" 2> export.err; echo $? > export.rc
set -e
"$PY" -c "$HASHES" "$1/l.duckdb" > after.json
"$PY" -m ledger --ledger "$1/l.duckdb" verify > verify.out; echo $? > verify.rc
cat before.json after.json snap.rc snap.err export.rc export.err verify.rc verify.out | "$PY" -c "
import json, sys; lines = sys.stdin.read().splitlines(); print(json.dumps(lines))"
"""
HASHES = "import sys, json; from tests.helpers import table_hashes; print(json.dumps(table_hashes(sys.argv[1])))"


def test_disk_full_during_a_write_and_an_export(tmp_path):
    if shutil.which("unshare") is None or subprocess.run(["unshare", "-rm", "true"]).returncode != 0:
        pytest.fail("this test needs `unshare -rm` to mount a private tmpfs (util-linux, user namespaces)")
    big = tmp_path / "big.csv"
    rows = ["series,period,forecast,lower_80,upper_80"] + [
        f"s{i % 3000},{2026 + i // 3000 // 12}-{i // 3000 % 12 + 1:02d},{i}.5,{i},{i + 1}" for i in range(150_000)]
    big.write_text("\n".join(rows) + "\n")
    mount = tmp_path / "small"
    mount.mkdir()
    notes = tmp_path / "notes"           # the script's own files, outside the full disk
    notes.mkdir()
    env = dict(os.environ, PYTHONPATH=str(REPO), PY=sys.executable, HASHES=HASHES)
    done = subprocess.run(["unshare", "-rm", "sh", "-c", textwrap.dedent(SCRIPT), "sh", str(mount), str(big), str(notes)],
                          capture_output=True, text=True, env=env, cwd=REPO, timeout=300)
    assert done.returncode == 0, done.stderr
    before, after, snap_rc, snap_err, export_rc, export_err, verify_rc, verify_out = json.loads(done.stdout)
    assert before == after                                           # the ledger is unchanged
    where = f"{mount}/"
    assert (snap_rc, export_rc) == ("1", "1")
    assert snap_err.startswith(f"Error: no space is left on the device holding {where}"), snap_err
    assert export_err.startswith(f"Error: no space is left on the device holding {where}"), export_err
    assert verify_rc == "0" and verify_out.endswith("sound")


def test_a_reader_that_leaves_ends_the_command_quietly(tmp_path):
    """`backsight scores ... | head -1`: the reader takes one line and closes the pipe; the command
    stops with exit 1 and says nothing (no traceback, no Error line about a file never named), in
    every output format."""
    path = tmp_path / "l.duckdb"
    series = [f"series-{i:04d}" for i in range(2500)]
    months = [f"2025-{m:02d}" for m in range(1, 13)]
    with Ledger.open(path) as book:
        book.record_actuals(pd.DataFrame({"series": [s for s in series for _ in months],
                                          "period": months * len(series), "actual": 10.0}))
        book.snapshot(pd.DataFrame({"series": series, "period": "2025-12", "forecast": 9.0}),
                      model="m", origin="2025-11")
    # 170 kB of CSV and more of the others, far more than a pipe holds (64 kB); unbuffered, the reader
    # takes exactly one line (a buffered one, like head's 128 kB reads, could swallow the whole
    # output), so the command is still writing when the reader has gone
    for fmt, head in (("table", b"Scores"), ("csv", b"series,n,mae"), ("json", b"[")):
        child = subprocess.Popen([sys.executable, "-m", "ledger", "--ledger", str(path), "scores", "--by", "series",
                                  "--format", fmt], stdout=subprocess.PIPE, stderr=subprocess.PIPE, bufsize=0,
                                 env=dict(os.environ, PYTHONPATH=str(REPO), COLUMNS="120"), cwd=REPO)
        first = child.stdout.readline()
        child.stdout.close()
        err = child.stderr.read()
        assert (child.wait(timeout=120), err) == (1, b""), fmt
        assert first.startswith(head), (fmt, first)


def _cli(*args, tmp_path) -> subprocess.CompletedProcess:
    """``backsight ARGS`` in a fresh process; as root, without the capabilities that let root write
    into any folder (so a folder of mode 555 refuses it, as it refuses everyone else)."""
    prefix = []
    if os.geteuid() == 0:
        if shutil.which("setpriv") is None:
            pytest.fail("this test needs setpriv (util-linux) to run a command as root without CAP_DAC_OVERRIDE")
        prefix = ["setpriv", "--bounding-set=-dac_override,-dac_read_search,-fowner"]
    return subprocess.run([*prefix, sys.executable, "-m", "ledger", *args], capture_output=True, text=True,
                          env=dict(os.environ, PYTHONPATH=str(REPO)), cwd=tmp_path, timeout=300)


def _only_error_line(done: subprocess.CompletedProcess) -> str:
    assert done.returncode == 1, done.stderr
    assert done.stdout == ""
    lines = done.stderr.splitlines()
    assert len(lines) == 1 and lines[0].startswith("Error: "), done.stderr
    return lines[0]


@pytest.fixture
def small_report_ledger(tmp_path):
    """A ledger with two series, five runs and bounds: a report of about 20 files, 300 kB."""
    path = tmp_path / "r.duckdb"
    months = [f"2025-{m:02d}" for m in range(1, 13)]
    with Ledger.open(path) as book:
        book.record_actuals(pd.DataFrame({"series": ["a"] * 12 + ["b"] * 12, "period": months * 2,
                                          "actual": [float(i % 5 + 1) for i in range(24)]}))
        for o in range(6, 11):
            book.snapshot(pd.DataFrame({"series": ["a", "b"], "period": months[o + 1], "forecast": 2.5,
                                        "lower_80": 1.0, "upper_80": 4.0}), model="m", origin=months[o])
    return path


def test_unwritable_report_folder(small_report_ledger, tmp_path):
    before = table_hashes(small_report_ledger)
    empty = tmp_path / "empty"
    empty.mkdir()
    locked = tmp_path / "locked"
    locked.mkdir()
    for folder in (empty, locked):
        folder.chmod(0o555)
    try:
        line = _only_error_line(_cli("--ledger", str(small_report_ledger), "report", str(empty), tmp_path=tmp_path))
        assert line == f"Error: permission denied for {empty}; make the folder {empty} writable, or use another folder"
        new = locked / "new"
        line = _only_error_line(_cli("--ledger", str(small_report_ledger), "report", str(new), tmp_path=tmp_path))
        assert line == f"Error: permission denied for {new}; make the folder {locked} writable, or use another folder"
        assert list(empty.iterdir()) == [] and list(locked.iterdir()) == []
    finally:
        for folder in (empty, locked):
            folder.chmod(0o755)
    assert table_hashes(small_report_ledger) == before


def _file_hash(path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def test_unwritable_backup_folder_stops_the_migration(tmp_path):
    from tests.core.test_migration import downgrade

    folder = tmp_path / "old"
    folder.mkdir()
    path = folder / "l.duckdb"
    with Ledger.open(path) as book:
        book.record_actuals(pd.DataFrame({"series": ["a", "b"], "period": "2026-01", "actual": [1.0, 2.0]}))
    downgrade(path, 3)
    before = _file_hash(path)          # byte for byte: opening it with Backsight would migrate it
    folder.chmod(0o555)                # no room for the backup copy beside it
    try:
        line = _only_error_line(_cli("--ledger", str(path), "runs", tmp_path=tmp_path))
    finally:
        folder.chmod(0o755)
    assert line == (f"Error: permission denied for {path}.schema-v3.bak; make the folder {folder} writable, "
                    "or use another folder"), line
    assert sorted(p.name for p in folder.iterdir()) == ["l.duckdb"] and _file_hash(path) == before
    done = _cli("--ledger", str(path), "runs", tmp_path=tmp_path)      # writable again: migrates, one backup
    assert done.returncode == 0 and f"the old file is kept at {path}.schema-v3.bak" in done.stderr


REPORT_SCRIPT = """
set -e
mount -t tmpfs -o size=$4 tmpfs "$1"
"$PY" -m ledger --ledger "$2" report "$1/site" --as-of 2100-01-01 > /dev/null
find "$1" -type f | sort | xargs sha256sum > "$3/before.txt"
set +e
"$PY" -m ledger --ledger "$2" report "$1/site" --as-of 2100-01-02 > "$3/report.out" 2> "$3/report.err"
echo $? > "$3/report.rc"
set -e
find "$1" | sort > "$3/listing.txt"
find "$1" -type f | sort | xargs sha256sum > "$3/after.txt"
"""


def test_disk_full_during_a_report_keeps_the_old_one(small_report_ledger, tmp_path):
    """A real full disk (a tmpfs with room for one report but not two): the second report fails with
    one Error line naming the page in OUTDIR it was writing; the first report is intact, byte for
    byte, and no hidden partial folder is left."""
    if shutil.which("unshare") is None or subprocess.run(["unshare", "-rm", "true"]).returncode != 0:
        pytest.fail("this test needs `unshare -rm` to mount a private tmpfs (util-linux, user namespaces)")
    before = table_hashes(small_report_ledger)
    probe = tmp_path / "probe"
    assert _cli("--ledger", str(small_report_ledger), "report", str(probe), "--as-of", "2100-01-01",
                tmp_path=tmp_path).returncode == 0
    size = sum(p.stat().st_size + 4096 for p in probe.rglob("*"))     # a page per file at most on tmpfs
    mount = tmp_path / "small"
    mount.mkdir()
    notes = tmp_path / "notes"
    notes.mkdir()
    env = dict(os.environ, PYTHONPATH=str(REPO), PY=sys.executable)
    done = subprocess.run(["unshare", "-rm", "sh", "-c", textwrap.dedent(REPORT_SCRIPT), "sh", str(mount),
                           str(small_report_ledger), str(notes), f"{size * 3 // 2 // 1024}k"],
                          capture_output=True, text=True, env=env, cwd=REPO, timeout=300)
    assert done.returncode == 0, done.stderr
    rc, out, err = ((notes / f"report.{k}").read_text() for k in ("rc", "out", "err"))
    assert (rc.strip(), out) == ("1", "")
    lines = err.splitlines()
    assert len(lines) == 1, err
    assert lines[0].startswith(f"Error: no space is left on the device holding {mount}/site/"), err
    assert "free some space" in lines[0]
    assert (notes / "after.txt").read_text() == (notes / "before.txt").read_text()   # the old report, unchanged
    listing = (notes / "listing.txt").read_text().splitlines()
    assert listing[:2] == [str(mount), f"{mount}/site"] and all(p.startswith(f"{mount}/site") for p in listing[1:])
    assert table_hashes(small_report_ledger) == before


def test_any_error_mid_report_leaves_the_old_report(small_report_ledger, tmp_path, monkeypatch):
    """A failure part-way (here the fifth page write raises ENOSPC, patched) leaves the report
    written before exactly as it was, and no temporary folder beside it."""
    from reports import render_report
    import reports.tables

    out = tmp_path / "site"
    render_report(small_report_ledger, out, as_of="2100-01-01", workers=0)
    old = {p.relative_to(out): p.read_bytes() for p in out.rglob("*") if p.is_file()}
    real, calls = reports.tables.safe_write, []

    def fail_on_fifth(folder, name, text):
        calls.append(name)
        if len(calls) == 5:
            raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC), str(folder / name))
        return real(folder, name, text)

    monkeypatch.setattr(reports.tables, "safe_write", fail_on_fifth)
    with pytest.raises(OSError) as info:
        render_report(small_report_ledger, out, as_of="2100-01-02", workers=0)
    assert len(calls) == 5 and info.value.filename == f"{out}/{calls[-1]}"     # named in OUTDIR, not the temporary folder
    assert {p.relative_to(out): p.read_bytes() for p in out.rglob("*") if p.is_file()} == old
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted(["r.duckdb", "site"])
