"""The two SQL dialects the scoring queries run in, and how one query text is rendered for each.

The scoring SQL (:mod:`ledger.scoring.cells`, :mod:`ledger.store`'s as-of views, attributes,
weights and totals) is written once, in standard SQL with DuckDB's notation for the few things
that have no standard form. This table lists those things and their Spark SQL spelling; the
DuckDB text runs unchanged, and :func:`render` rewrites it for Spark:

=====================  ==========================  ==============================
what                   DuckDB (as written)         Spark SQL (rendered)
=====================  ==========================  ==============================
named parameter        ``$as_of``                  ``:as_of``
set from a list        ``unnest($keys)``           ``explode(:keys)``
list membership        ``list_contains($k, x)``    ``array_contains(:k, x)``
temporary table        ``CREATE OR REPLACE TEMP    a cached DataFrame registered
                       TABLE t AS SELECT …``       as temporary view ``t``
delete rows of it      ``DELETE FROM t WHERE c``   the view replaced by its rows without c
drop it                ``DROP TABLE IF EXISTS t``  uncache and drop the view
=====================  ==========================  ==============================

One more difference is not SQL: DuckDB's sums are fixed-point 128-bit integer sums
(:mod:`ledger.scoring.repeatable`) so that the same ledger prints the same bytes; Spark sums in
partitions in whatever order they finish, so its last digits can differ from run to run (the
parity tests allow 1e-9 relative).

Everything else the queries use is common to both: joins, CTEs, window functions with a named
``WINDOW`` clause, ``count(*) FILTER (WHERE …)``, ``greatest``, ``CASE``. Literals that must be
floating point are written ``CAST(1 AS DOUBLE)``: ``1.0`` is a DECIMAL in both dialects, and
Spark's average of a DECIMAL keeps only a few digits (DuckDB returns a DOUBLE).
"""

from __future__ import annotations

import dataclasses
import re

__all__ = ["Dialect", "DUCKDB", "SPARK", "Statement", "render", "parse_statement"]

_PARAM = re.compile(r"\$([A-Za-z_][A-Za-z0-9_]*)")
_CREATE = re.compile(r"^\s*CREATE\s+OR\s+REPLACE\s+TEMP(?:ORARY)?\s+TABLE\s+(\w+)\s+AS\s+(.*)$", re.S | re.I)
_DELETE = re.compile(r"^\s*DELETE\s+FROM\s+(\w+)\s+WHERE\s+(.*)$", re.S | re.I)
_DROP = re.compile(r"^\s*DROP\s+TABLE\s+IF\s+EXISTS\s+(\w+)\s*;?\s*$", re.I)


@dataclasses.dataclass(frozen=True)
class Dialect:
    """How one SQL engine spells the non-standard parts (see the module docstring)."""

    name: str
    param: str                       # format of a named parameter marker, with {name}
    functions: tuple[tuple[str, str], ...] = ()   # (DuckDB name, this dialect's name)


DUCKDB = Dialect("duckdb", "${name}")
SPARK = Dialect("spark", ":{name}", functions=(("unnest", "explode"), ("list_contains", "array_contains")))


def render(sql: str, dialect: Dialect) -> str:
    """The query text for ``dialect`` (the DuckDB text itself for DuckDB)."""
    if dialect is DUCKDB:
        return sql
    out = _PARAM.sub(lambda m: dialect.param.format(name=m.group(1)), sql)
    for ours, theirs in dialect.functions:
        out = re.sub(rf"\b{ours}\s*\(", f"{theirs}(", out, flags=re.I)
    return out


@dataclasses.dataclass(frozen=True)
class Statement:
    """A statement as an engine must run it: a query, or the creation or removal of a temp table."""

    kind: str        # "query", "create_temp", "delete_temp" (sql: the condition) or "drop_temp"
    table: str | None
    sql: str | None  # the SELECT of a query or of a temp table, in the engine's dialect


def parse_statement(sql: str, dialect: Dialect) -> Statement:
    """Split off the temp-table statements that Spark runs through its DataFrame API."""
    if m := _CREATE.match(sql):
        return Statement("create_temp", m.group(1), render(m.group(2), dialect))
    if m := _DELETE.match(sql):
        return Statement("delete_temp", m.group(1), render(m.group(2), dialect))
    if m := _DROP.match(sql):
        return Statement("drop_temp", m.group(1), None)
    return Statement("query", None, render(sql, dialect))
