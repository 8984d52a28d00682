"""flags over a lake on Spark gives exactly the findings of flags on DuckDB, on the demo and the
synthetic ledger. On Spark the per-sequence drift tests run in grouped pandas UDFs (one model ×
horizon per group, ``SparkLake.apply_in_groups``); the rest of the findings' SQL runs on Spark
and their statistics on the driver."""

from __future__ import annotations

import pandas as pd
import pytest

from ledger import Ledger
from ledger.findings.drift import SEQUENCE_COLUMNS, sequence_tests
from ledger.findings.base import FlagOptions
from ledger.scoring import spark as spark_scoring

from ..lake.synthetic import MIDWAY


@pytest.fixture
def udf_calls(monkeypatch):
    """Every output of SparkLake.apply_in_groups during the test, so a test can show the UDF path ran."""
    calls = []
    original = spark_scoring.SparkLake.apply_in_groups

    def spy(self, *args, **kwargs):
        out = original(self, *args, **kwargs)
        calls.append(out)
        return out

    monkeypatch.setattr(spark_scoring.SparkLake, "apply_in_groups", spy)
    return calls


def _same(duck: pd.DataFrame, other: pd.DataFrame) -> None:
    assert len(duck) > 0
    pd.testing.assert_frame_equal(duck.reset_index(drop=True), other.reset_index(drop=True), check_exact=True)


def test_flags_on_spark_equal_duckdb_on_the_demo(spark, demo_lake, udf_calls):
    with Ledger.open(demo_lake[0], read_only=True) as duck, spark_scoring.lake_ledger(spark, demo_lake[1]) as lake:
        found = duck.flags()
        _same(found, lake.flags())
        n_sequences = duck.cells().groupby(["model", "series", "horizon"]).ngroups
    assert (found["kind"] == "drift").sum() > 0
    assert len(udf_calls) == 1 and len(udf_calls[0]) == n_sequences     # one row per sequence, from the executors


def test_flags_on_spark_equal_duckdb_on_the_synthetic_ledger(spark, synthetic_lake, udf_calls):
    with Ledger.open(synthetic_lake[0], read_only=True) as duck, \
            spark_scoring.lake_ledger(spark, synthetic_lake[1]) as lake:
        found = duck.flags(kinds=["drift", "data"], as_of=MIDWAY)
        _same(found, lake.flags(kinds=["drift", "data"], as_of=MIDWAY))
        cells = duck.cells(as_of=MIDWAY)
        # the UDFs' per-sequence tests themselves, bit for bit those of the whole frame in process
        on_executors = udf_calls[0].sort_values(["model", "series", "horizon"], kind="stable").reset_index(drop=True)
        in_process = sequence_tests(cells, FlagOptions())
    assert list(on_executors.columns) == list(SEQUENCE_COLUMNS)
    assert on_executors["judged"].any() and not on_executors["judged"].all()   # some records too short to judge
    pd.testing.assert_frame_equal(on_executors, in_process, check_exact=True, check_dtype=False)
