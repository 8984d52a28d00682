"""The fast road for a plain CSV file: DuckDB's own reader, every check in SQL, no row in Python.

A forecast or actuals file is read by DuckDB's CSV reader into a temporary table (in strict
mode: a ragged row, a stray quote or a byte that is not UTF-8 stops it), and SQL asks whether
every cell is in a *plain* form: keys already trimmed, in NFC and free of the characters
:mod:`keys` refuses, at most 200 bytes (once per distinct key); numbers that DuckDB reads as the
exact reader does, finite (the reader parses them, or, when the file holds a '_', a cast of their
text that refuses digit groups such as ``1_000``); bounds paired and ordered, quantiles not
decreasing; period labels that :func:`ledger.periods.parse_label` reads. For such a file the exact reader
(:mod:`csvread`, pandas' parser and the Arrow checks of :mod:`ingest`) would find no problem
and stage the same values, so the rows are staged from SQL and the whole-file checks that
follow are the same code for both roads.

Anything else — a problem, or a valid but unusual cell such as a key with spaces around it —
raises :class:`NotPlain`, and the caller reads the file again with the exact reader, which
accepts it or reports every problem with the messages of the bad-input corpus. So this road
never words an error of its own: a refused file costs one fast read more, a good file is read
at DuckDB's speed.
"""

from __future__ import annotations

import contextlib
import dataclasses
import os
from collections import Counter
from pathlib import Path

import duckdb
import numpy as np

from .csvread import CsvText, delimiter, header_fields
from ..errors import InputError
from .keys import REFUSED_PATTERN
from ..periods import parse_label

__all__ = ["NotPlain", "PlainCsv", "MAX_COLUMNS"]

#: Wider files take the exact reader (a plain-form test per column would outgrow its worth).
MAX_COLUMNS = 200
_LABEL_BATCH = 200_000       # distinct labels parsed at a time, so memory stays flat
_SCAN_BLOCK = 1 << 24        # bytes read at a time when searching the file for '_'
# White space at either end of a key (Unicode's, as Arrow's utf8_trim_whitespace trims it).
_EDGE_SPACE = r"^[\s\x{0B}\x{85}\p{Z}]|[\s\x{0B}\x{85}\p{Z}]$"
_DECIMAL = r"-?[0-9]+(\.[0-9]+)?([eE][-+]?[0-9]{1,3})?"


class NotPlain(Exception):
    """The file needs the exact reader: it may hold a problem, or a cell that is not in plain form."""


def _text(s: str) -> str:
    return "'" + s.replace("'", "''") + "'"


@dataclasses.dataclass
class PlainCsv:
    """A CSV file whose header is plain: its columns (as :func:`sources.open_table` names them),
    delimiter and size."""

    path: Path
    source: str
    columns: list[str]
    sep: str
    size: int        # bytes, for the caller's progress

    @classmethod
    def open(cls, data, name: str | None) -> "PlainCsv":
        if not isinstance(data, (str, os.PathLike)):
            raise NotPlain("not a file")
        path = Path(data)
        source = name or path.name
        if path.suffix.lower() in (".parquet", ".pq") or not path.is_file():
            raise NotPlain("not a CSV file")
        try:
            text = CsvText(path, source)
        except InputError:
            raise NotPlain("the first block is refused") from None
        try:
            header, encoding = text.header, text.encoding
        finally:
            text.close()
        # A quote in the header could span lines; a lone CR is refused; both go the exact way.
        if encoding != "utf-8" or '"' in header or "\r" in header.rstrip("\r") or "\x00" in header:
            raise NotPlain("header")
        sep = delimiter(header)
        try:
            names = header_fields(header, sep, source)
        except InputError:
            raise NotPlain("header") from None
        columns = [n.strip().lstrip("\ufeff").strip().lower() for n in names]
        if not columns or "" in columns or len(columns) > MAX_COLUMNS or max(Counter(columns).values()) > 1:
            raise NotPlain("header")
        return cls(path, source, columns, sep, path.stat().st_size)

    def load(self, con, table: str, *, keys: dict[str, str | None], numbers: dict[str, tuple[str, bool]],
             pairs: list[tuple[str, str]] = (), ordered: list[tuple[str, str]] = ()) -> int:
        """Stage the file's rows into ``table`` (columns ``row`` and those named here) if every
        cell is plain; returns the number of rows.

        ``keys``: staged key column → the option's value when an option fills it (``--model``),
        else None (the column of that name). ``numbers``: staged column → (file column, blank
        allowed). ``pairs``: (lower, upper) staged columns, given both or neither, lower ≤ upper.
        ``ordered``: (a, b) staged columns with a ≤ b where both are given.
        """
        raw = f"{table}_raw"
        cols = {c: f"c{i}" for i, c in enumerate(self.columns)}
        # Number columns are parsed by the reader itself (a third faster than text, then a cast)
        # unless the file holds a '_' below its header: DuckDB reads 1_000 as 1000, the exact
        # reader refuses it, so such a file's numbers are read as text and checked for it.
        typed = set() if self._underscore_in_body() else {cols[column] for column, _ in numbers.values() if column in cols}
        spec = "{" + ", ".join(f"'{c}': '{'DOUBLE' if c in typed else 'VARCHAR'}'" for c in cols.values()) + "}"
        try:
            con.execute(f"CREATE TEMP TABLE {raw} AS SELECT * FROM read_csv({_text(str(self.path))}, "
                        f"columns = {spec}, header = true, auto_detect = false, delim = {_text(self.sep)}, "
                        "quote = '\"', escape = '\"', strict_mode = true, null_padding = false, comment = '', "
                        "ignore_errors = false)")
        except duckdb.Error:
            raise NotPlain("DuckDB's reader refused it") from None
        try:
            return self._stage(con, raw, table, cols, typed, keys, numbers, list(pairs), list(ordered))
        finally:
            with contextlib.suppress(duckdb.Error):
                con.execute(f"DROP TABLE IF EXISTS {raw}")

    def _underscore_in_body(self) -> bool:
        """Whether a '_' byte follows the header line. Read through one reused buffer: a memory map
        of a multi-GB file would count every page it touched as resident memory."""
        buffer = bytearray(_SCAN_BLOCK)
        with open(self.path, "rb") as f:
            f.readline()
            while n := f.readinto(buffer):
                if buffer.find(b"_", 0, n) >= 0:
                    return True
        return False

    def _stage(self, con, raw, table, cols, typed, keys, numbers, pairs, ordered) -> int:
        exprs, plain, key_columns, value = ["rowid + 1 AS row"], [], [], {}
        for name, option in keys.items():
            if option is None:
                if name not in cols:
                    raise NotPlain(f"no {name} column")
                key_columns.append(cols[name])
                exprs.append(f"{cols[name]} AS {name}")
            else:
                if name in cols:      # the column must say what the option says
                    self._check_distinct(con, raw, cols[name], f"{cols[name]} IS NOT DISTINCT FROM {_text(option)}")
                exprs.append(f"{_text(option)} AS {name}")
        for name, (column, blank_ok) in numbers.items():
            if column not in cols:
                raise NotPlain(f"no {column} column")
            c = cols[column]
            # DuckDB reads the forms the exact reader reads (white space at either end, a sign,
            # '.5', '5.', an exponent) to the same double, and fails on the rest, except digit
            # groups with '_' (1_000), which the exact reader refuses: those go its way.
            value[name] = c if c in typed else f"TRY_CAST({c} AS DOUBLE)"
            exprs.append(f"{value[name]} AS {name}")
            number = f"isfinite({c})" if c in typed else f"isfinite({value[name]}) AND NOT contains({c}, '_')"
            plain.append(f"({c} IS NULL OR {number})" if blank_ok else f"({c} IS NOT NULL AND {number})")
        for lo, hi in pairs:
            lo, hi = value[lo], value[hi]
            plain.append(f"({lo} IS NULL) = ({hi} IS NULL) AND coalesce({lo} <= {hi}, true)")
        for a, b in ordered:
            plain.append(f"coalesce({value[a]} <= {value[b]}, true)")
        used = set(key_columns) | {cols[column] for column, _ in numbers.values()}
        for c in sorted(set(cols.values()) - used):    # an ignored column may hold no NUL or lone CR
            plain.append(f"NOT contains(coalesce({c}, ''), chr(0)) AND NOT contains(coalesce({c}, ''), chr(13))")
        # Keys repeat (a few models and periods, thousands of series over a million rows), so
        # their plain form is tested once per distinct value, not once per row.
        for c in dict.fromkeys(key_columns):
            self._check_distinct(con, raw, c, _plain_key(c))
        select = f"SELECT {', '.join(exprs)} FROM {raw} WHERE CASE WHEN {' AND '.join(f'({p})' for p in plain) or 'true'} " \
                "THEN true ELSE error('not plain') END"
        # One pass: the first cell that is not plain stops the INSERT (and the statement leaves
        # nothing behind). Staging runs outside any transaction, so the error ends only the statement.
        try:
            n = con.execute(f"INSERT INTO {table} BY NAME {select}").fetchone()[0]
        except duckdb.Error as exc:
            raise NotPlain(str(exc).splitlines()[0] if str(exc) else "DuckDB") from None
        if not n:
            raise NotPlain("no data rows")
        return int(n)

    @staticmethod
    def _check_distinct(con, raw: str, column: str, condition: str) -> None:
        """NotPlain unless every distinct value of ``column`` meets ``condition`` (SQL over ``column``)."""
        # An aggregate over the distinct values, not a WHERE: DuckDB would push a filter below the
        # DISTINCT and test every row again.
        plain = con.execute(f"SELECT coalesce(bool_and(coalesce({condition}, false)), true) "
                            f"FROM (SELECT DISTINCT {column} FROM {raw})").fetchone()[0]
        if not plain:
            raise NotPlain(f"a value of {column}")

    def labels(self, con, table: str, column: str):
        """The distinct labels of ``column`` as batches of (labels, kinds, days, first rows);
        NotPlain if one of them does not parse. (Fetched whole as Arrow first: the caller writes
        to the connection between batches, which would end a pending result.)"""
        found = con.sql(f"SELECT {column} AS label, min(row) AS first FROM {table} GROUP BY {column}").to_arrow_table()
        for start in range(0, found.num_rows, _LABEL_BATCH):
            part = found.slice(start, _LABEL_BATCH)
            labels = part.column("label").to_pylist()
            kinds, days = [], []
            for label in labels:
                try:
                    kind, day = parse_label(label)
                except ValueError:
                    raise NotPlain(f"label {label!r}") from None
                kinds.append(kind)
                days.append(day)
            yield labels, kinds, days, part.column("first").to_numpy()


def _plain_key(k: str) -> str:
    """A key in plain form: present, at most 200 bytes, no white space at either end, no refused
    character, already NFC (an ASCII key is)."""
    return (f"{k} IS NOT NULL AND strlen({k}) BETWEEN 1 AND 200 "
            f"AND NOT regexp_matches({k}, {_text(_EDGE_SPACE + '|' + REFUSED_PATTERN)}) "
            f"AND (strlen({k}) = length({k}) OR nfc_normalize({k}) = {k})")

