"""Export every table of a ledger to Parquet or CSV, and import such an export into an empty ledger.

Nothing is locked in: an export holds all runs, forecasts, bounds, quantiles, actuals with every
revision, series, attributes and meta. Importing it into an empty ledger rebuilds the same
content (every table's content hash equal), inside one transaction.

CSV exports defuse spreadsheet formula injection: a text value that starts with ``=``, ``+``,
``-``, ``@``, a tab, a carriage return or an apostrophe is written with one leading apostrophe
(common practice, OWASP "CSV Injection"; from memory). Import removes exactly that apostrophe,
so the round trip is exact. Numbers are never prefixed.
"""

from __future__ import annotations

import os
from pathlib import Path
from typing import Literal

import duckdb

from .errors import LedgerError, describe_os_error
from .store import TABLES, Store

__all__ = ["ExportFormat", "export_ledger", "import_ledger"]

ExportFormat = Literal["parquet", "csv"]
_RISKY = "'=+-@\t\r"


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
    out = Path(out_dir)
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
    return written


def _sql_chars() -> list[str]:
    return ["chr(%d)" % ord(ch) for ch in _RISKY]


def _quote_path(path: Path) -> str:
    return str(path).replace("'", "''")


def import_ledger(store: Store, in_dir: str | os.PathLike) -> dict[str, int]:
    """Load an export into this ledger, which must hold no runs, actuals or series yet."""
    src = Path(in_dir)
    fmt = _detect_format(src)
    busy = store.con.execute(
        "SELECT (SELECT count(*) FROM runs) + (SELECT count(*) FROM actuals) + (SELECT count(*) FROM series)"
    ).fetchall()[0][0]
    if busy:
        raise LedgerError(f"{store.path} is not empty; import into a new ledger file (--ledger NEW.duckdb)")
    counts = {}
    with store.transaction() as con:
        for table in TABLES:
            path = src / f"{table}.{fmt}"
            cols = _all_columns(store, table)
            types = dict(con.execute(
                "SELECT column_name, data_type FROM information_schema.columns WHERE table_name = ?", [table]).fetchall())
            if fmt == "csv":
                spec = ", ".join(f"'{c}': 'VARCHAR'" for c in cols)
                reader = f"read_csv('{_quote_path(path)}', header = true, columns = {{{spec}}}, nullstr = 'NULL', allow_quoted_nulls = false, quote = '\"', escape = '\"')"
                exprs = [_unescape(c, types[c]) for c in cols]
            else:
                reader = f"read_parquet('{_quote_path(path)}')"
                exprs = cols
            try:
                if table == "meta":
                    con.execute("DELETE FROM meta WHERE key IN (SELECT key FROM " + reader + ")")
                con.execute(f"INSERT INTO {table} ({', '.join(cols)}) SELECT {', '.join(exprs)} FROM {reader}")
            except duckdb.Error as exc:
                if describe_os_error(exc):
                    raise
                first = str(exc).strip().splitlines()[0]
                raise LedgerError(f"{path} cannot be read as part of an export ({first}); nothing was "
                                  "imported; export the ledger again") from None
            counts[table] = con.execute(f"SELECT count(*) FROM {table}").fetchall()[0][0]
    return counts


def _unescape(col: str, sql_type: str) -> str:
    if sql_type == "VARCHAR":
        return f"CASE WHEN left({col}, 1) = '''' THEN substr({col}, 2) ELSE {col} END"
    return f"CAST({col} AS {sql_type})"


def _detect_format(src: Path) -> str:
    if not src.is_dir():
        raise LedgerError(f"{src} is not a folder; give the folder that backsight export wrote")
    for fmt in ("parquet", "csv"):
        if all((src / f"{t}.{fmt}").exists() for t in TABLES):
            return fmt
    missing = [f"{t}.parquet" for t in TABLES if not (src / f"{t}.parquet").exists()]
    raise LedgerError(f"{src} does not hold a complete export (missing {', '.join(missing)})")
