"""The ledger as a partitioned Parquet lake: incremental export, the lake as read-only tables, verify.

Layout of a lake folder (Hive-style ``name=value`` folders, values escaped as Spark and Hive do)::

    manifest.json                                   what is in the lake (see ledger.manifest)
    meta/part-00001.parquet                         small tables: rewritten whole by every export
    series/…  runs/…  attributes/…
    forecasts/model=M/origin_year=2026/origin_month=11/part-00001.parquet
    bounds/model=M/origin_year=…/origin_month=…/part-…   (quantiles likewise)
    actuals/recorded_month=2026-11/part-00001.parquet

A file holds exactly the table's columns (the partition values are in the folder names only),
so a reader can take the files the manifest lists and never infer anything from paths.

Incremental: runs are immutable and actual revisions append-only, so a second export writes
forecasts, bounds and quantiles only of the runs recorded since the previous export, and only
the revisions recorded since then (``part-<export number>`` files beside the old ones). The
small tables are rewritten because ``runs.superseded_by`` and the meta settings can change.
New files are written first and the manifest replaced last; files of an export that failed
half-way are removed, and are never listed, so readers ignore them either way.
"""

from __future__ import annotations

import dataclasses
import datetime as dt
import os
from pathlib import Path

import duckdb

from .errors import LedgerError
from .manifest import (MANIFEST_NAME, ExportFile, Manifest, check_files, file_checksum, read_manifest,
                       write_manifest)
from .store import DDL, SCHEMA_VERSION, TABLES, Store, quiet

__all__ = ["LAYOUT", "LakeExport", "LakeMismatch", "export_lake", "is_lake", "lake_readers", "open_lake",
           "escape_partition_value", "verify_lake"]

LAYOUT = "partitioned"
WHOLE_TABLES = ("meta", "series", "runs", "attributes", "actual_writes", "events", "reviews", "review_findings",
                "review_models", "overrides")
RUN_TABLES = ("forecasts", "bounds", "quantiles")
_ORDER = {"forecasts": "run_id, series, period_index", "bounds": "run_id, series, period_index, level",
          "quantiles": "run_id, series, period_index, tau", "actuals": "series, period_index, revision"}
# Characters Hive and Spark escape in partition folder names (as %XX), plus the control characters.
_UNSAFE = set('"#%\'*/:=?\\\x7f{[]^') | {chr(i) for i in range(32)}


class LakeMismatch(LedgerError):
    """An export folder holds a lake of another ledger, schema or layout."""


@dataclasses.dataclass(frozen=True)
class LakeExport:
    """What one export into a lake folder wrote."""

    folder: Path
    written: list[Path]
    runs_added: int
    revisions_added: int
    manifest: Manifest


def escape_partition_value(value: str) -> str:
    """A partition value as a folder name: unsafe characters as %XX, as Hive and Spark write them."""
    return "".join(f"%{ord(ch):02X}" if ch in _UNSAFE else ch for ch in value)


def is_lake(folder: str | os.PathLike) -> bool:
    """A folder whose manifest is a partitioned export's (a flat export carries a manifest too)."""
    if not (Path(folder) / MANIFEST_NAME).is_file():
        return False
    try:
        return read_manifest(folder).layout == LAYOUT
    except LedgerError:
        return True          # an unreadable manifest: let the lake's own checks report it


def _quote(path: Path | str) -> str:
    return str(path).replace("'", "''")


def _stamp(value) -> str | None:
    return None if value is None else value.isoformat(timespec="microseconds")


def _previous(store: Store, out: Path) -> Manifest | None:
    if not is_lake(out):
        if out.exists() and any(out.iterdir()):
            raise LakeMismatch(f"{out} is not empty and holds no {MANIFEST_NAME}; export into a new or empty folder")
        return None
    prev = read_manifest(out)
    created = store.get_setting("created_at")
    if prev.layout != LAYOUT:
        raise LakeMismatch(f"{out} holds a {prev.layout} export; a partitioned export needs its own folder")
    if prev.ledger_created_at != created:
        raise LakeMismatch(f"{out} holds the lake of another ledger (created {prev.ledger_created_at}, "
                           f"this one {created}); export into a new folder")
    if prev.schema_version != SCHEMA_VERSION:
        raise LakeMismatch(f"{out} holds a lake of schema version {prev.schema_version}, this ledger has "
                           f"{SCHEMA_VERSION}; export into a new folder")
    had = store.con.execute("SELECT count(*) FROM runs WHERE recorded_at <= ?",
                            [_as_time(prev.recorded_up_to)]).fetchone()[0]
    if had != prev.tables.get("runs", 0):
        raise LakeMismatch(f"{out}: the lake lists {prev.tables.get('runs', 0)} runs up to {prev.recorded_up_to}, "
                           f"the ledger {had}; export into a new folder")
    return prev


def _as_time(text: str | None) -> dt.datetime:
    return dt.datetime.min if text is None else dt.datetime.fromisoformat(text)


def export_lake(store: Store, out_dir: str | os.PathLike) -> LakeExport:
    """Export the ledger into the lake at ``out_dir``: everything the first time, what is new later."""
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    prev = _previous(store, out)
    since = _as_time(prev.recorded_up_to if prev else None)
    upto = store.con.execute("SELECT max(t) FROM (SELECT max(recorded_at) t FROM runs UNION ALL "
                             "SELECT max(recorded_at) FROM actuals)").fetchone()[0]
    seq = (prev.exports if prev else 0) + 1
    written: list[tuple[Path, str, int]] = []
    try:
        for table in WHOLE_TABLES:
            written.append(_write_whole(store, out, table, seq))
        runs_added = _stage_new(store, "_lake_new_runs", f"""
            SELECT run_id, model, year(origin) AS y, month(origin) AS mo FROM runs WHERE recorded_at > $since""",
            since)
        for table in RUN_TABLES:
            written += _write_run_table(store, out, table, seq)
        revisions_added = _stage_new(store, "_lake_new_actuals", """
            SELECT series, period_index, revision, strftime(recorded_at, '%Y-%m') AS ym
            FROM actuals WHERE recorded_at > $since""", since)
        written += _write_actuals(store, out, seq)
        manifest = _manifest(store, out, prev, written, upto, seq)
        write_manifest(out, manifest)
    except BaseException:
        for path, _, _ in written:
            path.unlink(missing_ok=True)
        raise
    finally:
        store.con.execute("DROP TABLE IF EXISTS _lake_new_runs")
        store.con.execute("DROP TABLE IF EXISTS _lake_new_actuals")
    _remove_replaced(out, prev, manifest)
    return LakeExport(out, [p for p, _, _ in written], runs_added, revisions_added, manifest)


def _stage_new(store: Store, name: str, select: str, since: dt.datetime) -> int:
    store.con.execute(f"CREATE OR REPLACE TEMP TABLE {name} AS {select}", {"since": since})
    return store.con.execute(f"SELECT count(*) FROM {name}").fetchone()[0]


def _copy(store: Store, select: str, target: Path) -> None:
    target.parent.mkdir(parents=True, exist_ok=True)
    if target.exists():
        raise LedgerError(f"{target} exists but is not in the manifest; remove it, then export again")
    store.con.execute(f"COPY ({select}) TO '{_quote(target)}' (FORMAT parquet)")


def _write_whole(store: Store, out: Path, table: str, seq: int) -> tuple[Path, str, int]:
    target = out / table / f"part-{seq:05d}.parquet"
    _copy(store, f"SELECT * FROM {table} ORDER BY ALL", target)
    return target, table, store.con.execute(f"SELECT count(*) FROM {table}").fetchone()[0]


def _write_run_table(store: Store, out: Path, table: str, seq: int) -> list[tuple[Path, str, int]]:
    parts = store.con.execute(f"""
        SELECT n.model, n.y, n.mo, list(DISTINCT n.run_id) AS runs, count(*) AS rows
        FROM {table} t JOIN _lake_new_runs n ON n.run_id = t.run_id
        GROUP BY n.model, n.y, n.mo ORDER BY n.model, n.y, n.mo""").fetchall()
    written = []
    for model, year, month, runs, rows in parts:
        folder = out / table / f"model={escape_partition_value(model)}" / f"origin_year={year}" / f"origin_month={month:02d}"
        ids = ", ".join("'" + r.replace("'", "''") + "'" for r in sorted(runs))
        target = folder / f"part-{seq:05d}.parquet"
        _copy(store, f"SELECT * FROM {table} WHERE run_id IN ({ids}) ORDER BY {_ORDER[table]}", target)
        written.append((target, table, rows))
    return written


def _write_actuals(store: Store, out: Path, seq: int) -> list[tuple[Path, str, int]]:
    months = store.con.execute("SELECT ym, count(*) FROM _lake_new_actuals GROUP BY ym ORDER BY ym").fetchall()
    written = []
    for ym, rows in months:
        target = out / "actuals" / f"recorded_month={ym}" / f"part-{seq:05d}.parquet"
        _copy(store, f"""SELECT a.* FROM actuals a JOIN _lake_new_actuals n USING (series, period_index, revision)
                         WHERE n.ym = '{ym}' ORDER BY {_ORDER['actuals']}""", target)
        written.append((target, "actuals", rows))
    return written


def _manifest(store: Store, out: Path, prev: Manifest | None, written, upto, seq: int) -> Manifest:
    kept = [f for f in (prev.files if prev else ()) if f.table not in WHOLE_TABLES]
    new = [ExportFile(path.relative_to(out).as_posix(), table, int(rows), path.stat().st_size, file_checksum(path))
           for path, table, rows in written]
    as_of = upto or dt.datetime.min
    return Manifest(layout=LAYOUT, format="parquet", schema_version=SCHEMA_VERSION,
                    ledger_created_at=store.get_setting("created_at") or "",
                    recorded_up_to=_stamp(upto), state_hash=store.state_hash(as_of), exports=seq,
                    files=tuple(sorted(kept + new, key=lambda f: f.path)))


def _remove_replaced(out: Path, prev: Manifest | None, manifest: Manifest) -> None:
    """Delete the previous export's small-table files, now that the new manifest no longer lists them."""
    listed = {f.path for f in manifest.files}
    for f in prev.files if prev else ():
        if f.path not in listed:
            (out / f.path).unlink(missing_ok=True)


def lake_readers(folder: str | os.PathLike, manifest: Manifest) -> dict[str, str | None]:
    """Per table, a DuckDB expression reading its listed files (None: the table has no rows)."""
    out = {}
    for table in TABLES:
        files = [str(Path(folder) / f.path) for f in manifest.files_of(table)]
        out[table] = "read_parquet([" + ", ".join(f"'{_quote(p)}'" for p in files) + "])" if files else None
    return out


def open_lake(folder: str | os.PathLike, manifest: Manifest | None = None, *, load: bool = False) -> Store:
    """The lake as a read-only :class:`Store` over in-memory DuckDB views of its listed files.

    Everything that reads a ledger through SQL (scores, verify) runs on it unchanged. ``load``
    copies the tables into memory instead (for verify, which reads every run separately).
    """
    folder = Path(folder)
    manifest = manifest or read_manifest(folder)
    con = quiet(duckdb.connect())
    con.execute(DDL)
    for table, reader in lake_readers(folder, manifest).items():
        if reader:
            con.execute(f"DROP TABLE {table}")
            con.execute(f"CREATE {'TABLE' if load else 'VIEW'} {table} AS SELECT * FROM {reader}")
    return Store(con, folder)


def verify_lake(folder: str | os.PathLike) -> list:
    """Problems of a lake: files missing or changed, row counts, then the ledger checks over its tables."""
    from .integrity import Problem, verify   # integrity pulls in the intake layer; only verify needs it

    folder = Path(folder)
    manifest = read_manifest(folder)
    problems = [Problem("export file", p) for p in check_files(folder, manifest)]
    if problems:
        return problems
    store = open_lake(folder, manifest, load=True)
    try:
        for f in manifest.files:
            n = store.con.execute(f"SELECT count(*) FROM read_parquet('{_quote(folder / f.path)}')").fetchone()[0]
            if n != f.rows:
                problems.append(Problem("export rows", f"{f.path} holds {n:,} rows, the manifest says {f.rows:,}"))
        problems += verify(store)
    finally:
        store.close()
    return problems
