"""Where a reading command computes: the ledger file (DuckDB), or a lake on DuckDB or on Spark.

The options ``--engine``, ``--lake`` and ``--spark-master`` are defined once here and used by
``scores`` and ``flags``; :func:`reading_ledger` opens what they name as a :class:`ledger.Ledger`,
whose read methods are the same whatever runs underneath.
"""

from __future__ import annotations

import contextlib
import enum
from pathlib import Path
from typing import Annotated

import typer

from ..api import Ledger
from .common import open_ledger

__all__ = ["Engine", "EngineOpt", "LakeOpt", "SparkMasterOpt", "reading_ledger"]


class Engine(str, enum.Enum):
    duckdb = "duckdb"
    spark = "spark"


EngineOpt = Annotated[Engine, typer.Option("--engine", help="duckdb (the default) or spark (needs --lake and the spark extra).")]
LakeOpt = Annotated[str | None, typer.Option("--lake", metavar="DIR", help="Read a lake written by export --partition instead of the ledger (a folder or a Hadoop filesystem URI).")]
SparkMasterOpt = Annotated[str | None, typer.Option("--spark-master", metavar="URL", help="Spark master (default local[2]; e.g. spark://host:7077, yarn).")]


@contextlib.contextmanager
def reading_ledger(ctx: typer.Context, engine: Engine, lake: str | None, master: str | None):
    """The ledger (or lake) the options name, closed when the block ends."""
    if engine is Engine.spark:
        if lake is None:
            raise typer.BadParameter("--engine spark reads a lake: add --lake DIR (written by export --partition)",
                                     param_hint="--engine")
        from ..scoring.spark import lake_ledger, session

        book = lake_ledger(session(master or "local[2]"), lake)
    elif lake is not None:
        if master is not None:
            raise typer.BadParameter("--spark-master needs --engine spark", param_hint="--spark-master")
        from ..lake import open_lake

        book = Ledger(open_lake(Path(lake)))
    else:
        if master is not None:
            raise typer.BadParameter("--spark-master needs --engine spark", param_hint="--spark-master")
        book = open_ledger(ctx)
    try:
        yield book
    finally:
        book.close()
