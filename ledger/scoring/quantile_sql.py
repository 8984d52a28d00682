"""Set-based SQL for probabilistic scores: WIS and its parts, swis, crps_q, and per-level detail.

Every query runs over a relation of scored cells (the columns of
:func:`ledger.scoring.cells.cells_sql`) and the ``quantiles`` and ``bounds`` tables, in standard
SQL (joins, UNION ALL, FULL OUTER JOIN, EXISTS, GROUP BY with FILTER), so it can move to another engine with the rest of the
scoring. The definitions are those of :mod:`ledger.stats.quantiles`, which the tests compare
them with.

Central intervals of a cell: one per symmetric quantile pair (tau, 1 - tau), alpha = 2 tau, and
one per interval level L of its bounds, alpha = 1 - L/100, unless a quantile pair already gives
that alpha (the quantiles win: they are the fuller description, and counting one level twice
would weigh it double). The median is the cell's q50, else its point forecast. A cell with no
central interval has no WIS; a cell with quantiles has crps_q whether or not they pair up.
"""

from __future__ import annotations

from ..lazy import pandas as pd

from ..stats.quantiles import TAU_DIGITS
from ..wording import quantile_name
from .repeatable import Sums

__all__ = ["WIS_COLUMNS", "wis_cells_sql", "wis_group_sql", "quantile_detail_sql", "add_probabilistic_columns"]

WIS_COLUMNS = ("wis", "wis_dispersion", "wis_overprediction", "wis_underprediction", "swis", "crps_q")

_ON = "{a}.run_id = {b}.run_id AND {a}.series = {b}.series AND {a}.period_index = {b}.period_index"


def _on(a: str, b: str) -> str:
    return _ON.format(a=a, b=b)


def wis_cells_sql(cells: str) -> str:
    """SQL: the rows of ``cells`` (which must carry an integer ``cell_id``) that have a central
    interval or quantiles, with n_intervals, wis, wis_dispersion, wis_overprediction,
    wis_underprediction (NULL without a central interval) and crps_q (NULL without quantiles).
    """
    return f"""
    WITH {_per_cell_ctes(cells)},
    parts AS (
        SELECT c.*, p.k AS n_intervals, p.crps_q, p.n_q, p.pinball_sum,
               CASE WHEN p.k > 0 THEN p.disp / (p.k + 0.5) END AS wis_dispersion,
               CASE WHEN p.k > 0 THEN (0.5 * greatest(coalesce(p.median, c.point) - c.actual, 0) + p.over_sum)
                                      / (p.k + 0.5) END AS wis_overprediction,
               CASE WHEN p.k > 0 THEN (0.5 * greatest(c.actual - coalesce(p.median, c.point), 0) + p.under_sum)
                                      / (p.k + 0.5) END AS wis_underprediction
        FROM {cells} c JOIN per_cell p ON p.cell_id = c.cell_id)
    SELECT *, wis_dispersion + wis_overprediction + wis_underprediction AS wis FROM parts"""


def _per_cell_ctes(cells: str) -> str:
    """CTEs ending in ``per_cell``: cell_id, k (central intervals), median (q50 or NULL), disp,
    over_sum, under_sum (the sums of (alpha/2)(u - l), (l - y)+ and (y - u)+), crps_q, and n_q
    and pinball_sum (the cell's quantile rows and the sum of their pinball losses).

    Pairs are found per run: a level whose partner 1 - tau is among the run's levels pairs in
    every cell that has all the run's levels, so those cells need one grouping by cell. A cell
    that lacks some of its run's levels (a blank in the file) is paired on its own levels by a
    grouping per (cell, alpha). Bounds count at an alpha the cell's quantile pairs do not give.
    Doing the pairing per run took the query from about 6 to about 4 s of CPU on 1M cells x 9
    quantiles (bench_scoring.py).
    """
    d = TAU_DIGITS
    return f"""
    qrows AS (
        SELECT c.cell_id, c.run_id, c.actual AS y, round(qt.tau, {d}) AS tau, qt.value AS v
        FROM {cells} c JOIN quantiles qt ON {_on('qt', 'c')}),
    levels AS (SELECT run_id, tau FROM qrows GROUP BY run_id, tau),
    run_levels AS (SELECT run_id, count(*) AS n_levels FROM levels GROUP BY run_id),
    run_pairs AS (
        SELECT a.run_id, a.tau AS tau_lo, round(2 * a.tau, {d}) AS alpha
        FROM levels a JOIN levels b ON b.run_id = a.run_id AND b.tau = round(1 - a.tau, {d})
        WHERE a.tau < 0.5),
    paired AS (
        SELECT run_id, tau_lo AS tau FROM run_pairs
        UNION ALL SELECT run_id, round(1 - tau_lo, {d}) FROM run_pairs),
    qcell AS (
        SELECT q.cell_id, count(*) AS n_rows,
               count(*) FILTER (WHERE p.tau IS NOT NULL AND q.tau < 0.5) AS k,
               sum(CASE WHEN p.tau IS NULL THEN 0 WHEN q.tau < 0.5 THEN -q.tau * q.v
                        ELSE (1 - q.tau) * q.v END) AS disp,
               sum(CASE WHEN p.tau IS NOT NULL AND q.tau < 0.5 THEN greatest(q.v - q.y, 0) ELSE 0 END) AS over_sum,
               sum(CASE WHEN p.tau IS NOT NULL AND q.tau > 0.5 THEN greatest(q.y - q.v, 0) ELSE 0 END) AS under_sum,
               max(q.v) FILTER (WHERE q.tau = 0.5) AS median,
               2 * avg(CASE WHEN q.y >= q.v THEN q.tau * (q.y - q.v) ELSE (1 - q.tau) * (q.v - q.y) END) AS crps_q,
               sum(CASE WHEN q.y >= q.v THEN q.tau * (q.y - q.v) ELSE (1 - q.tau) * (q.v - q.y) END) AS pinball_sum
        FROM qrows q LEFT JOIN paired p ON p.run_id = q.run_id AND p.tau = q.tau
        GROUP BY q.cell_id),
    slow_cells AS (
        SELECT qc.cell_id FROM qcell qc
        JOIN {cells} c ON c.cell_id = qc.cell_id JOIN run_levels rl ON rl.run_id = c.run_id
        WHERE qc.n_rows < rl.n_levels),
    slow_pairs AS (
        SELECT q.cell_id, round(2 * least(q.tau, 1 - q.tau), {d}) AS alpha, max(q.y) AS y,
               max(q.v) FILTER (WHERE q.tau < 0.5) AS lower, max(q.v) FILTER (WHERE q.tau > 0.5) AS upper
        FROM qrows q JOIN slow_cells s ON s.cell_id = q.cell_id
        WHERE q.tau <> 0.5
        GROUP BY q.cell_id, round(2 * least(q.tau, 1 - q.tau), {d})
        HAVING count(*) FILTER (WHERE q.tau < 0.5) = 1 AND count(*) FILTER (WHERE q.tau > 0.5) = 1),
    slow_sum AS (
        SELECT cell_id, count(*) AS k, sum(alpha / 2 * (upper - lower)) AS disp,
               sum(greatest(lower - y, 0)) AS over_sum, sum(greatest(y - upper, 0)) AS under_sum
        FROM slow_pairs GROUP BY cell_id),
    qint AS (
        SELECT qc.cell_id, qc.median, qc.crps_q, qc.n_rows AS n_q, qc.pinball_sum, s.cell_id IS NOT NULL AS slow,
               CASE WHEN s.cell_id IS NULL THEN qc.k ELSE coalesce(ss.k, 0) END AS k,
               CASE WHEN s.cell_id IS NULL THEN qc.disp ELSE coalesce(ss.disp, 0) END AS disp,
               CASE WHEN s.cell_id IS NULL THEN qc.over_sum ELSE coalesce(ss.over_sum, 0) END AS over_sum,
               CASE WHEN s.cell_id IS NULL THEN qc.under_sum ELSE coalesce(ss.under_sum, 0) END AS under_sum
        FROM qcell qc LEFT JOIN slow_cells s ON s.cell_id = qc.cell_id LEFT JOIN slow_sum ss ON ss.cell_id = qc.cell_id),
    brows AS (
        SELECT c.cell_id, c.run_id, c.actual AS y, round(1 - b.level / 100, {d}) AS alpha, b.lower, b.upper,
               qi.cell_id IS NOT NULL AND NOT qi.slow AS fast
        FROM {cells} c JOIN bounds b ON {_on('b', 'c')} LEFT JOIN qint qi ON qi.cell_id = c.cell_id),
    bkept AS (
        SELECT * FROM brows b
        WHERE NOT (b.fast AND EXISTS (SELECT 1 FROM run_pairs p WHERE p.run_id = b.run_id AND p.alpha = b.alpha))
          AND NOT EXISTS (SELECT 1 FROM slow_pairs sp WHERE sp.cell_id = b.cell_id AND sp.alpha = b.alpha)),
    bsum AS (
        SELECT cell_id, count(*) AS k, sum(alpha / 2 * (upper - lower)) AS disp,
               sum(greatest(lower - y, 0)) AS over_sum, sum(greatest(y - upper, 0)) AS under_sum
        FROM bkept GROUP BY cell_id),
    per_cell AS (
        SELECT coalesce(qi.cell_id, bs.cell_id) AS cell_id, qi.median, qi.crps_q, qi.n_q, qi.pinball_sum,
               coalesce(qi.k, 0) + coalesce(bs.k, 0) AS k,
               coalesce(qi.disp, 0) + coalesce(bs.disp, 0) AS disp,
               coalesce(qi.over_sum, 0) + coalesce(bs.over_sum, 0) AS over_sum,
               coalesce(qi.under_sum, 0) + coalesce(bs.under_sum, 0) AS under_sum
        FROM qint qi FULL OUTER JOIN bsum bs ON bs.cell_id = qi.cell_id)"""


def wis_group_sql(cells: str, select_keys: str, group: str, sums: Sums, bound: dict[str, float]) -> str:
    """SQL: per group of ``cells`` (alias ``c`` in the key expressions), the sums and counts the
    WIS columns are means of: n_wis (cells with a WIS), s_disp, s_over, s_under (their parts),
    n_swis and s_wisq (cells with a WIS and a scale; Σ WIS/q), n_crps and s_crps, and n_pin and
    s_pin (the group's quantile rows and the sum of their pinball losses, from the same pass).

    ``select_keys``/``group``: the key expressions (empty strings for one group over all cells);
    ``sums`` and ``bound`` (upper bounds on "wis", "wis_q", "crps" and "pinball_cell") make the
    sums order-independent (:mod:`ledger.scoring.repeatable`).
    """
    keys = select_keys + "," if select_keys else ""
    gb = f"GROUP BY {group}" if group else ""
    return f"""
    SELECT {keys}
           count(c.wis) AS n_wis, {sums.total("c.wis_dispersion", bound["wis"])} AS s_disp,
           {sums.total("c.wis_overprediction", bound["wis"])} AS s_over,
           {sums.total("c.wis_underprediction", bound["wis"])} AS s_under,
           count(c.wis / c.q) AS n_swis, {sums.total("c.wis / c.q", bound["wis_q"])} AS s_wisq,
           count(c.crps_q) AS n_crps, {sums.total("c.crps_q", bound["crps"])} AS s_crps,
           {sums.total("c.pinball_sum", bound["pinball_cell"])} AS s_pin, sum(c.n_q) AS n_pin
    FROM ({wis_cells_sql(cells)}) c
    {gb}"""


def quantile_detail_sql(cells: str, select_keys: str, group: str, sums: Sums, bound: dict[str, float]) -> str:
    """SQL: per group and quantile level tau, the rows (n), the actuals below q_tau (n_below) and
    the sum of the pinball losses (s_pin)."""
    keys = select_keys + "," if select_keys else ""
    d = TAU_DIGITS
    loss = (f"CASE WHEN c.actual >= qt.value THEN round(qt.tau, {d}) * (c.actual - qt.value) "
            f"ELSE (1 - round(qt.tau, {d})) * (qt.value - c.actual) END")
    return f"""
    SELECT {keys} round(qt.tau, {d}) AS tau, count(*) AS n,
           count(*) FILTER (WHERE c.actual < qt.value) AS n_below,
           {sums.total(loss, bound["pinball_row"])} AS s_pin
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
            name = quantile_name(float(tau))
            part = detail[detail["tau"] == tau].drop(columns="tau")
            part = part.rename(columns={"below": f"below_{name}", "pinball": f"pinball_{name}"})
            out = _join(out, part.reset_index(drop=True), keys)
    return out


def _join(out: pd.DataFrame, part: pd.DataFrame, keys: list[str]) -> pd.DataFrame:
    if keys:
        return out.merge(part, on=keys, how="left")
    return pd.concat([out, part.reset_index(drop=True)], axis=1)
