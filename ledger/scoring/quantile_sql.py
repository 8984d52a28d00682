"""Set-based SQL for probabilistic scores: WIS and its parts, swis, crps_q, and per-level detail.

Every query runs over a relation of scored cells (the columns of
:func:`ledger.scoring.cells.cells_sql`) and the ``quantiles`` and ``bounds`` tables, in standard
SQL (joins, GROUP BY, FILTER, NOT EXISTS), so it can move to another engine with the rest of the
scoring. The definitions are those of :mod:`ledger.stats.quantiles`, which the tests compare
them with.

Central intervals of a cell: one per symmetric quantile pair (tau, 1 - tau), alpha = 2 tau, and
one per interval level L of its bounds, alpha = 1 - L/100, unless a quantile pair already gives
that alpha (the quantiles win: they are the fuller description, and counting one level twice
would weigh it double). The median is the cell's q50, else its point forecast. A cell with no
central interval has no WIS; a cell with quantiles has crps_q whether or not they pair up.
"""

from __future__ import annotations

import pandas as pd

from ..stats.quantiles import TAU_DIGITS, tau_name

__all__ = ["WIS_COLUMNS", "wis_cells_sql", "wis_group_sql", "quantile_detail_sql", "add_probabilistic_columns"]

WIS_COLUMNS = ("wis", "wis_dispersion", "wis_overprediction", "wis_underprediction", "swis", "crps_q")

_ON = "{a}.run_id = {b}.run_id AND {a}.series = {b}.series AND {a}.period_index = {b}.period_index"


def _on(a: str, b: str) -> str:
    return _ON.format(a=a, b=b)


def wis_cells_sql(cells: str) -> str:
    """SQL: one row per cell of the relation ``cells`` that has a central interval or quantiles.

    Columns: run_id, series, period_index, n_intervals, wis, wis_dispersion,
    wis_overprediction, wis_underprediction (NULL without a central interval), crps_q (NULL
    without quantiles).
    """
    d = TAU_DIGITS
    return f"""
    WITH
    cq AS (
        SELECT c.run_id, c.series, c.period_index, c.actual, round(qt.tau, {d}) AS tau, qt.value
        FROM {cells} c JOIN quantiles qt ON {_on('qt', 'c')}),
    qpair AS (
        SELECT run_id, series, period_index, round(2 * least(tau, 1 - tau), {d}) AS alpha,
               max(value) FILTER (WHERE tau < 0.5) AS lower, max(value) FILTER (WHERE tau > 0.5) AS upper
        FROM cq WHERE tau <> 0.5
        GROUP BY run_id, series, period_index, round(2 * least(tau, 1 - tau), {d})
        HAVING count(*) FILTER (WHERE tau < 0.5) = 1 AND count(*) FILTER (WHERE tau > 0.5) = 1),
    bint AS (
        SELECT b.run_id, b.series, b.period_index, round(1 - b.level / 100, {d}) AS alpha, b.lower, b.upper
        FROM {cells} c JOIN bounds b ON {_on('b', 'c')}),
    ivals AS (
        SELECT run_id, series, period_index, alpha, lower, upper FROM qpair
        UNION ALL
        SELECT run_id, series, period_index, alpha, lower, upper FROM bint b
        WHERE NOT EXISTS (SELECT 1 FROM qpair p WHERE {_on('p', 'b')} AND p.alpha = b.alpha)),
    isum AS (
        SELECT i.run_id, i.series, i.period_index, count(*) AS k,
               sum(i.alpha / 2 * (i.upper - i.lower)) AS disp,
               sum(greatest(i.lower - c.actual, 0)) AS over_sum,
               sum(greatest(c.actual - i.upper, 0)) AS under_sum
        FROM ivals i JOIN {cells} c ON {_on('i', 'c')}
        GROUP BY i.run_id, i.series, i.period_index),
    qcell AS (
        SELECT run_id, series, period_index,
               max(value) FILTER (WHERE tau = 0.5) AS median,
               2 * avg(CASE WHEN actual >= value THEN tau * (actual - value)
                            ELSE (1 - tau) * (value - actual) END) AS crps_q
        FROM cq GROUP BY run_id, series, period_index),
    parts AS (
        SELECT c.run_id, c.series, c.period_index, s.k AS n_intervals,
               s.disp / (s.k + 0.5) AS wis_dispersion,
               (0.5 * greatest(coalesce(m.median, c.point) - c.actual, 0) + s.over_sum) / (s.k + 0.5)
                   AS wis_overprediction,
               (0.5 * greatest(c.actual - coalesce(m.median, c.point), 0) + s.under_sum) / (s.k + 0.5)
                   AS wis_underprediction,
               m.crps_q
        FROM {cells} c
        LEFT JOIN isum s ON {_on('s', 'c')}
        LEFT JOIN qcell m ON {_on('m', 'c')}
        WHERE s.k IS NOT NULL OR m.crps_q IS NOT NULL)
    SELECT run_id, series, period_index, n_intervals,
           wis_dispersion + wis_overprediction + wis_underprediction AS wis,
           wis_dispersion, wis_overprediction, wis_underprediction, crps_q
    FROM parts"""


def wis_group_sql(cells: str, select_keys: str, group: str) -> str:
    """SQL: per group of ``cells`` (its alias is ``c``), the means of the WIS columns and swis.

    ``select_keys``/``group``: the key expressions as in :func:`ledger.scoring.cells.scores`
    (empty strings for one group over all cells). swis = mean WIS/q over cells with a scale.
    """
    keys = select_keys + "," if select_keys else ""
    gb = f"GROUP BY {group}" if group else ""
    return f"""
    SELECT {keys}
           avg(w.wis) AS wis, avg(w.wis_dispersion) AS wis_dispersion,
           avg(w.wis_overprediction) AS wis_overprediction,
           avg(w.wis_underprediction) AS wis_underprediction,
           avg(w.wis / c.q) AS swis, avg(w.crps_q) AS crps_q
    FROM {cells} c JOIN ({wis_cells_sql(cells)}) w ON {_on('w', 'c')}
    {gb}"""


def quantile_detail_sql(cells: str, select_keys: str, group: str) -> str:
    """SQL: per group and quantile level tau, the share of actuals below q_tau and its mean pinball loss."""
    keys = select_keys + "," if select_keys else ""
    d = TAU_DIGITS
    return f"""
    SELECT {keys} round(qt.tau, {d}) AS tau,
           avg(CASE WHEN c.actual < qt.value THEN 1.0 ELSE 0.0 END) AS below,
           avg(CASE WHEN c.actual >= qt.value THEN qt.tau * (c.actual - qt.value)
                    ELSE (1 - qt.tau) * (qt.value - c.actual) END) AS pinball
    FROM {cells} c JOIN quantiles qt ON {_on('qt', 'c')}
    GROUP BY {group + ',' if group else ''} round(qt.tau, {d})"""


def add_probabilistic_columns(out: pd.DataFrame, wis: pd.DataFrame, detail: pd.DataFrame | None,
                              keys: list[str]) -> pd.DataFrame:
    """``out`` with the WIS columns (when any cell has them) and, given ``detail``, below_qNN and
    pinball_qNN per level, in increasing tau."""
    if len(wis) and wis[list(WIS_COLUMNS)].notna().any().any():
        out = _join(out, wis, keys)
    if detail is not None and len(detail):
        for tau in sorted(detail["tau"].unique()):
            name = tau_name(float(tau))
            part = detail[detail["tau"] == tau].drop(columns="tau")
            part = part.rename(columns={"below": f"below_{name}", "pinball": f"pinball_{name}"})
            out = _join(out, part.reset_index(drop=True), keys)
    return out


def _join(out: pd.DataFrame, part: pd.DataFrame, keys: list[str]) -> pd.DataFrame:
    if keys:
        return out.merge(part, on=keys, how="left")
    return pd.concat([out, part.reset_index(drop=True)], axis=1)
