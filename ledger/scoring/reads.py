"""The read API for reports: what the ledger held at an as-of, in the shapes a report draws.

Every query is built from the ledger's own views — live runs (``store.live_runs_sql``), the
newest revision of each actual (``store.latest_actuals_sql``), live forecasts and scored cells of
a selection (``cells.forecasts_sql``, ``cells.cells_sql``, which carry the --since/--until
filter) and the one bounds join (``cells.bounds_join``) — so none of those is restated here.
Reports call these through :class:`ledger.Ledger` methods and run no SQL of their own.
"""

from __future__ import annotations

import datetime as dt
import hashlib

from ..lazy import pandas as pd

from ..store import Store, latest_actuals_sql, live_runs_sql
from ..wording import format_level
from .cells import Selection, bounds_join, cells_sql, forecasts_sql

__all__ = [
    "actual_history",
    "interval_counts",
    "latest_forecasts",
    "live_runs",
    "main_frequency",
    "pending_cells",
    "report_state_hash",
    "scored_models",
    "series_table",
]


def scored_models(store: Store, sel: Selection) -> list[str]:
    """The models with at least one scored cell in ``sel``, sorted."""
    sql, params = cells_sql(sel)
    rows = store.con.execute(f"SELECT DISTINCT model FROM ({sql}) ORDER BY model", params).fetchall()
    return [r[0] for r in rows]


def series_table(store: Store, as_of: dt.datetime) -> pd.DataFrame:
    """Series first seen at or before ``as_of``: series, frequency, season_length (by series)."""
    return store.con.execute(
        "SELECT series, frequency, season_length FROM series WHERE first_seen <= $as_of ORDER BY series",
        {"as_of": as_of}).df()


def main_frequency(store: Store, as_of: dt.datetime) -> str | None:
    """The frequency most series have at ``as_of`` (ties: alphabetical), None when there are none."""
    row = store.con.execute(
        "SELECT frequency FROM series WHERE first_seen <= $as_of GROUP BY frequency "
        "ORDER BY count(*) DESC, frequency LIMIT 1", {"as_of": as_of}).fetchall()
    return row[0][0] if row else None


def live_runs(store: Store, as_of: dt.datetime) -> pd.DataFrame:
    """Runs in force at ``as_of``: run_id, model, frequency, origin, origin_index, n_cells."""
    return store.con.execute(
        f"SELECT l.run_id, l.model, l.frequency, l.origin, l.origin_index, r.n_cells "
        f"FROM ({live_runs_sql()}) l JOIN runs r USING (run_id) ORDER BY l.model, l.origin_index",
        {"as_of": as_of}).df()


def actual_history(store: Store, as_of: dt.datetime) -> pd.DataFrame:
    """The newest revision of every actual at ``as_of``: series, period_index, value."""
    return store.con.execute(
        f"SELECT series, period_index, value FROM ({latest_actuals_sql()}) a ORDER BY series, period_index",
        {"as_of": as_of}).df()


def interval_counts(store: Store, sel: Selection, head: Selection | None = None) -> pd.DataFrame:
    """Scored cells with bounds and misses (actual outside), per model, horizon and level of ``sel``.

    Columns: model, horizon, level, in_head, n, misses. ``in_head`` marks the cells that are
    also in ``head`` (one horizon and a later --since, within ``sel``), so that a report gets
    both tallies from one read; without ``head`` it is always False.
    """
    sql, params = cells_sql(sel)
    in_head = "FALSE"
    if head is not None:
        (horizon,) = head.horizons
        since = head.params().get("since")
        params["head_h"] = int(horizon)
        in_head = "c.horizon = $head_h"
        if since is not None:
            params["head_since"] = since
            in_head += " AND c.period >= $head_since"
    frame = store.con.execute(f"""
        SELECT c.model, c.horizon, b.level, ({in_head}) AS in_head, count(*) AS n,
               sum(CASE WHEN c.actual < b.lower OR c.actual > b.upper THEN 1 ELSE 0 END) AS misses
        FROM ({sql}) c {bounds_join()}
        GROUP BY ALL ORDER BY c.model, c.horizon, b.level""", params).df()
    return frame.astype({"n": "int64", "misses": "int64", "in_head": "bool"})


def latest_forecasts(store: Store, as_of: dt.datetime) -> pd.DataFrame:
    """The newest live run of each model for each series: its forecasts, bounds as lower_L/upper_L.

    Columns: model, series, origin_index, period_index, horizon, point, then lower_L and upper_L
    per interval level L (formatted by ``ledger.wording.format_level``); rows by series, model, period_index.
    """
    fc, params = forecasts_sql(Selection(as_of))
    con = store.con
    con.execute(f"""
        CREATE OR REPLACE TEMP TABLE _latest AS
        SELECT * FROM (
            SELECT model, origin_index, run_id, series, period_index, horizon, point,
                   dense_rank() OVER (PARTITION BY model, series ORDER BY origin_index DESC) AS r
            FROM ({fc}) f) t
        WHERE r = 1""", params)
    try:
        points = con.execute("SELECT model, series, origin_index, period_index, horizon, point "
                             "FROM _latest ORDER BY series, model, period_index").df()
        bounds = con.execute(f"SELECT x.model, x.series, x.period_index, b.level, b.lower, b.upper "
                             f"FROM _latest x {bounds_join('x')}").df()
    finally:
        con.execute("DROP TABLE IF EXISTS _latest")
    return _widen_bounds(points, bounds)


def _widen_bounds(points: pd.DataFrame, bounds: pd.DataFrame) -> pd.DataFrame:
    keys = ["model", "series", "period_index"]
    for level, part in bounds.groupby("level", sort=True):
        tag = format_level(level)
        part = part.drop(columns="level").rename(columns={"lower": f"lower_{tag}", "upper": f"upper_{tag}"})
        points = points.merge(part, on=keys, how="left")
    return points


def pending_cells(store: Store, sel: Selection) -> int:
    """Live forecast cells in ``sel`` whose actual has not arrived by the as-of."""
    fc, params = forecasts_sql(sel)
    row = store.con.execute(f"""
        SELECT count(*) FROM ({fc}) f
        LEFT JOIN ({latest_actuals_sql()}) a ON a.series = f.series AND a.period_index = f.period_index
        WHERE a.series IS NULL""", params).fetchall()
    return int(row[0][0])


#: meta rows that describe the file, not what it holds (left out of the report's state hash).
_FILE_FACTS = ("schema_version", "created_at", "writer_version")


def report_state_hash(store: Store, as_of: dt.datetime) -> str:
    """SHA-256 of everything a report reads at ``as_of``: the ledger's state hash (live runs, with
    their forecasts, bounds and quantiles, and actual revisions), the series known by then, the
    attribute versions recorded by then, and the settings (such as the incumbent)."""
    digest = hashlib.sha256(store.state_hash(as_of).encode())
    for name, sql in (
        ("series", "SELECT series, frequency, season_length, first_seen FROM series WHERE first_seen <= $as_of ORDER BY ALL"),
        ("attributes", "SELECT series, name, value, recorded_at FROM attributes WHERE recorded_at <= $as_of ORDER BY ALL"),
        ("settings", "SELECT key, value FROM meta WHERE key NOT IN ('" + "', '".join(_FILE_FACTS) + "') ORDER BY ALL"),
    ):
        params = {"as_of": as_of} if "$as_of" in sql else {}
        digest.update(f"\x00{name}\x00".encode())
        for row in store.con.execute(sql, params).fetchall():
            digest.update("\x1f".join("\x1e" if v is None else str(v) for v in row).encode() + b"\x1d")
    return digest.hexdigest()


