"""Writing validated input into the ledger: forecast runs and actual revisions.

Each public function is one transaction: on any error, nothing is written.
"""

from __future__ import annotations

import contextlib
import dataclasses

import duckdb

import numpy as np
from ..lazy import pandas as pd
from ..lazy import pyarrow as pa

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

    Streams the ready table sorted by run; only one run is held in memory at a time. A part is
    a dict of NumPy arrays, the series keys an Arrow array (their bytes go to the hash as they
    are, with no Python string per row).
    """
    stage = frame.stage
    names = [f"{side}_{i}" for i in range(len(frame.levels)) for side in ("lo", "hi")]
    names += [f"q_{j}" for j in range(len(frame.taus))]
    select = ", ".join(["model", "origin_index", "origin", "series", "period_index", "point", *names])
    key, origin, pending, done = None, None, None, set()
    for batch in stage.batches(select):
        cols = {c: batch.column(c).to_numpy(zero_copy_only=False) for c in ("model", "origin_index", "period_index")}
        cols |= {c: batch.column(c).to_numpy(zero_copy_only=False).astype("float64") for c in ["point", *names]}
        series, origins = batch.column("series"), batch.column("origin")
        model, o_index = cols["model"], cols["origin_index"]
        starts = np.flatnonzero(np.r_[True, (model[1:] != model[:-1]) | (o_index[1:] != o_index[:-1])])
        for a, b in zip(starts, np.r_[starts[1:], len(batch)]):
            if pending is not None and (model[a], o_index[a]) != key:
                yield str(key[0]), int(key[1]), origin, _joined(pending)
                done.add(key)
                pending = None
            if pending is None:
                if (model[a], o_index[a]) in done:     # the ready table lost its order: never hash half a run
                    raise RuntimeError(f"staged rows of run {model[a]!r} {o_index[a]} are not together")
                key, origin, pending = (model[a], o_index[a]), origins[int(a)].as_py(), {c: [] for c in [*cols, "series"]}
            for c, values in cols.items():
                pending[c].append(values[a:b])
            pending["series"].append(series.slice(int(a), int(b - a)))
    if pending is not None:
        yield str(key[0]), int(key[1]), origin, _joined(pending)


def _joined(pending: dict[str, list]) -> dict[str, object]:
    out = {c: v[0] if len(v) == 1 else np.concatenate(v) for c, v in pending.items() if c != "series"}
    parts = pending["series"]
    out["series"] = parts[0] if len(parts) == 1 else pa.concat_arrays(parts)
    return out


def write_runs(store: Store, frame: ForecastFrame, *, note: str | None = None,
               supersede: bool = False) -> SnapshotResult:
    """Record every run in ``frame`` (one per model and origin) in one transaction.

    Set-based: the newest recorded run of every (model, origin) is read in one query, and the
    new runs are inserted and the superseded ones marked in one statement each.
    """
    # Hash every run before writing: the stream must finish before the connection runs anything else.
    runs = [(model, o_index, origin, len(part["series"]),
             run_content_hash(model, frame.frequency, o_index, part, frame.levels, frame.taus))
            for model, o_index, origin, part in _run_parts(frame)]
    results: list[RunResult] = []
    new_rows: list[tuple] = []
    replaced: list[tuple[str, str]] = []
    with store.transaction() as con:
        now = store.next_timestamp()
        _register_series(store, frame.stage.ready, frame.frequency, now)
        previous = _newest_runs(con, frame.frequency, [(m, o) for m, o, *_ in runs])
        for model, o_index, origin, n, chash in runs:
            label = period_label(origin, frame.frequency)
            prev = previous.get((model, o_index))
            if prev and prev[1] == chash:
                results.append(RunResult(prev[0], model, label, n, "unchanged"))
                continue
            if prev and not supersede:
                raise RunConflict(
                    f"{frame.source}: model {model!r} already has a different run at origin {label} "
                    f"(run {prev[0]}); to replace it (the old run is kept), use --supersede")
            run_id = chash[:16]
            new_rows.append((run_id, model, o_index, origin, chash, n))
            if prev:
                replaced.append((prev[0], run_id))
            results.append(RunResult(run_id, model, label, n, f"superseded {prev[0]}" if prev else "recorded"))
        if new_rows:
            _insert_runs(con, frame, new_rows, replaced, now, note)
            _insert_cells(con, frame, [(m, o, r) for r, m, o, *_ in new_rows])
    return SnapshotResult(results, list(frame.warnings))


def _newest_runs(con, frequency: str, keys: list[tuple[str, int]]) -> dict[tuple[str, int], tuple[str, str]]:
    """(model, origin index) -> (run_id, content_hash) of the newest recorded run, for the given keys."""
    if not keys:
        return {}
    con.register("_run_keys", pd.DataFrame(keys, columns=["model", "origin_index"]))
    try:
        rows = con.execute("""
            SELECT model, origin_index, run_id, content_hash FROM (
                SELECT r.*, row_number() OVER (PARTITION BY r.model, r.origin_index ORDER BY r.recorded_at DESC) rn
                FROM runs r JOIN _run_keys k ON k.model = r.model AND k.origin_index = r.origin_index
                WHERE r.frequency = ?) WHERE rn = 1""", [frequency]).fetchall()
    finally:
        with contextlib.suppress(duckdb.Error):
            con.unregister("_run_keys")
    return {(m, int(o)): (run_id, chash) for m, o, run_id, chash in rows}


def _insert_runs(con, frame: ForecastFrame, rows: list[tuple], replaced: list[tuple[str, str]], now,
                 note: str | None) -> None:
    con.register("_new_runs", pd.DataFrame(rows, columns=["run_id", "model", "origin_index", "origin",
                                                          "content_hash", "n_cells"]))
    con.register("_replaced", pd.DataFrame(replaced, columns=["old", "new"], dtype=object))
    try:
        con.execute("INSERT INTO runs SELECT run_id, model, $freq, CAST(origin AS DATE), origin_index, $now, "
                    "$source, $note, content_hash, n_cells, NULL FROM _new_runs ORDER BY model, origin_index",
                    {"freq": frame.frequency, "now": now, "source": frame.source, "note": note})
        if replaced:
            con.execute("UPDATE runs SET superseded_by = p.new FROM _replaced p WHERE runs.run_id = p.old")
    finally:
        with contextlib.suppress(duckdb.Error):
            con.unregister("_new_runs")
            con.unregister("_replaced")


def _insert_cells(con, frame: ForecastFrame, new_ids: list[tuple[str, int, str]]) -> None:
    """One INSERT per table for all new runs, straight from the staging table (set-based), in
    its order (model, origin, series, period)."""
    con.register("_new_ids", pd.DataFrame(new_ids, columns=["model", "origin_index", "run_id"]))
    try:
        ready = f"{frame.stage.ready} r JOIN _new_ids n ON n.model = r.model AND n.origin_index = r.origin_index"
        con.execute(f"INSERT INTO forecasts SELECT n.run_id, r.series, r.period, r.period_index, "
                    f"r.period_index - r.origin_index, r.point FROM {ready}")
        for i, level in enumerate(frame.levels):
            con.execute(f"INSERT INTO bounds SELECT n.run_id, r.series, r.period_index, ?, r.lo_{i}, r.hi_{i} "
                        f"FROM {ready} WHERE r.lo_{i} IS NOT NULL", [level])
        for j, tau in enumerate(frame.taus):
            con.execute(f"INSERT INTO quantiles SELECT n.run_id, r.series, r.period_index, ?, r.q_{j} "
                        f"FROM {ready} WHERE r.q_{j} IS NOT NULL", [tau])
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
