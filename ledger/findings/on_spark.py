"""``flags`` on Spark over a lake: drift statistics per series × model in grouped pandas UDFs.

The drift tests need each series × model × horizon record in target-period order, which a SQL
aggregate cannot give; on Spark the scored cells (the same SQL as DuckDB's, rendered for Spark)
are grouped by model and series and each group is handed to
:func:`ledger.findings.drift.drift_findings` — the very function DuckDB's path calls — with
``applyInPandas``, on the executors. A group's findings are exactly what the whole-ledger call
finds for that series × model; the one note per model ("drift not judged on n of N
sequences") is rebuilt on the driver from each group's counts (:func:`~ledger.findings.drift.short_note`).

Calibration, value-added and data findings run through :func:`ledger.findings.flags.flags` on
the same lake: their SQL on Spark, their tests (which pool many series under one false-finding
control) on the driver. Findings therefore equal DuckDB's exactly (tested in tests/spark).
"""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence

import pandas as pd

from ..scoring.cells import Selection, cells_sql
from ..scoring.dialect import SPARK, render
from ..stats.signals import reference_length
from .base import FINDING_COLUMNS, KINDS, Finding, FlagOptions, check_models, findings_frame, known_models
from .drift import drift_findings, short_note
from .flags import flags as ledger_flags
from .summary import keep_findings

__all__ = ["spark_flags", "spark_drift_findings"]

_TALLY = "drift-tally"   # a group's row of counts, never a finding
_SCHEMA = ("kind string, series string, model string, horizon int, level double, since string, figure double, "
           "evidence string, check string, severity string, zone string, horizons string, raised string, "
           "measure string, p_value double, n long")
_CELL_COLUMNS = ["model", "series", "horizon", "period_index", "frequency", "e", "q"]


def _group_findings(seasons: dict[str, int], options: FlagOptions):
    """The UDF: one series × model's cells in, its drift findings and one tally row out."""
    def run(cells: pd.DataFrame) -> pd.DataFrame:
        found = drift_findings(cells, seasons, options)
        model, series = str(cells["model"].iloc[0]), str(cells["series"].iloc[0])
        short = sum(int(f.figure) for f in found if f.severity == "note")
        ref = options.reference or reference_length(int(seasons.get(series, 1)))
        rows = [dataclasses.asdict(f) for f in found if f.severity != "note"]
        rows.append(dict(kind=_TALLY, series=series, model=model, horizon=None, level=float(ref), since="",
                         figure=float(short), evidence="", check="", n=int(cells["horizon"].nunique())))
        frame = pd.DataFrame(rows, columns=list(FINDING_COLUMNS))
        numbers = {"horizon": "Int32", "level": "float64", "figure": "float64", "p_value": "float64", "n": "int64"}
        # text as plain objects: pyspark's Arrow conversion takes no Arrow-backed pandas strings
        return frame.astype({c: numbers.get(c, object) for c in frame.columns})
    return run


def spark_drift_findings(lake, sel: Selection, options: FlagOptions, seasons: dict[str, int],
                         subjects: Sequence[str]) -> list[Finding]:
    """Drift findings of the ``subjects`` models over the cells of ``sel`` (any model filter ignored)."""
    from pyspark.sql import functions as F

    sql, params = cells_sql(dataclasses.replace(sel, models=()))
    cells = lake.spark.sql(render(sql, SPARK), args=params).where(F.col("model").isin(list(subjects)))
    out = (cells.select(*_CELL_COLUMNS).groupBy("model", "series")
           .applyInPandas(_group_findings(seasons, options), schema=_SCHEMA))
    rows = [r.asDict() for r in out.collect()]
    found = [Finding(**r) for r in rows if r["kind"] != _TALLY]
    tallies: dict[str, list] = {}
    for r in rows:
        if r["kind"] == _TALLY:
            t = tallies.setdefault(r["model"], [0, 0, set()])
            t[0] += int(r["figure"])
            t[1] += int(r["n"])
            t[2].add(int(r["level"]))
    return found + [short_note(model, *t) for model, t in tallies.items() if t[0]]


def spark_flags(book, *, kinds: Sequence[str] = KINDS, severities: Sequence[str] = (), models: Sequence[str] = (),
                series: Sequence[str] = (), horizons: Sequence[int] = (), since: str | None = None,
                until: str | None = None, where: Sequence = (), as_of=None, **thresholds) -> pd.DataFrame:
    """:meth:`ledger.Ledger.flags` for a Ledger over a :class:`ledger.scoring.spark.SparkLake`."""
    store = book.store
    sel = book.selection(as_of=as_of, models=models, series=series, horizons=horizons, since=since,
                         until=until, where=where)
    chosen = [str(k).strip().lower() for k in kinds] or list(KINDS)
    options = FlagOptions.from_keywords(**thresholds)
    check_models(store, list(sel.models) + ([options.benchmark] if options.benchmark else []))
    rest = [k for k in chosen if k != "drift"]
    found: list[Finding] = []
    if rest:
        frame = ledger_flags(store, sel, kinds=rest, **thresholds)
        found += [Finding(**{k: (None if pd.isna(v) and k in ("horizon", "level") else v) for k, v in row.items()})
                  for row in frame.to_dict("records")]
    if "drift" in chosen:
        rows = store.con.execute("SELECT series, season_length FROM series").fetchall()
        seasons = {s: int(m) for s, m in rows}
        found += spark_drift_findings(store, sel, options, seasons, list(sel.models) or known_models(store))
    return keep_findings(store, sel, findings_frame(found), severities)
