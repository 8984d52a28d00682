"""One local SparkSession for the whole test session, and the lakes the parity tests read."""

from __future__ import annotations

import pytest

from ledger import Ledger

from ..lake import synthetic


# For a test run of many small queries, on top of the local settings of ledger.scoring.spark: compiling
# each query's generated code, re-planning it adaptively and the JVM's optimising compiler are
# expected to cost more CPU than they save on a few thousand rows; one garbage-collector thread on
# a two-core machine. Measured 2026-12-04 (load average 2.4-3.5), the first two calls of
# test_scores_parity's SPARK_CALLS in a fresh session: 30.9 s wall, 44.8 s of JVM CPU; whole-stage
# code generation on, 37.0 s and 52.0 s; the full JIT, 63.1 s and 67.2 s (its first call 39.9 s
# against 16.5 s). Adaptive execution on its own was not measured.
TEST_SETTINGS = {
    "spark.sql.codegen.wholeStage": "false",
    "spark.sql.adaptive.enabled": "false",
    "spark.driver.extraJavaOptions": "-XX:TieredStopAtLevel=1 -XX:+UseSerialGC",
    "spark.sql.execution.arrow.pyspark.fallback.enabled": "false",
    "spark.default.parallelism": "2",
}


@pytest.fixture(scope="session")
def spark():
    """Spark local[2]. Missing pyspark or Java fails the tests with what to install (never a skip)."""
    from ledger.scoring.spark import SparkUnavailable, session

    try:
        spark = session("local[2]", app_name="backsight-tests", conf=TEST_SETTINGS)
    except SparkUnavailable as exc:
        pytest.fail(f"{exc}. The Spark parity tests need it; .ci/run installs the spark extra.")
    yield spark
    spark.stop()


@pytest.fixture(scope="session")
def synthetic_lake(tmp_path_factory):
    """(ledger file, lake folder) of the synthetic ledger, exported in two steps (incremental)."""
    root = tmp_path_factory.mktemp("synthetic")
    path, lake = root / "synthetic.duckdb", root / "lake"
    synthetic.build(path)
    with Ledger.open(path) as book:
        book.export_lake(lake)
    return path, lake


@pytest.fixture(scope="session")
def demo_lake(demo_site, tmp_path_factory):
    """(ledger file, lake folder) of the session's demo ledger."""
    path = demo_site[1].replay.ledger_path
    lake = tmp_path_factory.mktemp("demo-lake") / "lake"
    with Ledger.open(path, read_only=True) as book:
        book.export_lake(lake)
    return path, lake
