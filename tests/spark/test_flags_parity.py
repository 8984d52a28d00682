"""flags over a lake on Spark (the findings' SQL rendered for Spark, their statistics on the
driver) gives exactly the findings of flags on DuckDB, on the demo and the synthetic ledger."""

from __future__ import annotations

import pandas as pd

from ledger import Ledger
from ledger.scoring import spark as spark_scoring

from ..lake.synthetic import MIDWAY


def _same(duck: pd.DataFrame, other: pd.DataFrame) -> None:
    assert len(duck) > 0
    pd.testing.assert_frame_equal(duck.reset_index(drop=True), other.reset_index(drop=True), check_exact=True)


def test_flags_on_spark_equal_duckdb_on_the_demo(spark, demo_lake):
    with Ledger.open(demo_lake[0], read_only=True) as duck, spark_scoring.lake_ledger(spark, demo_lake[1]) as lake:
        _same(duck.flags(), lake.flags())


def test_flags_on_spark_equal_duckdb_on_the_synthetic_ledger(spark, synthetic_lake):
    with Ledger.open(synthetic_lake[0], read_only=True) as duck, \
            spark_scoring.lake_ledger(spark, synthetic_lake[1]) as lake:
        _same(duck.flags(kinds=["drift", "data"], as_of=MIDWAY), lake.flags(kinds=["drift", "data"], as_of=MIDWAY))
