"""``verify``: an integrity check of a ledger file, reporting problems instead of raising.

Checks: the schema version; every run's content hash recomputed from its stored rows; each
run's cell count; no forecast without its run, no bound or quantile without its forecast, no
duplicate forecast; superseding links that point at real runs; actual revisions numbered
1..n without holes, for series the ledger knows.
"""

from __future__ import annotations

import dataclasses

import pandas as pd

from .intake.record import run_content_hash
from .store import SCHEMA_VERSION, Store, bounded_memory
from .wording import format_level

__all__ = ["Problem", "verify"]


@dataclasses.dataclass(frozen=True)
class Problem:
    """One thing wrong with a ledger file, in words."""

    check: str
    detail: str

    def __str__(self) -> str:
        return f"{self.check}: {self.detail}"


_ORPHANS = {
    "forecasts without a run": "SELECT count(*) FROM forecasts f WHERE f.run_id NOT IN (SELECT run_id FROM runs)",
    "bounds without a forecast": """
        SELECT count(*) FROM bounds b WHERE NOT EXISTS (SELECT 1 FROM forecasts f
        WHERE f.run_id = b.run_id AND f.series = b.series AND f.period_index = b.period_index)""",
    "quantiles without a forecast": """
        SELECT count(*) FROM quantiles q WHERE NOT EXISTS (SELECT 1 FROM forecasts f
        WHERE f.run_id = q.run_id AND f.series = q.series AND f.period_index = q.period_index)""",
    "duplicate forecasts": """
        SELECT count(*) FROM (SELECT run_id, series, period_index FROM forecasts
        GROUP BY ALL HAVING count(*) > 1)""",
    "duplicate bounds": """
        SELECT count(*) FROM (SELECT run_id, series, period_index, level FROM bounds
        GROUP BY ALL HAVING count(*) > 1)""",
    "forecasts of unknown series": "SELECT count(*) FROM forecasts WHERE series NOT IN (SELECT series FROM series)",
    "actuals of unknown series": "SELECT count(*) FROM actuals WHERE series NOT IN (SELECT series FROM series)",
    "dangling superseded_by": """
        SELECT count(*) FROM runs WHERE superseded_by IS NOT NULL
        AND superseded_by NOT IN (SELECT run_id FROM runs)""",
    "orphaned or missing revisions": """
        SELECT count(*) FROM (SELECT series, period_index, count(*) n, max(revision) top,
        count(DISTINCT revision) d FROM actuals GROUP BY series, period_index)
        WHERE top <> n OR d <> n""",
    "crossed bounds": "SELECT count(*) FROM bounds WHERE lower > upper",
}


def verify(store: Store, *, progress=None) -> list[Problem]:
    """Every problem found in the ledger; an empty list means the ledger is sound."""
    problems = _schema(store)
    with bounded_memory(store.con):
        for check, sql in _ORPHANS.items():
            count = store.con.execute(sql).fetchall()[0][0]
            if count:
                problems.append(Problem(check, f"{count} row(s)"))
        problems += _run_hashes(store, progress)
    return problems


def _schema(store: Store) -> list[Problem]:
    found = store.get_setting("schema_version")
    if found != str(SCHEMA_VERSION):
        return [Problem("schema version", f"{found!r}, expected {SCHEMA_VERSION}")]
    return []


def _run_hashes(store: Store, progress) -> list[Problem]:
    runs = store.con.execute(
        "SELECT run_id, model, frequency, origin_index, content_hash, n_cells FROM runs ORDER BY run_id").fetchall()
    problems = []
    for i, (run_id, model, freq, origin_index, stored, n_cells) in enumerate(runs):
        part = run_rows(store, run_id)
        if len(part) != n_cells:
            problems.append(Problem("cell count", f"run {run_id} has {len(part)} forecasts; recorded {n_cells}"))
        elif run_content_hash(model, freq, origin_index, part) != stored:
            problems.append(Problem("content hash", f"run {run_id} ({model}) does not match its recorded hash"))
        if progress:
            progress(i + 1, len(runs))
    return problems


def run_rows(store: Store, run_id: str) -> pd.DataFrame:
    """A run's rows in the wide form that :func:`ledger.intake.record.run_content_hash` reads."""
    con = store.con
    part = con.execute("SELECT series, period_index, point FROM forecasts WHERE run_id = ?", [run_id]).df()
    bounds = con.execute("SELECT series, period_index, level, lower, upper FROM bounds WHERE run_id = ?", [run_id]).df()
    for level, rows in bounds.groupby("level"):
        name = format_level(float(level))
        rows = rows.drop(columns="level").rename(columns={"lower": f"lower_{name}", "upper": f"upper_{name}"})
        part = part.merge(rows, on=["series", "period_index"], how="left")
    quants = con.execute("SELECT series, period_index, tau, value FROM quantiles WHERE run_id = ?", [run_id]).df()
    for tau, rows in quants.groupby("tau"):
        part = part.merge(rows.drop(columns="tau").rename(columns={"value": f"q_{format_level(tau)}"}),
                          on=["series", "period_index"], how="left")
    return part
