"""Spark local[2] over the lake gives the same score tables as DuckDB over the ledger file.

Every grouping key, each filter, --as-of, --weight (volume and an attribute) and --totals, on
the synthetic ledger (three frequencies, a gap, zeros, revisions, a superseded run) and on the
demo ledger; DuckDB over the lake is checked against the ledger file on the same calls.
"""

from __future__ import annotations

import io

import pandas as pd
import pytest

from ledger import Ledger
from ledger.lake import open_lake
from ledger.scoring import spark as spark_scoring

from ..lake.synthetic import MIDWAY
from .parity import assert_same_table

# Each Spark call costs seconds of planning, so each covers several features at once.
SPARK_CALLS = {
    "model-horizon": dict(by=["model", "horizon"]),
    "series-origin-as-of": dict(by=["series", "model", "origin"], as_of=MIDWAY),
    "filters-where-period": dict(by=["region", "model", "period"], models=["alpha"],
                                 series=["m0", "m1", "m2", "q1", "w0"], horizons=[1, 2], since="2023-06",
                                 until="2024-03", where=["region=north"]),
    "weight-as-of": dict(by=["region"], weight="unit_price", as_of=MIDWAY),
}
CALLS = {**SPARK_CALLS, "everything": dict(by=[]), "volume": dict(by=["model"], weight="volume")}


@pytest.fixture(scope="module")
def on_spark(spark, synthetic_lake):
    book = spark_scoring.lake_ledger(spark, synthetic_lake[1])
    yield book
    book.close()


@pytest.fixture(scope="module")
def on_duckdb(synthetic_lake):
    with Ledger.open(synthetic_lake[0], read_only=True) as book:
        yield book


def test_spark_scores_equal_duckdb_for_every_call(on_spark, on_duckdb):
    """All the Spark calls in one test, every mismatch reported (not only the first call's)."""
    wrong = {}
    for name, call in SPARK_CALLS.items():
        try:
            assert_same_table(on_duckdb.scores(**call), on_spark.scores(**call))
        except AssertionError as exc:
            wrong[name] = str(exc)
    assert not wrong, wrong


@pytest.mark.parametrize("name", CALLS)
def test_duckdb_over_the_lake_equals_the_ledger_file(name, on_duckdb, synthetic_lake):
    with Ledger(open_lake(synthetic_lake[1])) as lake:
        assert_same_table(on_duckdb.scores(**CALLS[name]), lake.scores(**CALLS[name]))


def test_the_synthetic_ledger_has_what_parity_must_cover(on_duckdb):
    table = on_duckdb.scores(by=["series"])
    runs = on_duckdb.runs()
    assert set(runs["frequency"]) == {"monthly", "quarterly", "weekly"}
    assert runs["superseded_by"].notna().sum() == 1
    assert table.set_index("series").loc["m2", "n_zero_actual"] > 0
    assert table.set_index("series").loc["m3", "n_unscaled"] > 0
    with on_duckdb.store.con.cursor() as con:
        assert con.execute("SELECT count(*) FROM actuals WHERE revision > 1").fetchone()[0] > 0
    assert "pinball" in table.columns and "coverage_95" in table.columns


def test_the_functional_call_matches_the_cli_table(spark, synthetic_lake, on_duckdb):
    """``ledger.scoring.spark.scores(spark, lake_dir, …)``: the Ledger-free call of the issue."""
    got = spark_scoring.scores(spark, str(synthetic_lake[1]), totals="region", as_of=MIDWAY, horizons=[1, 2, 3])
    duck = on_duckdb.totals("region", as_of=MIDWAY, horizons=[1, 2, 3])
    assert_same_table(duck, got)
    assert (duck["n_left_out"] > 0).any()             # the gap in m1 leaves north's cells out


def test_spark_scores_equal_duckdb_on_the_demo(spark, demo_lake):
    with Ledger.open(demo_lake[0], read_only=True) as duck, spark_scoring.lake_ledger(spark, demo_lake[1]) as lake:
        assert_same_table(duck.scores(by=["model", "horizon"]), lake.scores(by=["model", "horizon"]))


def test_cli_scores_on_spark_print_the_duckdb_table(spark, synthetic_lake, runner):
    from ledger.cli import app

    path, lake = synthetic_lake
    duck = runner.invoke(app, ["--ledger", str(path), "scores", "--by", "model", "--format", "csv"])
    on_lake = runner.invoke(app, ["scores", "--by", "model", "--format", "csv", "--lake", str(lake)])
    on_spark = runner.invoke(app, ["scores", "--by", "model", "--format", "csv", "--engine", "spark",
                                   "--lake", str(lake), "--spark-master", "local[2]"])
    assert duck.exit_code == on_lake.exit_code == on_spark.exit_code == 0, on_spark.output
    table = pd.read_csv(io.StringIO(duck.stdout))
    assert_same_table(table, pd.read_csv(io.StringIO(on_lake.stdout)))
    assert_same_table(table, pd.read_csv(io.StringIO(on_spark.stdout)))


def test_spark_needs_a_lake(runner, tmp_path):
    from ledger.cli import app

    r = runner.invoke(app, ["--ledger", str(tmp_path / "x.duckdb"), "scores", "--engine", "spark"])
    assert r.exit_code == 2 and "--engine spark reads a lake: add --lake DIR" in r.output


def test_missing_java_is_an_error_that_says_what_to_install(monkeypatch):
    from ledger.scoring.spark import SparkUnavailable, session

    monkeypatch.setenv("PATH", "")
    monkeypatch.delenv("JAVA_HOME", raising=False)
    with pytest.raises(SparkUnavailable, match=r"needs a Java runtime \(17 or 21\).*apt-get install openjdk-17-jre-headless"):
        session("local[1]")
