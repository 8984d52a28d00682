"""WIS of cells that have interval bounds but no quantiles, in one pass over the bounds join.

When no selected run carries quantiles, every cell's central intervals are its bounds (alpha =
1 - L/100) and its median is its point forecast, so the general query of
:mod:`ledger.scoring.quantile_sql` (pairing quantiles, deciding which bounds a quantile pair
overrides, a full outer join of the two halves) reduces to one grouping of the bounds by cell.
The result has the columns of :func:`ledger.scoring.quantile_sql.wis_group_sql` and the same
definitions (Bracher et al. 2021, "Evaluating epidemic forecasts in an interval format", eq. 2):

    WIS = (0.5 |y - m| + sum_k (alpha_k / 2) IS_alpha_k) / (K + 0.5)

split into dispersion, overprediction and underprediction; crps_q is NULL (no quantiles).
Standard SQL apart from ``greatest`` (see :mod:`ledger.scoring.cells`).
"""

from __future__ import annotations

from ..stats.quantiles import TAU_DIGITS

__all__ = ["interval_wis_group_sql"]


def interval_wis_group_sql(cells: str, select_keys: str, group: str) -> str:
    """SQL: per group of ``cells`` (alias ``c``, with an integer ``cell_id``), the means of the
    WIS columns, swis (mean WIS/q over cells with a scale) and a NULL crps_q, from bounds only.

    Only right when no cell of ``cells`` has quantiles; cells without bounds have no WIS and
    are left out of the means, as in the general query.
    """
    keys = select_keys + "," if select_keys else ""
    gb = f"GROUP BY {group}" if group else ""
    d = TAU_DIGITS
    disp = "p.disp / (p.k + 0.5)"
    over = "(0.5 * greatest(c.point - c.actual, 0) + p.over_sum) / (p.k + 0.5)"
    under = "(0.5 * greatest(c.actual - c.point, 0) + p.under_sum) / (p.k + 0.5)"
    wis = f"({disp} + {over} + {under})"
    return f"""
    WITH per_cell AS (
        SELECT c.cell_id, count(*) AS k,
               sum(round(1 - b.level / 100, {d}) / 2 * (b.upper - b.lower)) AS disp,
               sum(greatest(b.lower - c.actual, 0)) AS over_sum,
               sum(greatest(c.actual - b.upper, 0)) AS under_sum
        FROM {cells} c JOIN bounds b ON b.run_id = c.run_id AND b.series = c.series
                                    AND b.period_index = c.period_index
        GROUP BY c.cell_id)
    SELECT {keys}
           avg({wis}) AS wis, avg({disp}) AS wis_dispersion,
           avg({over}) AS wis_overprediction, avg({under}) AS wis_underprediction,
           avg({wis} / c.q) AS swis, CAST(NULL AS DOUBLE) AS crps_q
    FROM {cells} c JOIN per_cell p ON p.cell_id = c.cell_id
    {gb}"""
