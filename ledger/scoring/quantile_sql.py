"""Set-based SQL for probabilistic scores: WIS and its parts, swis, crps_q, and per-level detail.

Every query runs over a relation of scored cells (the columns of
:func:`ledger.scoring.cells.cells_sql`) and the ``quantiles`` and ``bounds`` tables, in standard
SQL (joins, UNION ALL, GROUP BY with FILTER), so it can move to another engine with the rest of the
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
    """SQL: the rows of ``cells`` (which must carry an integer ``cell_id``) that have a central
    interval or quantiles, with n_intervals, wis, wis_dispersion, wis_overprediction,
    wis_underprediction (NULL without a central interval) and crps_q (NULL without quantiles).

    One pass joins the cells' quantiles and bounds into one stream of rows keyed by (cell,
    alpha); grouping by that key finds the complete quantile pairs (a bound fills an alpha the
    quantiles lack), grouping by cell sums the interval terms. The integer cell_id keeps both
    groupings off the string keys (measured: about 40% less CPU than joins on run, series and
    period).
    """
    d = TAU_DIGITS
    return f"""
    WITH
    stream AS (
        SELECT c.cell_id, c.actual AS y, round(2 * least(qt.tau, 1 - qt.tau), {d}) AS alpha,
               round(qt.tau, {d}) AS tau, qt.value AS v,
               CAST(NULL AS DOUBLE) AS b_lo, CAST(NULL AS DOUBLE) AS b_hi
        FROM {cells} c JOIN quantiles qt ON {_on('qt', 'c')}
        UNION ALL
        SELECT c.cell_id, c.actual, round(1 - b.level / 100, {d}), NULL, NULL, b.lower, b.upper
        FROM {cells} c JOIN bounds b ON {_on('b', 'c')}),
    per_alpha AS (
        SELECT cell_id, alpha, max(y) AS y,
               count(*) FILTER (WHERE tau < 0.5) AS n_lo, count(*) FILTER (WHERE tau > 0.5) AS n_hi,
               max(v) FILTER (WHERE tau < 0.5) AS q_lo, max(v) FILTER (WHERE tau > 0.5) AS q_hi,
               max(v) FILTER (WHERE tau = 0.5) AS median, max(b_lo) AS b_lo, max(b_hi) AS b_hi,
               sum(CASE WHEN y >= v THEN tau * (y - v) ELSE (1 - tau) * (v - y) END) AS pin,
               count(v) AS n_q
        FROM stream GROUP BY cell_id, alpha),
    chosen AS (
        SELECT cell_id, alpha, y, median, pin, n_q,
               CASE WHEN n_lo = 1 AND n_hi = 1 THEN q_lo ELSE b_lo END AS lo,
               CASE WHEN n_lo = 1 AND n_hi = 1 THEN q_hi ELSE b_hi END AS hi
        FROM per_alpha),
    per_cell AS (
        SELECT cell_id, count(lo) AS k, max(median) AS median,
               sum(alpha / 2 * (hi - lo)) AS disp, sum(greatest(lo - y, 0)) AS over_sum,
               sum(greatest(y - hi, 0)) AS under_sum,
               CASE WHEN sum(n_q) > 0 THEN 2 * sum(pin) / sum(n_q) END AS crps_q
        FROM chosen GROUP BY cell_id),
    parts AS (
        SELECT c.*, p.k AS n_intervals, p.crps_q,
               CASE WHEN p.k > 0 THEN p.disp / (p.k + 0.5) END AS wis_dispersion,
               CASE WHEN p.k > 0 THEN (0.5 * greatest(coalesce(p.median, c.point) - c.actual, 0) + p.over_sum)
                                      / (p.k + 0.5) END AS wis_overprediction,
               CASE WHEN p.k > 0 THEN (0.5 * greatest(c.actual - coalesce(p.median, c.point), 0) + p.under_sum)
                                      / (p.k + 0.5) END AS wis_underprediction
        FROM {cells} c JOIN per_cell p ON p.cell_id = c.cell_id)
    SELECT *, wis_dispersion + wis_overprediction + wis_underprediction AS wis FROM parts"""


def wis_group_sql(cells: str, select_keys: str, group: str) -> str:
    """SQL: per group of ``cells`` (alias ``c`` in the key expressions), the means of the WIS
    columns and swis.

    ``select_keys``/``group``: the key expressions as in :func:`ledger.scoring.cells.scores`
    (empty strings for one group over all cells). swis = mean WIS/q over cells with a scale.
    """
    keys = select_keys + "," if select_keys else ""
    gb = f"GROUP BY {group}" if group else ""
    return f"""
    SELECT {keys}
           avg(c.wis) AS wis, avg(c.wis_dispersion) AS wis_dispersion,
           avg(c.wis_overprediction) AS wis_overprediction,
           avg(c.wis_underprediction) AS wis_underprediction,
           avg(c.wis / c.q) AS swis, avg(c.crps_q) AS crps_q
    FROM ({wis_cells_sql(cells)}) c
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
