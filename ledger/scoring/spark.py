"""Scoring a partitioned Parquet lake (``backsight export --partition``) on Spark.

The same query texts as DuckDB's, rendered for Spark SQL by :mod:`ledger.scoring.dialect`, run
over temporary views of the files the lake's manifest lists. :class:`SparkLake` offers the two
things the scoring layer asks of a ledger (``con.execute(sql, params)`` giving ``.df()`` /
``.fetchall()``, and ``get_setting``), so :func:`ledger.scoring.cells.scores`, the weighted
scores and the group totals run on it unchanged, and give the same table as DuckDB.

pyspark is optional (``pip install -e ".[spark]"``) and imported only when a function here runs.
The lake may be any Hadoop filesystem URI Spark can read (``s3a://bucket/lake``,
``abfss://…``, ``gs://…``, ``hdfs://…``); its manifest is read through Spark too.
"""

from __future__ import annotations

import datetime as dt
import os
import shutil
import sys
import warnings
from collections.abc import Sequence

from ..lazy import pandas as pd

from ..errors import LedgerError
from ..manifest import MANIFEST_NAME, Manifest, parse_manifest
from ..store import DDL, TABLES, quiet
from .dialect import SPARK, parse_statement

__all__ = ["SparkUnavailable", "SparkLake", "session", "scores", "lake_ledger"]

#: Spark settings the parity with DuckDB depends on (times are stored without a zone; UTC).
SETTINGS = {
    "spark.sql.session.timeZone": "UTC",
    "spark.sql.timestampType": "TIMESTAMP_NTZ",
    "spark.sql.execution.arrow.pyspark.enabled": "true",
}
#: Settings for a local session: small data, few cores, no web UI; 3 GB of driver heap because the
#: weighted scores over a lake ran out of the 1 GB default in a parity test.
LOCAL_SETTINGS = {"spark.sql.shuffle.partitions": "2", "spark.ui.enabled": "false",
                  "spark.ui.showConsoleProgress": "false", "spark.driver.memory": "3g",
                  # a lake has a file per partition and export; listing them is no job for a cluster here
                  "spark.sql.sources.parallelPartitionDiscovery.threshold": "100000"}


class SparkUnavailable(LedgerError):
    """pyspark or a Java runtime is missing, so Spark cannot start."""


def _check_runtime() -> None:
    try:
        import pyspark  # noqa: F401
    except ImportError:
        raise SparkUnavailable('Spark scoring needs pyspark: pip install -e ".[spark]" (or pip install pyspark)') from None
    home = os.environ.get("JAVA_HOME")
    if not shutil.which("java") and not (home and os.path.exists(os.path.join(home, "bin", "java"))):
        raise SparkUnavailable("Spark needs a Java runtime (17 or 21) and none was found: install one "
                               "(Debian/Ubuntu: apt-get install openjdk-17-jre-headless) or set JAVA_HOME")


def session(master: str | None = "local[2]", *, app_name: str = "backsight", conf: dict | None = None):
    """A SparkSession with the settings scoring needs; ``master`` None keeps the cluster's default.

    Raises :class:`SparkUnavailable` when pyspark or Java is missing.
    """
    _check_runtime()
    from pyspark.sql import SparkSession

    builder = SparkSession.builder.appName(app_name)
    settings = dict(SETTINGS)
    if master:
        builder = builder.master(master)
        if master.startswith("local"):
            settings.update(LOCAL_SETTINGS)
            # the grouped pandas UDFs of flags run in Python workers: this interpreter, with Backsight
            os.environ.setdefault("PYSPARK_PYTHON", sys.executable)
    for key, value in {**settings, **(conf or {})}.items():
        builder = builder.config(key, value)
    spark = builder.getOrCreate()
    spark.sparkContext.setLogLevel("ERROR")
    return spark


def _spark_types() -> dict[str, str]:
    """Per table, its schema as a Spark DDL string, from the ledger's own DDL."""
    import duckdb

    names = {"VARCHAR": "string", "DATE": "date", "INTEGER": "int", "BIGINT": "bigint",
             "DOUBLE": "double", "TIMESTAMP": "timestamp_ntz", "BOOLEAN": "boolean"}
    con = quiet(duckdb.connect())
    con.execute(DDL)
    rows = con.execute("SELECT table_name, column_name, data_type FROM information_schema.columns "
                       "ORDER BY table_name, ordinal_position").fetchall()
    con.close()
    out: dict[str, list[str]] = {}
    for table, column, kind in rows:
        out.setdefault(table, []).append(f"`{column}` {names[kind]}")
    return {t: ", ".join(cols) for t, cols in out.items()}


def _plain_text(fn):
    """``fn`` with its output's text columns as Python objects: pyspark's Arrow conversion of a
    UDF's output takes no pandas 3 Arrow-backed strings (a ``ChunkedArray`` error)."""
    def run(frame: pd.DataFrame) -> pd.DataFrame:
        out = fn(frame)
        return out.astype({c: object for c in out.columns if pd.api.types.is_string_dtype(out[c])})
    return run


class _Result:
    def __init__(self, frame):
        self.frame = frame

    def df(self) -> pd.DataFrame:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", FutureWarning)   # pyspark's notice about pandas 3
            return self.frame.toPandas()

    def fetchall(self) -> list[tuple]:
        return [tuple(r) for r in self.frame.collect()]

    def fetchone(self):
        rows = self.frame.limit(1).collect()
        return tuple(rows[0]) if rows else None


class _SparkSQL:
    """``execute(sql, params)`` for DuckDB-dialect texts, run as Spark SQL (see ledger.scoring.dialect)."""

    def __init__(self, spark):
        self.spark = spark
        self._temps: dict[str, object] = {}

    def execute(self, sql: str, params=None) -> _Result | None:
        stmt = parse_statement(sql, SPARK)
        args = _args(params)
        if stmt.kind == "drop_temp":
            frame = self._temps.pop(stmt.table, None)
            if frame is not None:
                frame.unpersist()
            self.spark.catalog.dropTempView(stmt.table)
            return None
        if stmt.kind == "delete_temp":
            old = self._temps.pop(stmt.table)
            kept = old.where(f"NOT coalesce(({stmt.sql}), false)").persist()   # DELETE keeps rows where c is NULL
            kept.createOrReplaceTempView(stmt.table)
            self._temps[stmt.table] = kept
            old.unpersist()
            return None
        frame = self.spark.sql(stmt.sql, args=args) if args else self.spark.sql(stmt.sql)
        if stmt.kind == "create_temp":
            frame = frame.persist()
            frame.createOrReplaceTempView(stmt.table)
            self._temps[stmt.table] = frame
            return None
        return _Result(frame)


def _args(params) -> dict | None:
    if not params:
        return None
    if not isinstance(params, dict):
        raise LedgerError("Spark scoring takes named parameters only ($name)")
    return {k: (pd.Timestamp(v).to_pydatetime() if isinstance(v, pd.Timestamp) else v) for k, v in params.items()}


class SparkLake:
    """A lake folder opened on a SparkSession: the ledger's tables as temporary views.

    Read-only. ``con`` runs the scoring queries; views are named like the ledger's tables, so
    one SparkLake per session at a time.
    """

    def __init__(self, spark, lake_dir: str | os.PathLike):
        self.spark = spark
        self.path = str(lake_dir).rstrip("/")
        self.manifest = _read_manifest(spark, self.path)
        self.con = _SparkSQL(spark)
        types = _spark_types()
        for table in TABLES:
            files = [f"{self.path}/{f.path}" for f in self.manifest.files_of(table)]
            if files:
                frame = spark.read.schema(types[table]).parquet(*files)
            else:
                frame = spark.createDataFrame([], schema=types[table])
            frame.createOrReplaceTempView(table)
        settings = dict(self.con.execute("SELECT key, value FROM meta").fetchall())
        self._settings = settings

    def get_setting(self, key: str) -> str | None:
        return self._settings.get(key)

    def apply_in_groups(self, sql: str, params: dict, *, keys: Sequence[str], fn, schema: str) -> pd.DataFrame:
        """The rows of a query (DuckDB dialect) grouped by ``keys``, each group handed to ``fn``
        (a pandas frame in, a pandas frame out) in Spark's Python workers (``applyInPandas``);
        the outputs of all groups, collected. ``schema``: Spark DDL of ``fn``'s output."""
        frame = self.con.execute(sql, params).frame
        return _Result(frame.groupBy(*keys).applyInPandas(_plain_text(fn), schema=schema)).df()

    def close(self) -> None:
        for table in TABLES:
            self.spark.catalog.dropTempView(table)


def _read_manifest(spark, path: str) -> Manifest:
    uri = f"{path}/{MANIFEST_NAME}"
    if "://" not in path and not os.path.exists(uri):
        raise LedgerError(f"{path} has no {MANIFEST_NAME}; give a folder written by backsight export --partition")
    rows = spark.read.text(uri, wholetext=True).collect()
    return parse_manifest(rows[0][0], uri)


def lake_ledger(spark, lake_dir):
    """A :class:`ledger.Ledger` whose read methods (scores, totals, flags…) run on Spark over the lake."""
    from ..api import Ledger

    return Ledger(SparkLake(spark, lake_dir))


def scores(spark, lake_dir, *, by: Sequence[str] = ("model", "horizon"), as_of: str | dt.datetime | None = None,
           models: Sequence[str] = (), series: Sequence[str] = (), horizons: Sequence[int] = (),
           since: str | None = None, until: str | None = None, where: Sequence[str] = (),
           weight: str | None = None, totals: str | None = None) -> pd.DataFrame:
    """The table of :meth:`ledger.Ledger.scores` (or, with ``totals=ATTR``, of ``Ledger.totals``),
    computed on ``spark`` over the lake at ``lake_dir``; the arguments are those of the CLI's ``scores``.
    """
    book = lake_ledger(spark, lake_dir)
    try:
        if totals is not None:
            return book.totals(totals, as_of=as_of, models=models, horizons=horizons, since=since, until=until)
        return book.scores(by=by, as_of=as_of, models=models, series=series, horizons=horizons, since=since,
                           until=until, where=where, weight=weight)
    finally:
        book.store.close()
