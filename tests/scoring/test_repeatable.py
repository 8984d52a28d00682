"""Scores are reproducible byte for byte: the same ledger gives the same CSV on every run.

Before the sums were made order-independent (ledger/scoring/repeatable.py: fixed-point 128-bit
integer sums), four runs of ``scores --by model,horizon --format csv`` on the demo ledger
printed four different files (last-digit float differences from DuckDB's parallel sums).
"""

from __future__ import annotations

import math
from fractions import Fraction

import duckdb
import numpy as np
import pytest

from ledger.cli import app
from ledger.scoring.repeatable import Sums


def _outputs(demo_site, runner, command: str, by: str) -> set[str]:
    """The distinct CSV outputs of four runs of ``command --by BY`` on the demo ledger."""
    _, result = demo_site
    args = ["--ledger", str(result.replay.ledger_path), command, "--by", by, "--format", "csv"]
    outputs = set()
    for _ in range(4):
        run = runner.invoke(app, args)
        assert run.exit_code == 0, run.stderr
        outputs.add(run.stdout)
    return outputs


@pytest.mark.parametrize("by", ["model,horizon", "series,model", "model,period"])
def test_scores_csv_is_the_same_on_every_run(demo_site, runner, by):
    outputs = _outputs(demo_site, runner, "scores", by)
    assert len(outputs) == 1
    assert outputs.pop().count("\n") > 10     # groups were scored, not an empty table


@pytest.mark.parametrize("by", ["series,model", "model"])
def test_stability_csv_is_the_same_on_every_run(demo_site, runner, by):
    """Before the revision mean used the same sums, three runs on the demo ledger printed three files."""
    outputs = _outputs(demo_site, runner, "stability", by)
    assert len(outputs) == 1
    assert outputs.pop().count("\n") > 3


def _values(n: int = 200_000) -> np.ndarray:
    """Values whose plain double sum depends on the order: mixed signs, magnitudes 1e-6..1e9."""
    rng = np.random.default_rng(5)
    return rng.standard_normal(n) * 10.0 ** rng.integers(-6, 10, n)


def test_fixed_point_sums_are_the_same_in_any_order_and_thread_count():
    x = _values()
    sums = Sums(True, rows=len(x))
    bound = float(np.abs(x).max())
    got, plain = set(), set()
    for seed, threads in ((0, 1), (1, 2), (2, 4), (3, 2)):
        con = duckdb.connect()
        con.execute(f"SET threads = {threads}")
        order = np.random.default_rng(seed).permutation(len(x))
        con.register("t", {"x": x[order], "g": order % 3})
        got.add(tuple(con.execute(f"SELECT g, {sums.mean('x', bound)}, {sums.total('x', bound)} FROM t "
                                  "GROUP BY g ORDER BY g").fetchall()))
        plain.add(con.execute("SELECT sum(x) FROM t").fetchone()[0])
        con.close()
    assert len(got) == 1
    assert len(plain) > 1    # the plain double sum does move with the order: the check above can fail


def test_fixed_point_total_is_the_correctly_rounded_exact_sum():
    x = _values(50_000)
    sums = Sums(True, rows=len(x))
    con = duckdb.connect()
    con.register("t", {"x": x})
    got = con.execute(f"SELECT {sums.total('x', float(np.abs(x).max()))} FROM t").fetchone()[0]
    # math.fsum returns the correctly rounded sum (Shewchuk 1997, "Adaptive precision floating-point
    # arithmetic"; Python's documentation of math.fsum); the fixed-point sum keeps every value to
    # 2**-75 here, a million times finer than the sum's last bit, so the two are equal.
    assert got == math.fsum(x)
    assert float(sum(Fraction(float(v)) for v in x)) == got


def test_a_bound_that_is_too_small_is_an_error_not_a_wrong_number():
    sums = Sums(True, rows=4)
    con = duckdb.connect()
    with pytest.raises(duckdb.Error):
        con.execute(f"SELECT {sums.total('x', 1.0)} FROM (VALUES (1e30), (2e30)) v(x)").fetchall()


def test_other_engines_get_plain_sums():
    sums = Sums(False)
    assert sums.total("x", 5.0) == "sum(x)" and sums.mean("x", 5.0) == "avg(x)"
