"""One local SparkSession for the whole test session, and the lakes the parity tests read."""

from __future__ import annotations

import pytest

from ledger import Ledger

from ..lake import synthetic


@pytest.fixture(scope="session")
def spark():
    """Spark local[2]. Missing pyspark or Java fails the tests with what to install (never a skip)."""
    from ledger.scoring.spark import SparkUnavailable, session

    try:
        spark = session("local[2]", app_name="backsight-tests")
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
