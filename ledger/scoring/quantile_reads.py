"""Reads of quantile forecasts for findings and reports: quantiles per scored cell, WIS per cell.

The SQL is that of :mod:`ledger.scoring.cells` and :mod:`ledger.scoring.quantile_sql`; these
functions only run it for a selection and hand back frames.
"""

from __future__ import annotations

import contextlib
from collections.abc import Iterator

from ..lazy import pandas as pd

from ..stats.quantiles import TAU_DIGITS
from ..store import Store
from .cells import Selection, cells_sql
from .quantile_sql import wis_cells_sql

__all__ = ["quantile_cells", "wis_cells", "wis_by_horizon"]


def quantile_cells(store: Store, sel: Selection) -> pd.DataFrame:
    """One row per scored cell and quantile level.

    Columns: model, frequency, series, period_index, horizon, tau, value, actual, below
    (actual < value); ordered by model, series, horizon, period_index, tau.
    """
    sql, params = cells_sql(sel)
    return store.con.execute(f"""
        SELECT c.model, c.frequency, c.series, c.period_index, c.horizon, round(qt.tau, {TAU_DIGITS}) AS tau,
               qt.value, c.actual, c.actual < qt.value AS below
        FROM ({sql}) c
        JOIN quantiles qt ON qt.run_id = c.run_id AND qt.series = c.series AND qt.period_index = c.period_index
        ORDER BY c.model, c.series, c.horizon, c.period_index, tau""", params).df()


def wis_cells(store: Store, sel: Selection) -> pd.DataFrame:
    """One row per scored cell with a central interval or quantiles: model, series, horizon,
    period_index, n_intervals, wis, wis_dispersion, wis_overprediction, wis_underprediction, crps_q."""
    with _numbered_cells(store, sel) as cells:
        return store.con.execute(f"""
            SELECT model, series, horizon, period_index, n_intervals, wis, wis_dispersion,
                   wis_overprediction, wis_underprediction, crps_q
            FROM ({wis_cells_sql(cells)})
            ORDER BY model, series, horizon, period_index""").df()


def wis_by_horizon(store: Store, sel: Selection) -> pd.DataFrame:
    """Per model and horizon: cells with a WIS (n_wis) and the means of wis and its three parts."""
    with _numbered_cells(store, sel) as cells:
        return store.con.execute(f"""
            SELECT model, horizon, count(wis) AS n_wis, avg(wis) AS wis, avg(wis_dispersion) AS wis_dispersion,
                   avg(wis_overprediction) AS wis_overprediction, avg(wis_underprediction) AS wis_underprediction
            FROM ({wis_cells_sql(cells)}) WHERE wis IS NOT NULL
            GROUP BY model, horizon ORDER BY model, horizon""").df()


@contextlib.contextmanager
def _numbered_cells(store: Store, sel: Selection) -> Iterator[str]:
    """The selection's cells in a temp table with the integer cell_id the WIS query joins on."""
    sql, params = cells_sql(sel)
    con = store.con
    con.execute(f"CREATE OR REPLACE TEMP TABLE _wis_cells AS SELECT row_number() OVER "
                f"(ORDER BY model, series, origin_index, period_index) AS cell_id, * FROM ({sql})", params)
    try:
        yield "_wis_cells"
    finally:
        con.execute("DROP TABLE IF EXISTS _wis_cells")
