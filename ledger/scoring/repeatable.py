"""Sums that give the same floats on every run, however many threads add them: fixed-point integers.

DuckDB sums a group in parallel: each thread adds its share of the rows and the partial sums
are combined in the order the threads finish. Floating-point addition is not associative, so
the last digits of a mean moved from run to run (``backsight scores`` printed different CSV
bytes for the same ledger). Integer addition is associative: each value is scaled by a power of
two, rounded to a 128-bit integer (DuckDB's HUGEINT), and the integers are summed exactly, in
any order, on any number of threads. The scale is chosen per sum from an upper bound ``B`` on
the values' size and on the number of rows ``N``: ``x * 2**s`` with ``2**s * B * N < 2**125``,
so no sum can overflow (an overflow would be an error, never a wrong number). With ``N`` up to
a billion rows a value at the bound becomes an integer of at least 95 bits, so every value
within a factor 2**42 of the bound is added exactly and smaller ones lose less than
``B * 2**-95`` each: a sound but loose bound costs precision far below a double's, never
correctness. The exact integer sum is converted to a double once, through its decimal
text (correctly rounded), and divided by the count: ``avg(x) = round(round(Σx) / n)``.

This replaced running every aggregate on one DuckDB thread over cells sorted by their key,
which cost the sort and the second core (issue 17: 10M cells took 118 s instead of 9.6 s).

Another engine (Spark over a lake) gets plain ``sum``: it has no 128-bit integers, and its
parity with DuckDB is checked to 1e-9 relative, not to the bit (:mod:`ledger.scoring.dialect`).
"""

from __future__ import annotations

import dataclasses
import math

import duckdb

__all__ = ["Sums", "sums_for"]

_HEADROOM = 125   # bits: 2**125 < 2**127 - 1, the largest HUGEINT, with a factor 4 to spare


@dataclasses.dataclass(frozen=True)
class Sums:
    """Builds the SQL of order-independent sums for one engine.

    ``exact``: DuckDB (fixed-point HUGEINT sums); else plain ``sum``. ``rows``: an upper bound on
    the number of rows any one sum adds.
    """

    exact: bool
    rows: int = 1

    def total(self, expr: str, bound: float) -> str:
        """SQL: the sum of ``expr`` over the group, as a DOUBLE; NULL when every value is NULL.

        ``bound``: an upper bound on ``abs(expr)`` over the rows (loose is fine; too small is an error).
        """
        if not self.exact:
            return f"sum({expr})"
        s = self.shift(bound)
        up, down = repr(math.ldexp(1.0, s)), repr(math.ldexp(1.0, -s))
        return f"(CAST(CAST(sum(CAST(({expr}) * {up} AS HUGEINT)) AS VARCHAR) AS DOUBLE) * {down})"

    def mean(self, expr: str, bound: float) -> str:
        """SQL: the mean of the non-NULL values of ``expr`` (as ``avg``), order-independent."""
        if not self.exact:
            return f"avg({expr})"
        return f"({self.total(expr, bound)} / count({expr}))"

    def shift(self, bound: float) -> int:
        """The power of two ``s`` with ``2**s * bound * rows < 2**125`` (0 for a zero or unknown bound)."""
        if bound is None or math.isnan(bound) or bound <= 0:
            return 0                                 # no non-NULL value to add
        if math.isinf(bound):
            raise ValueError("an exact sum needs a finite bound on its values")
        _, e_bound = math.frexp(bound)              # bound < 2**e_bound
        _, e_rows = math.frexp(max(int(self.rows), 1))
        # the scaled values must also stay within the double range before the cast
        return max(min(_HEADROOM - e_bound - e_rows, 1000), -1000)


def sums_for(con, rows: int) -> Sums:
    """The :class:`Sums` for ``con``: exact on a DuckDB connection, plain on any other engine."""
    return Sums(isinstance(con, duckdb.DuckDBPyConnection), rows)
