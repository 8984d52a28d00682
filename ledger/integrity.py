"""``verify``: an integrity check of a ledger file, reporting problems instead of raising.

Everything that can be recomputed is: the schema (tables, columns, types, against the DDL) and
its version; every run's content hash and cell count; every actual revision's chain hash and
every write of actuals' row count and hash (:mod:`ledger.hashing`); periods against period
indexes, horizons against origins, series' frequencies against their runs' and the stored
dates; superseding links (dangling, self, to another model or origin, to an older run);
orphan and duplicate rows; revisions numbered 1..n; overrides naming known models, never
themselves, one version per override and time. DuckDB's own read and checksum errors
(a truncated file, flipped bytes) become problems too: ``verify`` lists, it never raises.
"""

from __future__ import annotations

import dataclasses

import duckdb

from .hashing import chain_hash_sql, run_content_hash, run_rows, write_hash_sql
from .store import DDL, SCHEMA_VERSION, Store, bounded_memory, quiet

__all__ = ["Problem", "verify"]


@dataclasses.dataclass(frozen=True)
class Problem:
    """One thing wrong with a ledger file, in words."""

    check: str
    detail: str

    def __str__(self) -> str:
        return f"{self.check}: {self.detail}"


def _index_sql(day: str, freq: str) -> str:
    """SQL: the period index of DATE ``day`` for frequency column ``freq`` (as periods.period_index)."""
    return (f"CASE {freq} WHEN 'yearly' THEN year({day}) WHEN 'quarterly' THEN 4 * year({day}) + (month({day}) - 1) // 3 "
            f"WHEN 'monthly' THEN 12 * year({day}) + month({day}) - 1 "
            f"WHEN 'weekly' THEN ({day} - DATE '1970-01-05') // 7 WHEN 'daily' THEN {day} - DATE '1970-01-01' END")


def _is_start_sql(day: str, freq: str) -> str:
    """SQL: whether ``day`` is the first day of a period of frequency ``freq``."""
    return (f"CASE {freq} WHEN 'yearly' THEN month({day}) = 1 AND day({day}) = 1 "
            f"WHEN 'quarterly' THEN month({day}) IN (1, 4, 7, 10) AND day({day}) = 1 "
            f"WHEN 'monthly' THEN day({day}) = 1 WHEN 'weekly' THEN isodow({day}) = 1 "
            f"WHEN 'daily' THEN true ELSE false END")


def _period_mismatch(day: str, index: str, freq: str) -> str:
    return f"NOT ({_is_start_sql(day, freq)}) OR {index} IS DISTINCT FROM {_index_sql(day, freq)}"


_CHAIN = chain_hash_sql("p.chain_hash", "a.series", "a.period_index", "a.revision", "a.value", "a.recorded_at")

#: check name -> SQL counting the rows that fail it
CHECKS = {
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
    "duplicate quantiles": """
        SELECT count(*) FROM (SELECT run_id, series, period_index, tau FROM quantiles
        GROUP BY ALL HAVING count(*) > 1)""",
    "levels outside (0, 100) or taus outside (0, 1)": """
        SELECT (SELECT count(*) FROM bounds WHERE NOT (level > 0 AND level < 100))
             + (SELECT count(*) FROM quantiles WHERE NOT (tau > 0 AND tau < 1))""",
    "forecasts of unknown series": "SELECT count(*) FROM forecasts WHERE series NOT IN (SELECT series FROM series)",
    "actuals of unknown series": "SELECT count(*) FROM actuals WHERE series NOT IN (SELECT series FROM series)",
    "unknown frequency or season length": """
        SELECT (SELECT count(*) FROM series WHERE frequency NOT IN ('yearly', 'quarterly', 'monthly', 'weekly', 'daily')
                OR season_length < 1)
             + (SELECT count(*) FROM runs WHERE frequency NOT IN ('yearly', 'quarterly', 'monthly', 'weekly', 'daily'))""",
    "forecasts whose series has another frequency than their run": """
        SELECT count(*) FROM forecasts f JOIN runs r USING (run_id) JOIN series s USING (series)
        WHERE s.frequency <> r.frequency""",
    "forecast periods that do not match their period index": f"""
        SELECT count(*) FROM forecasts f JOIN runs r USING (run_id)
        WHERE {_period_mismatch('f.period', 'f.period_index', 'r.frequency')}""",
    "horizons that do not match the run's origin": """
        SELECT count(*) FROM forecasts f JOIN runs r USING (run_id)
        WHERE f.horizon <> f.period_index - r.origin_index OR f.horizon < 1""",
    "run origins that do not match their period index": f"""
        SELECT count(*) FROM runs WHERE {_period_mismatch('origin', 'origin_index', 'frequency')}""",
    "actual periods that do not match their period index": f"""
        SELECT count(*) FROM actuals a JOIN series s USING (series)
        WHERE {_period_mismatch('a.period', 'a.period_index', 's.frequency')}""",
    "dangling superseded_by": """
        SELECT count(*) FROM runs WHERE superseded_by IS NOT NULL
        AND superseded_by NOT IN (SELECT run_id FROM runs)""",
    "runs superseded by themselves": "SELECT count(*) FROM runs WHERE superseded_by = run_id",
    "runs superseded by a run of another model, frequency or origin, or by an older run": """
        SELECT count(*) FROM runs o JOIN runs n ON n.run_id = o.superseded_by
        WHERE o.run_id <> n.run_id AND (n.model <> o.model OR n.frequency <> o.frequency
        OR n.origin_index <> o.origin_index OR n.recorded_at <= o.recorded_at)""",
    "runs of one model and origin not chained by superseded_by": """
        SELECT count(*) FROM (SELECT run_id, superseded_by, lead(run_id) OVER (
            PARTITION BY model, frequency, origin_index ORDER BY recorded_at) AS newer FROM runs)
        WHERE superseded_by IS DISTINCT FROM newer""",
    "orphaned or missing revisions": """
        SELECT count(*) FROM (SELECT series, period_index, count(*) n, max(revision) top,
        count(DISTINCT revision) d FROM actuals GROUP BY series, period_index)
        WHERE top <> n OR d <> n""",
    "actual revisions whose chain hash does not match": f"""
        SELECT count(*) FROM actuals a LEFT JOIN actuals p ON p.series = a.series
        AND p.period_index = a.period_index AND p.revision = a.revision - 1
        WHERE a.chain_hash IS DISTINCT FROM {_CHAIN}""",
    "actuals without a write record": """
        SELECT count(*) FROM actuals WHERE recorded_at NOT IN (SELECT recorded_at FROM actual_writes)""",
    "writes of actuals whose rows were changed or deleted": f"""
        SELECT count(*) FROM actual_writes w LEFT JOIN (
            SELECT recorded_at, count(*) AS n, {write_hash_sql('chain_hash', 'series', 'period_index')} AS h
            FROM actuals GROUP BY recorded_at) a USING (recorded_at)
        WHERE a.n IS DISTINCT FROM w.n_rows OR a.h IS DISTINCT FROM w.content_hash""",
    "crossed bounds": "SELECT count(*) FROM bounds WHERE lower > upper",
    "overrides naming a model with no run": """
        SELECT count(*) FROM overrides WHERE override NOT IN (SELECT model FROM runs)
        OR (base IS NOT NULL AND base NOT IN (SELECT model FROM runs))""",
    "overrides that adjust themselves": "SELECT count(*) FROM overrides WHERE override = base",
    "override versions recorded at the same time": """
        SELECT count(*) FROM (SELECT override, recorded_at FROM overrides GROUP BY ALL HAVING count(*) > 1)""",
}


def verify(store: Store, *, progress=None) -> list[Problem]:
    """Every problem found in the ledger; an empty list means the ledger is sound."""
    problems = _guarded("schema", lambda: _schema(store))
    if any(p.check in ("schema", "unreadable") for p in problems):
        return problems          # the checks below read tables that are missing or unreadable
    with bounded_memory(store.con):
        for check, sql in CHECKS.items():
            problems += _guarded(check, lambda sql=sql, check=check: _count(store, check, sql))
        problems += _guarded("content hash", lambda: _run_hashes(store, progress))
    return problems


def _guarded(check: str, work) -> list[Problem]:
    """The problems ``work`` finds, or DuckDB's own error (a damaged file) as one problem."""
    try:
        return work()
    except duckdb.Error as exc:
        first = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
        return [Problem("unreadable", f"{check}: DuckDB could not read the file ({first})")]


def _count(store: Store, check: str, sql: str) -> list[Problem]:
    count = store.con.execute(sql).fetchall()[0][0]
    return [Problem(check, f"{count:,} row(s)")] if count else []


def _schema(store: Store) -> list[Problem]:
    problems = []
    found = store.get_setting("schema_version")
    if found != str(SCHEMA_VERSION):
        problems.append(Problem("schema version", f"{found!r}, expected {SCHEMA_VERSION}"))
    expected, actual = _columns(_reference()), _columns(store.con)
    for table in sorted(set(expected) - set(actual)):
        problems.append(Problem("schema", f"table {table} is missing"))
    for table in sorted(set(expected) & set(actual)):
        # every column of the DDL with its type; extra columns (a lake's partition keys) do no harm
        missing = [c for c in expected[table] if c not in actual[table]]
        if missing:
            problems.append(Problem("schema", f"table {table} lacks {_shown(missing)} "
                                              f"(has {_shown(actual[table])})"))
    return problems


def _reference() -> duckdb.DuckDBPyConnection:
    con = quiet(duckdb.connect())
    con.execute(DDL)
    return con


def _columns(con) -> dict[str, list[tuple]]:
    # names and types; not NOT NULL, which a lake's tables (ledger/lake.py) cannot carry
    rows = con.execute("SELECT table_name, column_name, data_type FROM information_schema.columns "
                       "WHERE table_schema = 'main' ORDER BY table_name, ordinal_position").fetchall()
    out: dict[str, list[tuple]] = {}
    for table, *column in rows:
        out.setdefault(table, []).append(tuple(column))
    return out


def _shown(columns: list[tuple]) -> str:
    return ", ".join(f"{name} {kind}" for name, kind in columns)


def _run_hashes(store: Store, progress) -> list[Problem]:
    runs = store.con.execute(
        "SELECT run_id, model, frequency, origin_index, content_hash, n_cells FROM runs ORDER BY run_id").fetchall()
    problems = []
    for i, (run_id, model, freq, origin_index, stored, n_cells) in enumerate(runs):
        part, levels, taus = run_rows(store.con, run_id)
        if len(part) != n_cells:
            problems.append(Problem("cell count", f"run {run_id} has {len(part):,} forecasts; recorded {n_cells:,}"))
        elif run_content_hash(model, freq, origin_index, part, levels, taus) != stored:
            problems.append(Problem("content hash", f"run {run_id} ({model}) does not match its recorded hash"))
        if progress:
            progress(i + 1, len(runs))
    return problems
