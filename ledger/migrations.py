"""The steps that bring an older ledger file to the current schema, one per version.

``MIGRATIONS[v](con)`` turns a version-v ledger into version v + 1; :mod:`ledger.store` runs the
steps in one transaction, after a backup copy, while it holds the file's write lock.
"""

from __future__ import annotations

import hashlib
from collections.abc import Callable

import numpy as np
from .lazy import pandas as pd

from .hashing import chain_hash_sql, run_content_hash, run_rows, write_hash_sql

__all__ = ["ACTUALS_DDL", "ATTRIBUTES_DDL", "ACTUAL_WRITES_DDL", "CYCLE_DDL", "OVERRIDES_DDL", "MIGRATIONS", "UNVERIFIED", "v1_run_hash"]

ATTRIBUTES_DDL = """
-- A row per version of one attribute of one series. A changed value appends a row; the value
-- in force at an as-of is the newest recorded at or before it. value NULL means "removed".
CREATE TABLE attributes (
    series      VARCHAR NOT NULL,
    name        VARCHAR NOT NULL,
    value       VARCHAR,
    recorded_at TIMESTAMP NOT NULL
);
"""

ACTUAL_WRITES_DDL = """
-- A row per write of actuals: its time (unique, the ledger's clock only moves forward), source,
-- row count and the hash of its rows' chain hashes (ledger/hashing.py); verify recomputes both.
CREATE TABLE actual_writes (
    recorded_at  TIMESTAMP PRIMARY KEY,
    source       VARCHAR,
    n_rows       BIGINT NOT NULL,
    content_hash VARCHAR NOT NULL
);
"""

ACTUALS_DDL = """
-- A row per revision of an actual. Revision 1 is the first value recorded; a changed value
-- appends revision n + 1. Scoring uses the newest revision recorded at or before the as-of.
CREATE TABLE actuals (
    series       VARCHAR NOT NULL,
    period       DATE NOT NULL,
    period_index INTEGER NOT NULL,
    value        DOUBLE NOT NULL,
    revision     INTEGER NOT NULL,
    recorded_at  TIMESTAMP NOT NULL,
    source       VARCHAR,
    chain_hash   VARCHAR NOT NULL  -- this revision's hash, chained to the previous one's (hashing.py)
);
"""

CYCLE_DDL = """
-- A row per version of one event: a span of target periods [first_day, end_day) of the series
-- that `target` names (a series key, '*' for all, or 'ATTR=VALUE' matched against the
-- attributes in force). An event's identity is (target, first_day, end_day); a changed label or
-- exclude flag appends a version, and the version in force at an as-of is the newest recorded
-- at or before it. exclude = TRUE leaves the event's cells out of scores and findings.
CREATE TABLE events (
    target      VARCHAR NOT NULL,
    first_day   DATE NOT NULL,
    end_day     DATE NOT NULL,
    first_label VARCHAR NOT NULL,
    last_label  VARCHAR NOT NULL,
    label       VARCHAR NOT NULL,
    exclude     BOOLEAN NOT NULL,
    recorded_at TIMESTAMP NOT NULL,
    source      VARCHAR
);

-- A row per stored review (backsight review): what the ledger held (as_of, state_hash) and
-- what the review recorded from its inbox.
CREATE TABLE reviews (
    review_id   INTEGER PRIMARY KEY,
    as_of       TIMESTAMP NOT NULL,
    state_hash  VARCHAR NOT NULL,
    inbox       VARCHAR NOT NULL,
    files       INTEGER NOT NULL,
    runs_new    INTEGER NOT NULL,
    actuals_new INTEGER NOT NULL
);

-- A row per finding of a review; finding_key is the finding's identity across re-runs
-- (kind, model, series, level), not its wording.
CREATE TABLE review_findings (
    review_id   INTEGER NOT NULL,
    position    INTEGER NOT NULL,   -- the finding's place in the review's list (kind, severity order)
    finding_key VARCHAR NOT NULL,
    kind        VARCHAR NOT NULL,
    model       VARCHAR NOT NULL,
    series      VARCHAR NOT NULL,
    level       DOUBLE,
    severity    VARCHAR NOT NULL,
    since       VARCHAR NOT NULL,
    figure      DOUBLE,
    evidence    VARCHAR NOT NULL
);

-- A row per model and review: its recent MASE (last `periods` target periods) and cells used.
CREATE TABLE review_models (
    review_id INTEGER NOT NULL,
    model     VARCHAR NOT NULL,
    mase      DOUBLE,
    n         BIGINT NOT NULL,
    periods   INTEGER NOT NULL
);
"""

OVERRIDES_DDL = """
-- A row per version of "model override adjusts model base" (a judgmental override of another
-- model's forecasts; ledger/overrides.py). A change appends a row; base NULL means withdrawn.
-- The relation in force at an as-of is the newest row per override recorded at or before it.
CREATE TABLE overrides (
    override    VARCHAR NOT NULL,
    base        VARCHAR,
    recorded_at TIMESTAMP NOT NULL,
    source      VARCHAR
);
"""

#: Prefix of a run hash that the version-3 migration could not confirm (its rows no longer
#: matched the version-1 hash): kept, so that verify still reports the damage.
UNVERIFIED = "unverified:"


def _to_attributes(con) -> None:
    con.execute(ATTRIBUTES_DDL)


def _to_injective_hashes(con) -> None:
    """Version 3: injective run hashes (re-hashed), chain hashes of actuals, actual_writes."""
    con.execute(ACTUAL_WRITES_DDL)       # first: DuckDB builds no index after updates in a transaction
    for run_id, model, freq, origin_index, stored in con.execute(
            "SELECT run_id, model, frequency, origin_index, content_hash FROM runs ORDER BY run_id").fetchall():
        part, levels, taus = run_rows(con, run_id)
        new = run_content_hash(model, freq, origin_index, part, levels, taus)
        if v1_run_hash(model, freq, origin_index, part, levels, taus) != stored:
            new = UNVERIFIED + stored
        con.execute("UPDATE runs SET content_hash = ? WHERE run_id = ?", [new, run_id])
    _add_chain_hashes(con)
    con.execute(f"INSERT INTO actual_writes SELECT recorded_at, min(source), count(*), "
                f"{write_hash_sql('chain_hash', 'series', 'period_index')} FROM actuals GROUP BY recorded_at")


def _add_chain_hashes(con) -> None:
    """Rebuild actuals with chain_hash NOT NULL (DuckDB cannot add the constraint after updates)."""
    con.execute("CREATE TEMP TABLE _chain AS SELECT series, period_index, revision, value, recorded_at, "
                "NULL::VARCHAR AS chain_hash FROM actuals")
    fresh = chain_hash_sql("NULL", "series", "period_index", "revision", "value", "recorded_at")
    con.execute(f"UPDATE _chain SET chain_hash = {fresh} WHERE revision = 1")
    top = con.execute("SELECT coalesce(max(revision), 0) FROM _chain").fetchall()[0][0]
    for revision in range(2, top + 1):
        expr = chain_hash_sql("p.chain_hash", "_chain.series", "_chain.period_index", "_chain.revision",
                              "_chain.value", "_chain.recorded_at")
        con.execute(f"UPDATE _chain SET chain_hash = {expr} FROM (SELECT series, period_index, chain_hash "
                    "FROM _chain WHERE revision = ?) p WHERE p.series = _chain.series "
                    "AND p.period_index = _chain.period_index AND _chain.revision = ?", [revision - 1, revision])
    # a revision whose predecessor is missing starts afresh; verify reports the hole
    con.execute(f"UPDATE _chain SET chain_hash = {fresh} WHERE chain_hash IS NULL")
    con.execute("ALTER TABLE actuals RENAME TO _actuals_v2")
    con.execute(ACTUALS_DDL)
    con.execute("INSERT INTO actuals SELECT a.series, a.period, a.period_index, a.value, a.revision, a.recorded_at, "
                "a.source, c.chain_hash FROM _actuals_v2 a JOIN _chain c USING (series, period_index, revision) "
                "ORDER BY a.recorded_at, a.series, a.period_index")
    con.execute("DROP TABLE _actuals_v2")
    con.execute("DROP TABLE _chain")


def v1_run_hash(model: str, frequency: str, origin_index: int, part: pd.DataFrame,
             levels: list[float], taus: list[float]) -> str:
    """The version-1 run hash (separator-joined, not injective), only to confirm a run before re-hashing."""
    part = part.sort_values(["series", "period_index"], kind="stable")
    digest = hashlib.sha256(f"backsight-run-v1\x00{model}\x00{frequency}\x00{origin_index}".encode())
    digest.update("\x1f".join(part["series"].astype(str).tolist()).encode())
    columns = [("period_index", "period_index"), ("point", "point")]
    for i in sorted(range(len(levels)), key=lambda i: levels[i]):
        if part[f"lo_{i}"].notna().any():
            columns += [(f"lower_{levels[i]:g}", f"lo_{i}"), (f"upper_{levels[i]:g}", f"hi_{i}")]
    for j in sorted(range(len(taus)), key=lambda j: taus[j]):
        if part[f"q_{j}"].notna().any():
            columns.append((f"q_{taus[j]:g}", f"q_{j}"))
    for name, col in columns:
        digest.update(f"\x00{name}\x00".encode())
        digest.update(np.ascontiguousarray(part[col].to_numpy(dtype="<f8", na_value=np.nan)).tobytes())
    return digest.hexdigest()


def _to_cycle(con) -> None:
    """Version 4: events and stored reviews (issue 19)."""
    con.execute(CYCLE_DDL)


def _to_overrides(con) -> None:
    """Version 5: the override relation recorded in the ledger (issue 14)."""
    con.execute(OVERRIDES_DDL)


MIGRATIONS: dict[int, Callable] = {1: _to_attributes, 2: _to_injective_hashes, 3: _to_cycle, 4: _to_overrides}
