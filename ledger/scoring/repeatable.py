"""Aggregates that give the same floats on every run: one DuckDB thread over rows in key order.

DuckDB sums a group in parallel: each thread adds its share of the rows and the partial sums
are combined in the order the threads finish, so the last digits of a mean moved from run to
run (``backsight scores`` printed different CSV bytes for the same ledger). Floating-point
addition is not associative; the fix is a fixed order, not more precision. The scored cells are
materialised sorted by their key (:func:`ledger.scoring.cells.scores`), and the aggregates run
inside :func:`one_thread`, which adds every group's values in that order.

This is an engine setting, not SQL: the queries stay standard, and another engine needs its
own way to fix the order (or an exact sum).
"""

from __future__ import annotations

import contextlib
from collections.abc import Iterator

import duckdb

__all__ = ["one_thread"]


@contextlib.contextmanager
def one_thread(con: duckdb.DuckDBPyConnection) -> Iterator[None]:
    """Run the enclosed queries on one DuckDB thread; the thread count is restored afterwards.

    Any other engine (Spark over a lake) runs them as they are: see :mod:`ledger.scoring.dialect`.
    """
    if not isinstance(con, duckdb.DuckDBPyConnection):
        yield
        return
    (before,) = con.execute("SELECT current_setting('threads')").fetchone()
    con.execute("SET threads = 1")
    try:
        yield
    finally:
        con.execute(f"SET threads = {int(before)}")
