"""Writing validated input into the ledger: forecast runs and actual revisions.

Each public function is one transaction: on any error, nothing is written.
"""

from __future__ import annotations

import contextlib
import dataclasses

import duckdb

import numpy as np
import pandas as pd

from ..errors import RunConflict
from ..hashing import chain_hash_sql, run_content_hash, write_hash_sql
from .ingest import ActualsFrame, ForecastFrame
from ..periods import SEASON_LENGTHS, period_label
from ..store import Store

__all__ = ["RunResult", "SnapshotResult", "ActualsResult", "write_runs", "write_actuals"]


@dataclasses.dataclass(frozen=True)
class RunResult:
    run_id: str
    model: str
    origin: str  # period label
    cells: int
    status: str  # "recorded", "unchanged" or "superseded <old id>"


@dataclasses.dataclass(frozen=True)
class SnapshotResult:
    runs: list[RunResult]
    warnings: list[str]

    @property
    def cells(self) -> int:
        return sum(r.cells for r in self.runs if r.status != "unchanged")


@dataclasses.dataclass(frozen=True)
class ActualsResult:
    new: int
    revised: int
    unchanged: int
    warnings: list[str]


def _run_parts(frame: ForecastFrame):
    """Each run's rows in canonical order, one run at a time: (model, origin index, origin, part).

    Streams the ready table sorted by run; only one run is held in memory at a time.
    """
    stage = frame.stage
    names = [f"{side}_{i}" for i in range(len(frame.levels)) for side in ("lo", "hi")]
    names += [f"q_{j}" for j in range(len(frame.taus))]
    select = ", ".join(["model", "origin_index", "origin", "series", "period_index", "point", *names])
    pieces: list[pd.DataFrame] = []
    for batch in stage.batches(select, "model, origin_index, series, period_index"):
        model, o_index = batch["model"].to_numpy(dtype=object), batch["origin_index"].to_numpy()
        starts = np.flatnonzero(np.r_[True, (model[1:] != model[:-1]) | (o_index[1:] != o_index[:-1])])
        for a, b in zip(starts, np.r_[starts[1:], len(batch)]):
            piece = batch.iloc[a:b]
            if pieces and (pieces[0]["model"].iat[0], pieces[0]["origin_index"].iat[0]) != \
                    (piece["model"].iat[0], piece["origin_index"].iat[0]):
                yield _run_of(pieces)
                pieces = []
            pieces.append(piece)
    if pieces:
        yield _run_of(pieces)


def _run_of(pieces: list[pd.DataFrame]):
    part = pd.concat(pieces, ignore_index=True) if len(pieces) > 1 else pieces[0].reset_index(drop=True)
    return str(part["model"].iat[0]), int(part["origin_index"].iat[0]), part["origin"].iat[0], part


def write_runs(store: Store, frame: ForecastFrame, *, note: str | None = None,
               supersede: bool = False) -> SnapshotResult:
    """Record every run in ``frame`` (one per model and origin) in one transaction."""
    # Hash every run before writing: the stream must finish before the connection runs anything else.
    runs = [(model, o_index, origin, len(part), run_content_hash(model, frame.frequency, o_index, part, frame.levels, frame.taus))
            for model, o_index, origin, part in _run_parts(frame)]
    results: list[RunResult] = []
    new_ids: list[tuple[str, int, str]] = []
    with store.transaction() as con:
        now = store.next_timestamp()
        _register_series(store, frame.stage.ready, frame.frequency, now)
        for model, o_index, origin, n, chash in runs:
            label = period_label(origin, frame.frequency)
            previous = con.execute(
                "SELECT run_id, content_hash FROM runs WHERE model = ? AND frequency = ? AND origin_index = ? "
                "ORDER BY recorded_at DESC LIMIT 1", [model, frame.frequency, o_index]).fetchall()
            previous = previous[0] if previous else None
            if previous and previous[1] == chash:
                results.append(RunResult(previous[0], model, label, n, "unchanged"))
                continue
            if previous and not supersede:
                raise RunConflict(
                    f"{frame.source}: model {model!r} already has a different run at origin {label} "
                    f"(run {previous[0]}); to replace it (the old run is kept), use --supersede")
            run_id = chash[:16]
            con.execute("INSERT INTO runs VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, NULL)",
                        [run_id, model, frame.frequency, origin, o_index, now, frame.source, note, chash, n])
            if previous:
                con.execute("UPDATE runs SET superseded_by = ? WHERE run_id = ?", [run_id, previous[0]])
            new_ids.append((model, o_index, run_id))
            results.append(RunResult(run_id, model, label, n,
                                     f"superseded {previous[0]}" if previous else "recorded"))
        if new_ids:
            _insert_cells(con, frame, new_ids)
    return SnapshotResult(results, list(frame.warnings))


def _insert_cells(con, frame: ForecastFrame, new_ids: list[tuple[str, int, str]]) -> None:
    """One INSERT per table for all new runs, straight from the staging table (set-based)."""
    con.register("_new_ids", pd.DataFrame(new_ids, columns=["model", "origin_index", "run_id"]))
    try:
        ready = f"{frame.stage.ready} r JOIN _new_ids n ON n.model = r.model AND n.origin_index = r.origin_index"
        order = "ORDER BY r.model, r.origin_index, r.series, r.period_index"
        con.execute(f"INSERT INTO forecasts SELECT n.run_id, r.series, r.period, r.period_index, "
                    f"r.period_index - r.origin_index, r.point FROM {ready} {order}")
        for i, level in enumerate(frame.levels):
            con.execute(f"INSERT INTO bounds SELECT n.run_id, r.series, r.period_index, ?, r.lo_{i}, r.hi_{i} "
                        f"FROM {ready} WHERE r.lo_{i} IS NOT NULL {order}", [level])
        for j, tau in enumerate(frame.taus):
            con.execute(f"INSERT INTO quantiles SELECT n.run_id, r.series, r.period_index, ?, r.q_{j} "
                        f"FROM {ready} WHERE r.q_{j} IS NOT NULL {order}", [tau])
    finally:
        with contextlib.suppress(duckdb.Error):    # after a failed write the first error is the news
            con.unregister("_new_ids")


def _register_series(store: Store, table: str, frequency: str, now) -> None:
    store.con.execute(
        f"INSERT INTO series SELECT n.series, ?, ?, ? FROM (SELECT DISTINCT series FROM {table}) n "
        "WHERE n.series NOT IN (SELECT series FROM series) ORDER BY n.series",
        [frequency, SEASON_LENGTHS[frequency], now])


def write_actuals(store: Store, frame: ActualsFrame) -> ActualsResult:
    """Append new actuals and changed values (as new revisions) in one transaction.

    Each new row gets its chain hash, and the write its row in ``actual_writes``
    (see :mod:`ledger.hashing`), so that ``verify`` can recompute both.
    """
    with store.transaction() as con:
        now = store.next_timestamp()
        _register_series(store, frame.stage.ready, frame.frequency, now)
        con.execute(f"""
            CREATE TEMP TABLE _act_diff AS
            SELECT n.series, n.period, n.period_index, n.value, o.chain_hash AS prev_hash,
                   coalesce(o.revision, 0) + 1 AS revision, o.revision IS NULL AS is_new,
                   o.value IS NOT NULL AND o.value = n.value AS same
            FROM {frame.stage.ready} n LEFT JOIN (
                SELECT series, period_index, value, revision, chain_hash FROM (
                    SELECT *, row_number() OVER (PARTITION BY series, period_index ORDER BY revision DESC) rn
                    FROM actuals) t WHERE rn = 1
            ) o ON o.series = n.series AND o.period_index = n.period_index""")
        try:
            new, revised, same = con.execute(
                "SELECT count(*) FILTER (is_new), count(*) FILTER (NOT is_new AND NOT same), "
                "count(*) FILTER (same) FROM _act_diff").fetchall()[0]
            chain = chain_hash_sql("prev_hash", "series", "period_index", "revision", "value", "$now::TIMESTAMP")
            con.execute(f"INSERT INTO actuals SELECT series, period, period_index, value, revision, $now, $source, "
                        f"{chain} FROM _act_diff WHERE NOT same ORDER BY series, period_index",
                        {"now": now, "source": frame.source})
            if new + revised:
                con.execute(f"INSERT INTO actual_writes SELECT $now, $source, count(*), "
                            f"{write_hash_sql('chain_hash', 'series', 'period_index')} "
                            "FROM actuals WHERE recorded_at = $now", {"now": now, "source": frame.source})
        finally:
            with contextlib.suppress(duckdb.Error):
                con.execute("DROP TABLE _act_diff")
    return ActualsResult(int(new), int(revised), int(same), list(frame.warnings))
