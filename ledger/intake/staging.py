"""Validated input rows held in DuckDB temporary tables until they are written.

An import goes through here in three steps: chunks of checked rows are appended to a staging
table (DuckDB spills it to disk when it outgrows memory, so a file of any size fits); checks
that need the whole file (its frequency, the series' recorded frequencies, horizons,
duplicates) run as SQL on it; the writer in :mod:`record` then reads it back with SQL. Every
staged row keeps its 1-based row number in the file, so the set-level checks name rows too.
Temporary tables belong to this connection only and vanish with it, so a crash leaves no trace.
"""

from __future__ import annotations

import contextlib
import datetime as dt
import itertools
from collections.abc import Iterator

import duckdb
import numpy as np
from ..lazy import pyarrow as pa
from ..lazy import pyarrow_compute as pc

from ..errors import InputError
from ..periods import period_label, period_sql
from ..store import bounded_memory
from .problems import SHOWN, raise_found

__all__ = ["Stage"]

_names = itertools.count()
#: Rows compared at a time when checking the ready table's order.
ORDER_BATCH = 1 << 20


class Stage:
    """One import's staging table in ``con``; use as a context manager (drops it at the end)."""

    def __init__(self, con, columns: dict[str, str]):
        self.con = con
        self.table = f"_stage_{next(_names)}"
        self.ready = f"{self.table}_ready"
        self._closed = False
        self._labels_made = False
        self._unique: list[str] | None = None
        # DuckDB spills beyond this cap, so a multi-GB import stays under 2 GB of RSS
        self._memory = bounded_memory(con)
        self._memory.__enter__()
        defs = ", ".join(f"{name} {kind}" for name, kind in {"row": "BIGINT", **columns}.items())
        con.execute(f"CREATE TEMP TABLE {self.table} ({defs})")

    def __enter__(self) -> "Stage":
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    def close(self) -> None:
        if self._closed:
            return
        self._closed = True
        for table in (self.table, self.ready, f"{self.table}_labels", f"{self.table}_lab"):
            with contextlib.suppress(duckdb.Error):  # the connection may be gone after a crash
                self.con.execute(f"DROP TABLE IF EXISTS {table}")
        self._memory.__exit__(None, None, None)

    def append(self, offset: int, columns: dict[str, object]) -> None:
        """Append one chunk's checked columns (equal lengths); rows are numbered from ``offset + 1``."""
        n = len(next(iter(columns.values())))
        arrays = {name: pa.array(values, from_pandas=True) if isinstance(values, np.ndarray) else values
                  for name, values in columns.items()}  # from_pandas: NaN becomes NULL
        frame = pa.table({"row": pa.array(np.arange(offset + 1, offset + n + 1, dtype=np.int64)), **arrays})
        self.con.register("_chunk", frame)
        try:
            self.con.execute(f"INSERT INTO {self.table} BY NAME SELECT * FROM _chunk")
        finally:
            with contextlib.suppress(duckdb.Error):     # after a failed write the first error is the news
                self.con.unregister("_chunk")

    def known_frequencies(self) -> set[str]:
        """The frequencies the ledger has recorded for the staged series."""
        rows = self.con.execute(f"SELECT DISTINCT l.frequency FROM (SELECT DISTINCT series FROM {self.table}) s "
                                "JOIN series l USING (series)").fetchall()
        return {r[0] for r in rows}

    def recorded_conflicts(self, freq: str) -> tuple[list[tuple[int, str, str]], int]:
        """Series recorded with another frequency than ``freq``: (first row, series, recorded
        frequency) of the first :data:`SHOWN` in file order, and how many there are."""
        return self._first_rows(
            f"SELECT s.row, s.series, l.frequency FROM (SELECT series, min(row) AS row FROM {self.table} "
            "GROUP BY series) s JOIN series l USING (series) WHERE l.frequency <> $freq", {"freq": freq})

    def _first_rows(self, sql: str, params: dict) -> tuple[list[tuple], int]:
        """The first :data:`SHOWN` rows of ``sql`` by its ``row`` column, and the count of all of
        them: a whole-file check names every offending row, not only the first."""
        rows = self.con.execute(f"SELECT *, count(*) OVER () FROM ({sql}) ORDER BY row LIMIT {SHOWN}",
                                params).fetchall()
        return [r[:-1] for r in rows], int(rows[0][-1]) if rows else 0

    def add_labels(self, column: str, labels: list[str], kinds: list[str | None], days: list[dt.date],
                   first_rows: np.ndarray) -> None:
        """Record one chunk's distinct labels of ``column``, parsed, with the row where each first appears.

        Kept in DuckDB, not in a Python dict: a file of millions of distinct labels (daily data
        with times) would otherwise hold them all in memory.
        """
        raw = f"{self.table}_labels"
        if not self._labels_made:
            self.con.execute(f"CREATE TEMP TABLE {raw} (col VARCHAR, label VARCHAR, kind VARCHAR, day DATE, "
                             "first_row BIGINT)")
            self._labels_made = True
        frame = pa.table({"col": pa.array([column] * len(labels), pa.string()), "label": pa.array(labels, pa.string()),
                          "kind": pa.array(kinds, pa.string()), "day": pa.array(days, pa.date32()),
                          "first_row": pa.array(first_rows, pa.int64())})
        self.con.register("_chunk_labels", frame)
        try:
            self.con.execute(f"INSERT INTO {raw} SELECT * FROM _chunk_labels")
        finally:
            with contextlib.suppress(duckdb.Error):
                self.con.unregister("_chunk_labels")

    def label_kinds(self, column: str) -> dict[str, int]:
        """Each label kind (frequency) found in ``column``, with the first row holding one."""
        if not self._labels_made:
            return {}
        rows = self.con.execute(f"SELECT kind, min(first_row) FROM {self.table}_labels WHERE col = ? "
                                "AND kind IS NOT NULL GROUP BY kind", [column]).fetchall()
        return {kind: int(row) for kind, row in rows}

    def kind_rows(self, column: str) -> dict[str, tuple[int, int]]:
        """Each label kind in ``column`` with (how many rows hold one, the first such row); asked
        only of a column holding several kinds, which is the one case a count by row is needed."""
        rows = self.con.execute(
            f"SELECT l.kind, count(*), min(s.row) FROM {self.table} s JOIN (SELECT DISTINCT label, kind FROM "
            f"{self.table}_labels WHERE col = $col AND kind IS NOT NULL) l ON l.label = s.{column} GROUP BY l.kind",
            {"col": column}).fetchall()
        return {kind: (int(n), int(first)) for kind, n, first in rows}

    def other_kinds(self, column: str, freq: str) -> tuple[list[tuple[int, str]], int]:
        """Rows whose ``column`` label is of another frequency than ``freq``: (row, kind) of the
        first :data:`SHOWN` in file order, and how many there are."""
        return self._first_rows(
            f"SELECT s.row, l.kind FROM {self.table} s JOIN (SELECT DISTINCT label, kind FROM {self.table}_labels "
            f"WHERE col = $col AND kind <> $freq) l ON l.label = s.{column}", {"col": column, "freq": freq})

    def drop_other_kinds(self, column: str, freq: str) -> None:
        """Leave out the rows just refused for another frequency, so that the whole-file checks
        (duplicates, horizons) still run on the rest instead of being skipped."""
        self.con.execute(f"DELETE FROM {self.table} WHERE {column} IN (SELECT label FROM {self.table}_labels "
                         "WHERE col = $col AND kind <> $freq)", {"col": column, "freq": freq})

    def resolve(self, freq: str, label_columns: list[str], keys: list[str]) -> None:
        """Build the ready table, sorted by the key columns ``keys``: each label column becomes a
        start date and a period index (in SQL, with the formulas of
        :func:`ledger.periods.period_start` and :func:`~ledger.periods.period_index`). Sorted once
        here, so that the writes that follow keep its order without sorting again.

        One streamed pass then asks whether every key is strictly after the one before; if so no
        key repeats, and :meth:`check_unique` need not group the rows again (a grouping of tens
        of millions of rows under the memory cap spills). Sorting by the keys at once was faster
        than keeping file order and sorting only files out of order: DuckDB's parallel join does
        not keep file order, and putting it back is a sort too (1.51 s against 1.66–1.70 s for a
        million-row snapshot, measured side by side)."""
        raw, lab = f"{self.table}_labels", f"{self.table}_lab"
        start, index = period_sql("l.day", freq)
        self.con.execute(f"CREATE TEMP TABLE {lab} AS SELECT label, {start} AS day, {index} AS idx FROM "
                         f"(SELECT label, any_value(day) AS day FROM {raw} GROUP BY label) l")
        joins, exprs = [], []
        for i, col in enumerate(label_columns):
            joins.append(f"JOIN {lab} l{i} ON l{i}.label = s.{col}")
            exprs.append(f"l{i}.day AS {col}, l{i}.idx AS {col}_index")
        self.con.execute(f"CREATE TEMP TABLE {self.ready} AS SELECT s.* EXCLUDE ({', '.join(label_columns)}), "
                         f"{', '.join(exprs)} FROM {self.table} s {' '.join(joins)} ORDER BY {', '.join(keys)}")
        self._unique = list(keys) if self._strictly_ascending(keys) else None
        for table in (self.table, lab, raw):
            self.con.execute(f"DROP TABLE {table}")

    def _strictly_ascending(self, keys: list[str]) -> bool:
        """Whether each row of the ready table is strictly after the one before in ``keys``,
        compared in Arrow a batch at a time (strings byte-wise, as DuckDB's ORDER BY compares them)."""
        last = None
        for batch in self.con.sql(f"SELECT {', '.join(keys)} FROM {self.ready}").to_arrow_reader(ORDER_BATCH):
            n = batch.num_rows
            if n == 0:
                continue
            first = tuple(batch.column(i)[0].as_py() for i in range(len(keys)))
            if (last is not None and not first > last) or (n > 1 and not _ascending(batch, len(keys))):
                return False
            last = tuple(batch.column(i)[n - 1].as_py() for i in range(len(keys)))
        return True

    def check_horizons(self, source: str, freq: str, max_horizon: int) -> None:
        """Refuse every row whose target period is too far after its origin or not after it."""
        found, total = self._first_rows(
            f"SELECT row, period, origin, period_index - origin_index AS h FROM {self.ready} "
            "WHERE period_index - origin_index > $max OR period_index <= origin_index", {"max": max_horizon})
        problems = [InputError(source, f"target period is {h:,} periods after the origin; Backsight accepts "
                                       f"horizons up to {max_horizon}", row=row, column="period") if h > 0 else
                    InputError(source, f"target period {period_label(target, freq)} is not after "
                                       f"the origin {period_label(origin, freq)}", row=row, column="period")
                    for row, target, origin, h in found]
        raise_found(source, problems, total)

    def check_unique(self, source: str, keys: list[str], column: str, what: str) -> None:
        """Refuse every row that repeats the keys of an earlier row (naming that row)."""
        if self._unique == list(keys):      # resolve saw every key strictly after the one before it
            return
        by = ", ".join(keys)
        # A grouping finds whether any key repeats at half the cost of the window that names the rows.
        if not self.con.execute(f"SELECT count(*) FROM {self.ready} GROUP BY {by} HAVING count(*) > 1 LIMIT 1").fetchall():
            return
        found, total = self._first_rows(
            f"SELECT row, first FROM (SELECT row, min(row) OVER (PARTITION BY {by}) AS first FROM {self.ready}) "
            "WHERE row > first", {})
        raise_found(source, [InputError(source, f"{what} (first at row {first})", row=row, column=column)
                             for row, first in found], total)

    def case_twins(self, column: str, table: str, limit: int = 6) -> list[list[str]]:
        """Groups of keys in ``column`` (with the ledger's ``table``.``column``) equal but for case,
        each holding at least one key of this file."""
        rows = self.con.execute(f"""
            WITH mine AS (SELECT DISTINCT {column} AS k FROM {self.ready}),
                 keys AS (SELECT k FROM mine UNION SELECT DISTINCT {column} FROM {table}
                          WHERE lower({column}) IN (SELECT lower(k) FROM mine))
            SELECT list(k ORDER BY k) FROM keys GROUP BY lower(k) HAVING count(*) > 1
            ORDER BY 1 LIMIT {int(limit)}""").fetchall()
        return [r[0] for r in rows]

    def series(self) -> list[str]:
        return [r[0] for r in self.con.execute(f"SELECT DISTINCT series FROM {self.ready} ORDER BY series").fetchall()]

    def batches(self, select: str, rows: int = 102_400) -> Iterator[pa.RecordBatch]:
        """The ready table in the order :meth:`resolve` sorted it, as Arrow record batches of at
        most ``rows`` rows (no pandas frame per batch: a back-fill of thousands of small runs
        would spend its time there). No ORDER BY: DuckDB keeps insertion order (its default,
        ``preserve_insertion_order``), and sorting a million rows again cost a tenth of a second."""
        yield from self.con.sql(f"SELECT {select} FROM {self.ready}").to_arrow_reader(rows)


def _ascending(batch: pa.RecordBatch, width: int) -> bool:
    """Whether each row of ``batch`` is strictly after the row before it in its first ``width``
    columns, compared lexicographically."""
    n = batch.num_rows
    less = None
    for i in reversed(range(width)):
        a, b = batch.column(i).slice(0, n - 1), batch.column(i).slice(1)
        lt = pc.less(a, b)
        less = lt if less is None else pc.or_(lt, pc.and_(pc.equal(a, b), less))
    return bool(pc.all(less).as_py())
