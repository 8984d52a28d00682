"""flags over a lake on Spark gives exactly the findings of flags on DuckDB, on the demo and the
synthetic ledger. On Spark the per-group statistics run in grouped pandas UDFs
(``SparkLake.apply_in_groups``): the drift tests one model × horizon per group, the calibration
tests and their action figures one model × level per group, each the same function the ledger
file runs in process, giving the same rows bit for bit; the driver adjusts the p-values and
writes the findings from those rows, and never collects the interval misses. The rest of the
findings' SQL runs on Spark and their statistics on the driver."""

from __future__ import annotations

import pandas as pd
import pytest

from ledger import Ledger
from ledger.findings import flags as flags_module
from ledger.findings.calibration import TEST_FIELDS, level_tests
from ledger.findings.drift import SEQUENCE_COLUMNS, sequence_tests
from ledger.findings.base import FlagOptions
from ledger.scoring import spark as spark_scoring
from ledger.scoring.cells import interval_misses

from ..lake.synthetic import MIDWAY

DRIFT_KEYS, CALIBRATION_KEYS = ("model", "horizon"), ("model", "level")
# Loose enough that the small synthetic ledger has model findings both ways, a departing series
# and series too short to test (measured in process at MIDWAY: 9 findings, 4 of them notes).
LOOSE = dict(buckets=(1, 3), fdr=0.9, zone_watch=0.51, zone_out=0.9)


@pytest.fixture
def udf_calls(monkeypatch):
    """Every output of SparkLake.apply_in_groups during the test, by its group keys, so a test can
    show which statistics came from the UDF path."""
    calls: dict[tuple, list[pd.DataFrame]] = {}
    original = spark_scoring.SparkLake.apply_in_groups

    def spy(self, *args, keys, **kwargs):
        out = original(self, *args, keys=keys, **kwargs)
        calls.setdefault(tuple(keys), []).append(out)
        return out

    monkeypatch.setattr(spark_scoring.SparkLake, "apply_in_groups", spy)
    return calls


@pytest.fixture
def no_misses_on_the_driver(monkeypatch):
    """Call after the DuckDB side: from then on, reading the interval misses into the driver fails."""
    def refuse(*args, **kwargs):
        raise AssertionError("flags on Spark collected the interval misses to the driver")

    return lambda: monkeypatch.setattr(flags_module, "interval_misses", refuse)


def _same(duck: pd.DataFrame, other: pd.DataFrame) -> None:
    assert len(duck) > 0
    pd.testing.assert_frame_equal(duck.reset_index(drop=True), other.reset_index(drop=True), check_exact=True)


def _level_tests_in_process(book: Ledger, options: FlagOptions, as_of=None) -> pd.DataFrame:
    """level_tests over all the ledger file's interval misses at once, with what flags gives it."""
    freqs = dict(book.store.con.execute("SELECT series, frequency FROM series").fetchall())
    recent_from, _ = flags_module.recent_window(book.cells(as_of=as_of), options.recent)
    return level_tests(interval_misses(book.store, book.selection(as_of=as_of)), freqs, options, recent_from)


def _in_order(rows: pd.DataFrame) -> pd.DataFrame:
    return rows.sort_values(["test", "model", "level", "freq", "bucket", "series"], kind="stable").reset_index(drop=True)


def _check_calibration_rows(calls: dict, in_process: pd.DataFrame) -> pd.DataFrame:
    """The UDFs' rows are the in-process rows, bit for bit, one model × level per group."""
    [on_executors] = calls[CALIBRATION_KEYS]
    assert list(on_executors.columns) == [name for name, _ in TEST_FIELDS]
    assert len(on_executors) == len(in_process)
    levels = in_process.loc[in_process["test"] == "level", ["model", "level"]]
    assert (on_executors["test"] == "level").sum() == len(levels.drop_duplicates()) > 1
    pd.testing.assert_frame_equal(_in_order(on_executors), _in_order(in_process), check_exact=True, check_dtype=False)
    return on_executors


def test_flags_on_spark_equal_duckdb_on_the_demo(spark, demo_lake, udf_calls, no_misses_on_the_driver):
    with Ledger.open(demo_lake[0], read_only=True) as duck, spark_scoring.lake_ledger(spark, demo_lake[1]) as lake:
        found = duck.flags()
        n_sequences = duck.cells().groupby(["model", "series", "horizon"]).ngroups
        in_process = _level_tests_in_process(duck, FlagOptions())
        no_misses_on_the_driver()
        _same(found, lake.flags())
    assert (found["kind"] == "drift").sum() > 0
    assert ((found["kind"] == "calibration") & (found["severity"] != "note")).sum() > 0
    [drift] = udf_calls[DRIFT_KEYS]
    assert len(drift) == n_sequences     # one row per sequence, from the executors
    rows = _check_calibration_rows(udf_calls, in_process)
    assert {"coverage", "independence", "departure", "level"} <= set(rows["test"])


def test_flags_on_spark_equal_duckdb_on_the_synthetic_ledger(spark, synthetic_lake, udf_calls):
    with Ledger.open(synthetic_lake[0], read_only=True) as duck, \
            spark_scoring.lake_ledger(spark, synthetic_lake[1]) as lake:
        found = duck.flags(kinds=["drift", "data"], as_of=MIDWAY)
        _same(found, lake.flags(kinds=["drift", "data"], as_of=MIDWAY))
        cells = duck.cells(as_of=MIDWAY)
        # the UDFs' per-sequence tests themselves, bit for bit those of the whole frame in process
        [drift] = udf_calls[DRIFT_KEYS]
        on_executors = drift.sort_values(["model", "series", "horizon"], kind="stable").reset_index(drop=True)
        in_process = sequence_tests(cells, FlagOptions())
    assert CALIBRATION_KEYS not in udf_calls
    assert list(on_executors.columns) == list(SEQUENCE_COLUMNS)
    assert on_executors["judged"].any() and not on_executors["judged"].all()   # some records too short to judge
    pd.testing.assert_frame_equal(on_executors, in_process, check_exact=True, check_dtype=False)


def test_calibration_on_spark_equals_duckdb_on_the_synthetic_ledger(spark, synthetic_lake, udf_calls,
                                                                     no_misses_on_the_driver):
    with Ledger.open(synthetic_lake[0], read_only=True) as duck, \
            spark_scoring.lake_ledger(spark, synthetic_lake[1]) as lake:
        found = duck.flags(kinds=["calibration"], as_of=MIDWAY, **LOOSE)
        in_process = _level_tests_in_process(duck, FlagOptions.from_keywords(**LOOSE), as_of=MIDWAY)
        no_misses_on_the_driver()
        _same(found, lake.flags(kinds=["calibration"], as_of=MIDWAY, **LOOSE))
    assert {"too narrow", "too wide", "departs from the model (too narrow)", "not enough data"} <= set(found["check"])
    assert DRIFT_KEYS not in udf_calls
    rows = _check_calibration_rows(udf_calls, in_process)
    assert {"coverage", "independence", "departure", "unjudged", "level"} <= set(rows["test"])
