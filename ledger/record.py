"""Writing validated input into the ledger: forecast runs and actual revisions.

Each public function is one transaction: on any error, nothing is written.
"""

from __future__ import annotations

import dataclasses
import hashlib

import numpy as np
import pandas as pd

from .errors import RunConflict
from .ingest import ActualsFrame, ForecastFrame, format_level
from .periods import SEASON_LENGTHS, period_label
from .store import Store

__all__ = ["RunResult", "SnapshotResult", "ActualsResult", "write_runs", "write_actuals", "run_content_hash"]


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


def run_content_hash(model: str, frequency: str, origin_index: int, part: pd.DataFrame) -> str:
    """SHA-256 over a run's canonical form.

    ``part`` holds the run's rows with columns series, period_index, point, and any
    ``lower_<L>``/``upper_<L>`` and ``q_<tau>`` columns (other columns are ignored). The
    canonical form: a header naming model, frequency and origin index; the series keys and then
    each numeric column, rows sorted by (series, period_index); bound pairs in increasing level,
    then quantiles in increasing tau; a level or quantile with no value in this run is left out.
    Floats are hashed as little-endian IEEE-754 bytes, so the hash is exact and independent of how
    numbers were spelt in the file. ``verify`` recomputes it from the stored rows.
    """
    part = part.sort_values(["series", "period_index"], kind="stable")
    digest = hashlib.sha256(f"backsight-run-v1\x00{model}\x00{frequency}\x00{origin_index}".encode())
    digest.update("\x1f".join(part["series"].astype(str)).encode())
    for col in _canonical_columns(part):
        digest.update(f"\x00{col}\x00".encode())
        digest.update(np.ascontiguousarray(part[col].to_numpy(dtype="<f8", na_value=np.nan)).tobytes())
    return digest.hexdigest()


def _canonical_columns(part: pd.DataFrame) -> list[str]:
    levels = sorted({float(c[6:]) for c in part.columns if c.startswith("lower_")})
    taus = sorted({float(c[2:]) for c in part.columns if c.startswith("q_")})
    cols = ["period_index", "point"]
    for level in levels:
        pair = [f"lower_{format_level(level)}", f"upper_{format_level(level)}"]
        if part[pair[0]].notna().any():
            cols += pair
    cols += [f"q_{tau:g}" for tau in taus if part[f"q_{tau:g}"].notna().any()]
    return cols


def _wide(frame: ForecastFrame) -> pd.DataFrame:
    wide = frame.cells.copy()
    for level, (lower, upper) in frame.bounds.items():
        wide[f"lower_{format_level(level)}"] = lower
        wide[f"upper_{format_level(level)}"] = upper
    for tau, values in frame.quantiles.items():
        wide[f"q_{tau:g}"] = values
    return wide


def write_runs(store: Store, frame: ForecastFrame, *, note: str | None = None,
               supersede: bool = False) -> SnapshotResult:
    """Record every run in ``frame`` (one per model and origin) in one transaction."""
    wide = _wide(frame).sort_values(["model", "origin_index", "series", "period_index"], kind="stable")
    results: list[RunResult] = []
    new_ids: dict[tuple, str] = {}
    with store.transaction() as con:
        now = store.next_timestamp()
        _register_series(store, frame.cells["series"], frame.frequency, now)
        for (model, o_index), part in wide.groupby(["model", "origin_index"], sort=False):
            chash = run_content_hash(model, frame.frequency, int(o_index), part)
            origin = pd.Timestamp(part["origin"].iloc[0]).date()
            label = period_label(origin, frame.frequency)
            previous = con.execute(
                "SELECT run_id, content_hash FROM runs WHERE model = ? AND frequency = ? AND origin_index = ? "
                "ORDER BY recorded_at DESC LIMIT 1", [model, frame.frequency, int(o_index)]).fetchall()
            previous = previous[0] if previous else None
            if previous and previous[1] == chash:
                results.append(RunResult(previous[0], model, label, len(part), "unchanged"))
                continue
            if previous and not supersede:
                raise RunConflict(
                    f"{frame.source}: model {model!r} already has a different run at origin {label} "
                    f"(run {previous[0]}); to replace it (the old run is kept), use --supersede")
            run_id = chash[:16]
            con.execute("INSERT INTO runs VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, NULL)",
                        [run_id, model, frame.frequency, origin, int(o_index), now, frame.source, note,
                         chash, len(part)])
            if previous:
                con.execute("UPDATE runs SET superseded_by = ? WHERE run_id = ?", [run_id, previous[0]])
            new_ids[(model, int(o_index))] = run_id
            results.append(RunResult(run_id, model, label, len(part),
                                     f"superseded {previous[0]}" if previous else "recorded"))
        if new_ids:
            _insert_cells(con, wide, new_ids, frame)
    return SnapshotResult(results, list(frame.warnings))


def _insert_cells(con, wide: pd.DataFrame, new_ids: dict[tuple, str], frame: ForecastFrame) -> None:
    """One INSERT per table for all new runs (set-based, not a loop over runs)."""
    keys = pd.MultiIndex.from_arrays([wide["model"], wide["origin_index"].astype("int64")])
    run_ids = pd.Series(new_ids, dtype=object).reindex(keys).to_numpy()
    keep = pd.notna(run_ids)
    part = wide[keep]
    cells = pd.DataFrame({
        "run_id": run_ids[keep].astype(str), "series": part["series"].to_numpy(),
        "period": part["period"].to_numpy(), "period_index": part["period_index"].to_numpy("int32"),
        "horizon": part["horizon"].to_numpy("int32"), "point": part["point"].to_numpy("float64"),
    })
    _insert(con, "forecasts", cells, "run_id, series, period, period_index, horizon, point")
    ids = cells[["run_id", "series", "period_index"]]
    for level in frame.bounds:
        name = format_level(level)
        b = ids.assign(level=level, lower=part[f"lower_{name}"].to_numpy(), upper=part[f"upper_{name}"].to_numpy())
        _insert(con, "bounds", b[b["lower"].notna()], "run_id, series, period_index, level, lower, upper")
    for tau in frame.quantiles:
        q = ids.assign(tau=tau, value=part[f"q_{tau:g}"].to_numpy())
        _insert(con, "quantiles", q[q["value"].notna()], "run_id, series, period_index, tau, value")


def _insert(con, table: str, rows: pd.DataFrame, columns: str) -> None:
    con.register("_rows", rows)
    try:
        con.execute(f"INSERT INTO {table} SELECT {columns} FROM _rows")
    finally:
        con.unregister("_rows")


def _register_series(store: Store, keys: pd.Series, frequency: str, now) -> None:
    new = pd.DataFrame({"series": pd.unique(keys.astype(str))})
    store.con.register("_new_series", new)
    store.con.execute(
        "INSERT INTO series SELECT n.series, ?, ?, ? FROM _new_series n "
        "WHERE n.series NOT IN (SELECT series FROM series)",
        [frequency, SEASON_LENGTHS[frequency], now])
    store.con.unregister("_new_series")


def write_actuals(store: Store, frame: ActualsFrame) -> ActualsResult:
    """Append new actuals and changed values (as new revisions) in one transaction."""
    values = frame.values.assign(period_index=frame.values["period_index"].astype("int32"))
    with store.transaction() as con:
        now = store.next_timestamp()
        _register_series(store, values["series"], frame.frequency, now)
        con.register("_act", values)
        con.execute("""
            CREATE TEMP TABLE _act_diff AS
            SELECT n.series, n.period, n.period_index, n.value,
                   coalesce(o.revision, 0) + 1 AS revision, o.revision IS NULL AS is_new,
                   o.value IS NOT NULL AND o.value = n.value AS same
            FROM _act n LEFT JOIN (
                SELECT series, period_index, value, revision FROM (
                    SELECT *, row_number() OVER (PARTITION BY series, period_index ORDER BY revision DESC) rn
                    FROM actuals) t WHERE rn = 1
            ) o ON o.series = n.series AND o.period_index = n.period_index""")
        con.unregister("_act")
        new, revised, same = con.execute(
            "SELECT count(*) FILTER (is_new), count(*) FILTER (NOT is_new AND NOT same), "
            "count(*) FILTER (same) FROM _act_diff").fetchall()[0]
        con.execute("INSERT INTO actuals SELECT series, period, period_index, value, revision, ?, ? "
                    "FROM _act_diff WHERE NOT same", [now, frame.source])
        con.execute("DROP TABLE _act_diff")
    return ActualsResult(int(new), int(revised), int(same), list(frame.warnings))
