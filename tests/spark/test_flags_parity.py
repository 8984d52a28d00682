"""flags on Spark (drift in grouped pandas UDFs, the rest through the shared SQL) gives exactly
the findings of flags on DuckDB, on the demo ledger (drift and calibration findings) and on the
synthetic one (short sequences, so the per-model note is rebuilt from the groups' counts)."""

from __future__ import annotations

import pandas as pd

from ledger import Ledger
from ledger.findings.on_spark import spark_flags
from ledger.scoring import spark as spark_scoring

from ..lake.synthetic import MIDWAY


def _same(duck: pd.DataFrame, other: pd.DataFrame) -> None:
    pd.testing.assert_frame_equal(duck.reset_index(drop=True), other.reset_index(drop=True), check_exact=True)


def test_flags_on_spark_equal_duckdb_on_the_demo(spark, demo_lake):
    with Ledger.open(demo_lake[0], read_only=True) as duck, spark_scoring.lake_ledger(spark, demo_lake[1]) as lake:
        expected = duck.flags()
        got = spark_flags(lake)
    assert (expected["kind"] == "drift").sum() > 0 and (expected["kind"] == "calibration").sum() > 0
    _same(expected, got)


def test_drift_on_spark_equals_duckdb_with_short_sequences(spark, synthetic_lake):
    with Ledger.open(synthetic_lake[0], read_only=True) as duck, \
            spark_scoring.lake_ledger(spark, synthetic_lake[1]) as lake:
        expected = duck.flags(kinds=["drift", "data"], as_of=MIDWAY, reference=8)
        got = spark_flags(lake, kinds=["drift", "data"], as_of=MIDWAY, reference=8)
    notes = expected[(expected["kind"] == "drift") & (expected["severity"] == "note")]
    assert len(notes) == 2                                  # the weekly sequences are short for both models
    _same(expected, got)


def test_flags_by_attribute_is_refused_on_spark(runner, tmp_path):
    from ledger.cli import app

    r = runner.invoke(app, ["flags", "--engine", "spark", "--lake", str(tmp_path), "--by", "region"])
    assert r.exit_code == 2 and "--by is not available with --engine spark yet" in r.output
