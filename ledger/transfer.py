"""Export every table of a ledger to Parquet or CSV, and import such an export into an empty ledger.

Nothing is locked in: an export holds all runs, forecasts, bounds, quantiles, actuals with every
revision, series, attributes and meta. Importing it into an empty ledger rebuilds the same
content (every table's content hash equal), inside one transaction.

CSV exports defuse spreadsheet formula injection: a text value that starts with ``=``, ``+``,
``-``, ``@``, a tab, a carriage return or an apostrophe is written with one leading apostrophe
(common practice, OWASP "CSV Injection"; from memory). Import removes exactly that apostrophe,
so the round trip is exact. Numbers are never prefixed.

A partitioned export (a Parquet lake with a manifest, written incrementally) lives in
:mod:`ledger.lake`; ``import_ledger`` reads both.
"""

from __future__ import annotations

import datetime as dt
import os
from pathlib import Path
from typing import Literal

import duckdb

from .errors import LedgerError, describe_os_error
from .lake import is_lake, lake_readers
from .manifest import MANIFEST_NAME, ExportFile, Manifest, check_files, file_checksum, read_manifest, write_manifest
from .store import SCHEMA_VERSION, TABLES, Store
from .wording import list_names

__all__ = ["ExportFormat", "export_ledger", "import_ledger"]

ExportFormat = Literal["parquet", "csv"]
_RISKY = "'=+-@\t\r"
FLAT = "flat"     # the manifest's layout of a one-file-per-table export (ledger/lake.py writes "partitioned")
_FORMAT_NAMES = {"parquet": "Parquet", "csv": "CSV"}


def _text_columns(store: Store, table: str) -> list[str]:
    rows = store.con.execute(
        "SELECT column_name FROM information_schema.columns WHERE table_name = ? AND data_type = 'VARCHAR' "
        "ORDER BY ordinal_position", [table]).fetchall()
    return [r[0] for r in rows]


def _all_columns(store: Store, table: str) -> list[str]:
    rows = store.con.execute(
        "SELECT column_name FROM information_schema.columns WHERE table_name = ? ORDER BY ordinal_position",
        [table]).fetchall()
    return [r[0] for r in rows]


def export_ledger(store: Store, out_dir: str | os.PathLike, *, fmt: ExportFormat = "parquet") -> list[Path]:
    """Write one file per table into ``out_dir`` (created if needed); return the paths."""
    if fmt not in ("parquet", "csv"):
        raise LedgerError(f"--format {fmt!r} is not an export format; use parquet or csv")
    if is_lake(out_dir):
        raise LedgerError(f"{out_dir} holds a partitioned export; add --partition, or export into another folder")
    out = Path(out_dir)
    _refuse_another_format(out, fmt)
    out.mkdir(parents=True, exist_ok=True)
    written = []
    for table in TABLES:
        target = out / f"{table}.{fmt}"
        cols = _all_columns(store, table)
        text = set(_text_columns(store, table))
        if fmt == "csv":
            exprs = [f"CASE WHEN left({c}, 1) IN ({', '.join(_sql_chars())}) THEN '''' || {c} ELSE {c} END AS {c}"
                     if c in text else c for c in cols]
            options = "(HEADER, DELIMITER ',', QUOTE '\"', ESCAPE '\"', NULL 'NULL', FORCE_QUOTE *)"
        else:
            exprs = cols
            options = "(FORMAT parquet)"
        select = f"SELECT {', '.join(exprs)} FROM {table} ORDER BY ALL"
        store.con.execute(f"COPY ({select}) TO '{_quote_path(target)}' {options}")
        written.append(target)
    write_manifest(out, _flat_manifest(store, out, fmt, written))   # last: a partial export never matches it
    return written


def _flat_manifest(store: Store, out: Path, fmt: str, written: list[Path]) -> Manifest:
    upto = store.con.execute("SELECT max(t) FROM (SELECT max(recorded_at) t FROM runs UNION ALL "
                             "SELECT max(recorded_at) FROM actuals)").fetchone()[0]
    files = tuple(ExportFile(path.name, table, store.con.execute(f"SELECT count(*) FROM {table}").fetchone()[0],
                             path.stat().st_size, file_checksum(path)) for path, table in zip(written, TABLES))
    return Manifest(layout=FLAT, format=fmt, schema_version=SCHEMA_VERSION,
                    ledger_created_at=store.get_setting("created_at") or "",
                    recorded_up_to=None if upto is None else upto.isoformat(timespec="microseconds"),
                    state_hash=store.state_hash(upto or dt.datetime.min), exports=1, files=files)


def _complete_sets(src: Path) -> dict[str, list[str]]:
    """The flat exports a folder holds: format -> its file names (complete sets only)."""
    return {fmt: [f"{t}.{fmt}" for t in TABLES] for fmt in ("parquet", "csv")
            if all((src / f"{t}.{fmt}").is_file() for t in TABLES)}


def _refuse_another_format(out: Path, fmt: str) -> None:
    others = [f for f in _complete_sets(out) if f != fmt] if out.is_dir() else []
    if others:
        raise LedgerError(f"{out} already holds a {_FORMAT_NAMES[others[0]]} export; export into another folder "
                          "(one folder, one export)")


def _sql_chars() -> list[str]:
    return ["chr(%d)" % ord(ch) for ch in _RISKY]


def _quote_path(path: Path) -> str:
    return str(path).replace("'", "''")


def import_ledger(store: Store, in_dir: str | os.PathLike) -> dict[str, int]:
    """Load an export into this ledger, which must hold no runs, actuals or series yet."""
    src = Path(in_dir)
    readers, expected = _readers(store, src)
    busy = store.con.execute(
        "SELECT (SELECT count(*) FROM runs) + (SELECT count(*) FROM actuals) + (SELECT count(*) FROM series) "
        "+ (SELECT count(*) FROM attributes)").fetchall()[0][0]
    if busy:
        raise LedgerError(f"{store.path} is not empty; import into a new ledger file (--ledger NEW.duckdb)")
    counts = {}
    with store.transaction() as con:
        for table in TABLES:
            cols = _all_columns(store, table)
            reader, exprs = readers[table]
            if reader is not None:
                _load(con, table, cols, reader, exprs)
            counts[table] = con.execute(f"SELECT count(*) FROM {table}").fetchall()[0][0]
            if expected is not None and counts[table] != expected.get(table, 0):
                raise LedgerError(f"{src}: {table} has {counts[table]} rows after import, the manifest says "
                                  f"{expected.get(table, 0)}; nothing was imported")
    return counts


def _load(con, table: str, cols: list[str], reader: str, exprs: list[str] | None) -> None:
    """One table from its export file(s); a file DuckDB cannot read is refused in one line."""
    try:
        if table == "meta":
            con.execute("DELETE FROM meta WHERE key IN (SELECT key FROM " + reader + ")")
        con.execute(f"INSERT INTO {table} ({', '.join(cols)}) SELECT {', '.join(exprs or cols)} FROM {reader}")
    except duckdb.Error as exc:
        if describe_os_error(exc):
            raise
        first = str(exc).strip().splitlines()[0]
        raise LedgerError(f"the export's {table} cannot be read ({first}); nothing was imported; "
                          "export the ledger again") from None


def _readers(store: Store, src: Path) -> tuple[dict[str, tuple[str | None, list[str] | None]], dict | None]:
    """Per table, the reader expression and column expressions; and the manifest's row counts (lakes)."""
    if src.is_dir() and is_lake(src):
        manifest = read_manifest(src)
        problems = check_files(src, manifest)
        if problems:
            more = f" (and {len(problems) - 1} more)" if len(problems) > 1 else ""
            raise LedgerError(f"{src}: {problems[0]}{more}; run backsight verify {src}; nothing was imported")
        return {t: (r, None) for t, r in lake_readers(src, manifest).items()}, manifest.tables
    fmt, expected = _flat_format(src)
    out = {}
    for table in TABLES:
        path = src / f"{table}.{fmt}"
        if fmt == "csv":
            cols = _all_columns(store, table)
            types = dict(store.con.execute(
                "SELECT column_name, data_type FROM information_schema.columns WHERE table_name = ?", [table]).fetchall())
            spec = ", ".join(f"'{c}': 'VARCHAR'" for c in cols)
            reader = f"read_csv('{_quote_path(path)}', header = true, columns = {{{spec}}}, nullstr = 'NULL', allow_quoted_nulls = false, quote = '\"', escape = '\"')"
            out[table] = (reader, [_unescape(c, types[c]) for c in cols])
        else:
            out[table] = (f"read_parquet('{_quote_path(path)}')", None)
    return out, expected


def _unescape(col: str, sql_type: str) -> str:
    if sql_type == "VARCHAR":
        return f"CASE WHEN left({col}, 1) = '''' THEN substr({col}, 2) ELSE {col} END"
    return f"CAST({col} AS {sql_type})"


def _flat_format(src: Path) -> tuple[str, dict[str, int] | None]:
    """The one flat export in ``src`` (its format, and the manifest's row counts when it has one).

    Refuses a folder holding two exports (a Parquet and a CSV set), naming both, and files that
    no longer match their manifest.
    """
    if not src.is_dir():
        raise LedgerError(f"{src} is not a folder; give the folder that backsight export wrote")
    sets = _complete_sets(src)
    if len(sets) > 1:
        shown = " and ".join(f"a {_FORMAT_NAMES[f]} export ({list_names(files, 3)})" for f, files in sets.items())
        raise LedgerError(f"{src} holds more than one export: {shown}; move one of them to another folder "
                          "and import again")
    if not sets:
        # Name what is missing of the export that is there (the format with more of its files).
        fmt = max(("parquet", "csv"), key=lambda f: sum((src / f"{t}.{f}").exists() for t in TABLES))
        missing = [f"{t}.{fmt}" for t in TABLES if not (src / f"{t}.{fmt}").exists()]
        raise LedgerError(f"{src} does not hold a complete export (missing {', '.join(missing)})")
    fmt = next(iter(sets))
    if not (src / MANIFEST_NAME).is_file():
        return fmt, None                  # written before exports carried a manifest
    manifest = read_manifest(src)
    problems = check_files(src, manifest)
    if manifest.format != fmt or problems:
        detail = problems[0] if problems else f"the manifest lists a {manifest.format} export"
        raise LedgerError(f"{src}: {detail}; the files do not match the export's manifest (an interrupted "
                          "export?); export the ledger again; nothing was imported")
    return fmt, manifest.tables
