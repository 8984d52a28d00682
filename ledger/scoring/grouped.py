"""The grouped scores (``backsight scores``): two scans, of the forecasts and of the bounds, in parallel.

The cells are those of :func:`ledger.scoring.cells.cells_sql`, but ``scores`` does not build
them as one table. The small parts are built first as temporary tables: the actuals in force
(``_s_act``), the scales per series and origin (``_s_scale``), the cells an excluding event
covers (``_s_ex``), the selected live runs with their interval levels (``_s_runs``) and, for the
rare runs whose cells carry different numbers of levels, each cell's count (``_s_cellk``). Then

- the point aggregates scan the forecasts once, joined to those small tables, grouped by the
  keys (and by whether a cell is excluded, to count ``n_excluded``);
- the interval aggregates scan the bounds once, joined to the same small tables (not to the
  million cells: their hash tables stay in cache), grouped by the keys and the level.

The weighted interval score from bounds alone (Bracher et al. 2021, eq. 2; the point forecast
as the median) needs no grouping by cell: a cell's WIS is
``(0.5 |y - m| + Σ_k (alpha_k / 2) IS_k) / (K + 0.5)``, a sum over its bounds rows plus a term
of the cell itself, each divided by the cell's K, which is known per run when every cell of the
run has all the run's levels (else per cell, from ``_s_cellk``). So the bounds scan sums each
row's share and the forecasts scan the median term; the means are those sums over the number of
cells with a central interval. Runs with quantiles are scored by the general query of
:mod:`ledger.scoring.quantile_sql` over a table of their cells only, and the sums are added.

Every sum is order-independent (:mod:`ledger.scoring.repeatable`), so the queries run on all
threads and print the same bytes on every run.
"""

from __future__ import annotations

from collections.abc import Sequence

import re

from ..lazy import pandas as pd

from ..errors import UnknownName
from ..periods import period_label
from ..stats.quantiles import TAU_DIGITS
from ..store import Store, latest_actuals_sql, live_runs_sql
from ..wording import format_level
from .attributes import attributes_sql, check_attribute, known_attributes
from .cells import (GROUP_KEYS, POINT_COLUMNS, Selection, excluded_cells_sql, lagged_sql, model_filter,
                    running_scale_sql, selection_filter)
from .quantile_sql import add_probabilistic_columns, quantile_detail_sql, wis_group_sql
from .repeatable import sums_for

__all__ = ["scores"]

_TEMPS = ("_s_act", "_s_scale", "_s_ex", "_s_runs", "_s_levels", "_s_qlevels", "_s_pairs", "_s_qroles", "_s_over",
          "_s_cellk", "_s_attrs", "_scored")
_WIS_SUMS = ("s_disp", "s_over", "s_under", "s_wisq")


def scores(store: Store, sel: Selection, by: Sequence[str] = ("model", "horizon"), *,
           where: Sequence[tuple[str, str]] = (), quantile_detail: bool = False) -> pd.DataFrame:
    """Aggregate metrics per group; columns as documented in the README (Definitions).

    ``by`` takes the built-in keys and any attribute name; ``where`` is a list of
    (attribute, value) pairs that a cell's series must match. ``quantile_detail`` adds
    below_qNN and pinball_qNN per quantile level (:mod:`ledger.scoring.quantile_sql`).
    """
    keys = _check_keys(store, sel, by)
    where = list(where)
    for name, _ in where:
        check_attribute(store, sel.as_of, name, option="--where")
    attrs = sorted({k for k in keys if k not in GROUP_KEYS} | {name for name, _ in where})
    con = store.con
    try:
        plan = _Plan(con, sel, keys, attrs, where)
        point = plan.run(plan.point_sql(), plan.params).df()
        bounds = plan.run(plan.bounds_sql(), plan.params).df()
        quant = general = slow_detail = None
        if plan.has_quantiles:
            quant = plan.run(plan.quantiles_sql(), plan.params).df()
        if plan.slow_quantiles:   # runs whose cells lack some of the run's levels: cell by cell
            plan.materialise_quantile_cells()
            general = con.execute(wis_group_sql("_scored", plan.select_keys, plan.group, plan.sums,
                                                plan.bound)).df()
            if quantile_detail:
                slow_detail = con.execute(quantile_detail_sql("_scored", plan.select_keys, plan.group, plan.sums,
                                                              plan.bound)).df()
    finally:
        for table in _TEMPS:
            con.execute(f"DROP TABLE IF EXISTS {table}")
    point, excluded = _split_excluded(point, keys, sel.include_excluded)
    freqs = sorted(set(point["m_freq_min"].dropna()) | set(point["m_freq_max"].dropna()))
    point = _with_excluded(point, excluded, keys)
    levels, wis_rows = _levels(bounds, keys)
    per_tau = _per_tau(quant, slow_detail, keys)
    qrows = _sum_over_taus(quant, keys) if quant is not None else None
    wis, pinball = _wis(point, wis_rows, qrows, general, keys)
    detail = _detail(per_tau, keys) if quantile_detail and per_tau is not None else None
    point = point.drop(columns=[c for c in point.columns if c.startswith("m_") or c in ("n_w", "n_wq", "n_cq")])
    return _assemble(point, levels, pinball, keys, freqs, (wis, detail))


_KEY_COLUMNS = {"series": "{series}", "model": "r.model", "horizon": "{horizon}", "origin": "r.origin",
                "period": "{period}"}


class _Plan:
    """The temporary tables of one ``scores`` call and the text of its two scans."""

    def __init__(self, con, sel: Selection, keys: list[str], attrs: list[str], where: list[tuple[str, str]]):
        self.con, self.sel, self.keys, self.attrs, self.where = con, sel, keys, attrs, where
        self.params: dict = {}
        self._build()
        # the key columns of _scored are k__<key>, beside its own run_id, series and period_index
        self.group = ", ".join(f"c.k__{k}" for k in keys)
        self.select_keys = ", ".join(f"c.k__{k} AS {k}" for k in keys)

    # -- the small tables ------------------------------------------------------------------
    def run(self, sql: str, params: dict | None = None):
        """Execute ``sql`` with the parameters it names (DuckDB refuses unused ones)."""
        used = {k: v for k, v in (params or {}).items() if re.search(rf"\${k}\b", sql)}
        return self.con.execute(sql, used) if used else self.con.execute(sql)

    def _build(self) -> None:
        con, sel = self, self.sel
        as_of = {"as_of": sel.as_of}
        models, mparams = model_filter(sel)
        con.run(f"CREATE OR REPLACE TEMP TABLE _s_act AS SELECT series, period, period_index, value "
                    f"FROM ({latest_actuals_sql()}) t", as_of)
        con.run(f"CREATE OR REPLACE TEMP TABLE _s_levels AS WITH live AS ({live_runs_sql()}) "
                    f"SELECT b.run_id, b.level, count(*) AS n, max(greatest(abs(b.lower), abs(b.upper))) AS size "
                    f"FROM bounds b JOIN live l ON l.run_id = b.run_id WHERE TRUE {models} "
                    f"GROUP BY b.run_id, b.level", {**as_of, **mparams})
        self.has_quantiles = len(con.run("SELECT run_id FROM quantiles LIMIT 1").fetchall()) > 0
        if self.has_quantiles:
            con.run(f"CREATE OR REPLACE TEMP TABLE _s_qlevels AS WITH live AS ({live_runs_sql()}) "
                    f"SELECT q.run_id, round(q.tau, {TAU_DIGITS}) AS tau, count(*) AS n, max(abs(q.value)) AS size "
                    f"FROM quantiles q JOIN live l ON l.run_id = q.run_id WHERE TRUE {models} "
                    f"GROUP BY q.run_id, round(q.tau, {TAU_DIGITS})", {**as_of, **mparams})
            self._quantile_roles()
        qruns = ("LEFT JOIN (SELECT v.run_id, count(*) AS n_tau, max(CASE WHEN v.tau = 0.5 THEN 1 ELSE 0 END) = 1 "
                 "AS has_median, min(CASE WHEN v.n = r2.n_cells THEN 1 ELSE 0 END) = 1 AS complete_q "
                 "FROM _s_qlevels v JOIN runs r2 ON r2.run_id = v.run_id GROUP BY v.run_id) qk ON qk.run_id = l.run_id "
                 "LEFT JOIN (SELECT run_id, count(*) AS n_pairs FROM _s_pairs GROUP BY run_id) pk ON pk.run_id = l.run_id "
                 "LEFT JOIN (SELECT run_id, count(*) AS n_over FROM _s_over GROUP BY run_id) ok ON ok.run_id = l.run_id"
                 if self.has_quantiles else "")
        if self.has_quantiles:
            has_q, n_tau, median = "qk.run_id IS NOT NULL", "coalesce(qk.n_tau, 0)", "coalesce(qk.has_median, FALSE)"
            fast = "coalesce(qk.complete_q, FALSE) AND coalesce(k.complete, TRUE)"
            k_q = "coalesce(pk.n_pairs, 0) + coalesce(k.k, 0) - coalesce(ok.n_over, 0)"
        else:
            has_q, n_tau, median, fast, k_q = "FALSE", "0", "FALSE", "FALSE", "0"
        # has_q: the run has quantiles; fast_q: and every cell has all its quantile levels and all its
        # bound levels, so its WIS is summed row by row; wis_rows: the scans sum this run's WIS;
        # k: the cell's central intervals (its bound levels, or its pairs plus the bounds they leave)
        con.run(f"""
            CREATE OR REPLACE TEMP TABLE _s_runs AS WITH live AS ({live_runs_sql()})
            SELECT run_id, model, frequency, origin, origin_index, has_q, fast_q, has_median, n_tau, complete,
                   NOT has_q OR fast_q AS wis_rows, CASE WHEN fast_q THEN k_q ELSE k_b END AS k
            FROM (
                SELECT l.run_id, l.model, l.frequency, l.origin, l.origin_index, {has_q} AS has_q,
                       {has_q} AND {fast} AS fast_q, {median} AS has_median, {n_tau} AS n_tau,
                       coalesce(k.k, 0) AS k_b, {k_q} AS k_q, coalesce(k.complete, TRUE) AS complete
                FROM live l JOIN runs r ON r.run_id = l.run_id
                LEFT JOIN (SELECT v.run_id, count(*) AS k,
                                  min(CASE WHEN v.n = r2.n_cells THEN 1 ELSE 0 END) = 1 AS complete
                           FROM _s_levels v JOIN runs r2 ON r2.run_id = v.run_id GROUP BY v.run_id) k
                       ON k.run_id = l.run_id
                {qruns}
                WHERE TRUE {models}) t""", {**as_of, **mparams})
        self.has_quantiles = self.has_quantiles and len(
            con.run("SELECT run_id FROM _s_runs WHERE has_q LIMIT 1").fetchall()) > 0
        self.slow_quantiles = self.has_quantiles and len(
            con.run("SELECT run_id FROM _s_runs WHERE has_q AND NOT fast_q LIMIT 1").fetchall()) > 0
        # a run whose cells carry different numbers of levels: each cell's K, from its own bounds
        self.per_cell_k = len(con.run("SELECT run_id FROM _s_runs WHERE NOT complete LIMIT 1").fetchall()) > 0
        if self.per_cell_k:
            con.run("CREATE OR REPLACE TEMP TABLE _s_cellk AS SELECT b.run_id, b.series, b.period_index, "
                        "count(*) AS k FROM bounds b JOIN _s_runs r ON r.run_id = b.run_id AND NOT r.complete "
                        "GROUP BY b.run_id, b.series, b.period_index")
        fwhere, fparams = selection_filter(sel, series="f.series", horizon="f.horizon", period="f.period")
        self.params = {**fparams}
        con.run(f"""
            CREATE OR REPLACE TEMP TABLE _s_scale AS
            WITH {lagged_sql("_s_act")},
            markers AS (SELECT DISTINCT f.series, r.origin_index FROM forecasts f
                        JOIN _s_runs r ON r.run_id = f.run_id WHERE TRUE {fwhere}),
            {running_scale_sql("lagged", "markers")}
            SELECT series, origin_index, q, q2 FROM scale""", fparams)
        con.run(f"""
            CREATE OR REPLACE TEMP TABLE _s_ex AS
            WITH fc AS (SELECT f.series, f.period FROM forecasts f JOIN _s_runs r ON r.run_id = f.run_id
                        WHERE TRUE {fwhere})
            {excluded_cells_sql("fc")}""", {**fparams, **as_of})
        if self.attrs:
            joins = " ".join(f"LEFT JOIN ({attributes_sql()}) a{i} ON a{i}.series = s.series AND a{i}.name = $attr{i}"
                             for i, _ in enumerate(self.attrs))
            cols = ", ".join(f"a{i}.value AS g__{name}" for i, name in enumerate(self.attrs))
            con.run(f"CREATE OR REPLACE TEMP TABLE _s_attrs AS SELECT s.series, {cols} FROM series s {joins}",
                        {**as_of, **{f"attr{i}": name for i, name in enumerate(self.attrs)}})
        stats = con.run("""
            SELECT (SELECT max(abs(value)) FROM _s_act), (SELECT min(abs(value)) FROM _s_act WHERE value <> 0),
                   (SELECT max(abs(point)) FROM forecasts), (SELECT max(size) FROM _s_levels),
                   (SELECT max(level) FROM _s_levels), (SELECT min(q) FROM _s_scale), (SELECT min(q2) FROM _s_scale),
                   {q_size}, (SELECT count(*) FROM forecasts),
                   (SELECT count(*) FROM bounds), {n_tau}, (SELECT count(*) FROM quantiles)""".format(
            q_size="(SELECT max(size) FROM _s_qlevels)" if self.has_quantiles else "NULL",
            n_tau="(SELECT count(DISTINCT tau) FROM _s_qlevels)" if self.has_quantiles else "0")).fetchone()
        self._bounds(*stats)

    def _quantile_roles(self) -> None:
        """Per run: its symmetric quantile pairs (_s_pairs), each level's part in the WIS (_s_qroles:
        1 lower and 2 upper of a pair, 3 the median, 0 unpaired) and the bound levels a pair
        overrides (_s_over; see ledger.scoring.quantile_sql)."""
        d = TAU_DIGITS
        self.run(f"CREATE OR REPLACE TEMP TABLE _s_pairs AS SELECT a.run_id, a.tau AS tau_lo, round(2 * a.tau, {d}) "
                 f"AS alpha FROM _s_qlevels a JOIN _s_qlevels b ON b.run_id = a.run_id AND b.tau = round(1 - a.tau, {d}) "
                 f"WHERE a.tau < 0.5")
        self.run(f"""CREATE OR REPLACE TEMP TABLE _s_qroles AS
                 SELECT v.run_id, v.tau, CASE WHEN p.run_id IS NOT NULL THEN 1 WHEN h.run_id IS NOT NULL THEN 2
                                              WHEN v.tau = 0.5 THEN 3 ELSE 0 END AS role
                 FROM _s_qlevels v
                 LEFT JOIN _s_pairs p ON p.run_id = v.run_id AND p.tau_lo = v.tau
                 LEFT JOIN _s_pairs h ON h.run_id = v.run_id AND round(1 - h.tau_lo, {d}) = v.tau""")
        self.run(f"CREATE OR REPLACE TEMP TABLE _s_over AS SELECT DISTINCT b.run_id, b.level FROM _s_levels b "
                 f"JOIN _s_pairs p ON p.run_id = b.run_id AND p.alpha = round(1 - b.level / 100, {d})")

    def _bounds(self, y_max, y_min, p_max, b_max, level_max, q_min, q2_min, v_max, n_fc, n_b, n_tau, n_qt) -> None:
        """Upper bounds on every summed value (loose, but sound: see ledger.scoring.repeatable)."""
        y, p, b, v = (float(x or 0.0) for x in (y_max, p_max, b_max, v_max))
        m = max(y, p, b, v)                       # every actual, forecast, bound and quantile
        e = y + p                                 # |actual - forecast|
        inv_alpha = 1.0 / (1 - float(level_max) / 100) if level_max is not None else 1.0
        interval = 2 * (b + y) * (1 + 2 * inv_alpha)   # width + (2/alpha) * distance outside
        self.bound = {
            "e": e, "e2": e * e, "y": y, "ape": 100 * e / float(y_min or 1.0) + 200, "spe": 200.0,
            "ae_q": e / float(q_min or 1.0), "e2_q2": e * e / float(q2_min or 1.0),
            "width": 2 * b, "is": interval, "is_q": interval / float(q_min or 1.0),
            "wis": 10 * m + interval, "wis_q": (10 * m + interval) / float(q_min or 1.0),
            "crps": 4 * m, "pinball_row": 2 * m, "pinball_cell": 2 * m * max(int(n_tau or 0), 1),
        }
        self.sums = sums_for(self.con, max(int(n_fc or 0), int(n_b or 0), int(n_qt or 0), 1))

    # -- the scans -------------------------------------------------------------------------
    def _from(self, table: str, alias: str, horizon: str, period: str) -> tuple[str, dict]:
        """The FROM and WHERE of a scan of ``table`` (forecasts or bounds) with its cells' actual,
        scale, exclusion, K and attributes; the selection's filters and the --where pairs."""
        x = alias
        joins = [f"JOIN _s_runs r ON r.run_id = {x}.run_id",
                 f"JOIN _s_act a ON a.series = {x}.series AND a.period_index = {x}.period_index",
                 f"LEFT JOIN _s_scale sc ON sc.series = {x}.series AND sc.origin_index = r.origin_index",
                 f"LEFT JOIN _s_ex ex ON ex.series = {x}.series AND ex.period = {period}"]
        if self.per_cell_k:
            joins.append(f"LEFT JOIN _s_cellk ck ON ck.run_id = {x}.run_id AND ck.series = {x}.series "
                         f"AND ck.period_index = {x}.period_index")
        if self.attrs:
            joins.append(f"LEFT JOIN _s_attrs g ON g.series = {x}.series")
        where, params = selection_filter(self.sel, series=f"{x}.series", horizon=horizon, period=period)
        for j, (name, value) in enumerate(self.where):
            params[f"where{j}"] = value
            where += f" AND g.g__{name} = $where{j}"
        return f"FROM {table} {x} {' '.join(joins)} WHERE TRUE {where}", params

    def _key_exprs(self, alias: str, horizon: str, period: str) -> list[str]:
        return [_KEY_COLUMNS.get(k, f"g.g__{k}").format(series=f"{alias}.series", horizon=horizon, period=period)
                for k in self.keys]

    def _key_sql(self, alias: str, horizon: str, period: str, prefix: str = "") -> str:
        exprs = self._key_exprs(alias, horizon, period)
        return "".join(f"{e} AS {prefix}{k}, " for e, k in zip(exprs, self.keys))

    def _k(self) -> str:
        return "CASE WHEN r.complete THEN r.k ELSE coalesce(ck.k, 0) END" if self.per_cell_k else "r.k"

    def point_sql(self) -> str:
        """Per group (and excluded or not): the point aggregates, and the WIS terms of the cells
        (median term, cells with a central interval) of runs without quantiles."""
        frm, params = self._from("forecasts", "f", "f.horizon", "f.period")
        self.params.update(params)
        s, bd = self.sums, self.bound
        e, k = "(a.value - f.point)", self._k()
        wis_cell = f"CASE WHEN {k} > 0 AND r.wis_rows AND NOT r.has_median THEN"   # the point is the median
        excluded = "ex.series IS NOT NULL" if not self.sel.include_excluded else "FALSE"
        group = ", ".join([*self._key_exprs("f", "f.horizon", "f.period"), excluded])
        return f"""
        SELECT {self._key_sql('f', 'f.horizon', 'f.period')}{excluded} AS excluded,
            count(*) AS n, min(r.frequency) AS m_freq_min, max(r.frequency) AS m_freq_max,
            {s.mean(f"abs({e})", bd["e"])} AS mae,
            sqrt({s.mean(f"{e} * {e}", bd["e2"])}) AS rmse,
            {s.mean(f"CASE WHEN a.value <> 0 THEN 100 * abs({e}) / abs(a.value) END", bd["ape"])} AS mape,
            {s.mean(f"CASE WHEN abs(a.value) + abs(f.point) > 0 THEN 200 * abs({e}) / (abs(a.value) + abs(f.point)) ELSE 0 END", bd["spe"])} AS smape,
            {s.total(f"abs({e})", bd["e"])} AS m_sum_ae, {s.total("abs(a.value)", bd["y"])} AS m_sum_ay,
            {s.total(e, bd["e"])} AS m_sum_e,
            {s.mean(f"abs({e}) / sc.q", bd["ae_q"])} AS mase,
            sqrt({s.mean(f"{e} * {e} / sc.q2", bd["e2_q2"])}) AS rmsse,
            {s.mean(e, bd["e"])} AS bias,
            count(*) FILTER (WHERE a.value = 0) AS n_zero_actual,
            count(*) FILTER (WHERE sc.q IS NULL OR sc.q2 IS NULL) AS n_unscaled,
            count(*) FILTER (WHERE {k} > 0 AND r.wis_rows) AS n_w,
            count(*) FILTER (WHERE {k} > 0 AND r.wis_rows AND sc.q IS NOT NULL) AS n_wq,
            count(*) FILTER (WHERE r.fast_q) AS n_cq,
            {s.total(f"{wis_cell} 0.5 * greatest(f.point - a.value, 0) / ({k} + 0.5) END", bd["e"])} AS m_over,
            {s.total(f"{wis_cell} 0.5 * greatest(a.value - f.point, 0) / ({k} + 0.5) END", bd["e"])} AS m_under,
            {s.total(f"{wis_cell} 0.5 * abs({e}) / ({k} + 0.5) / sc.q END", bd["ae_q"])} AS m_wisq
        {frm}
        GROUP BY {group}"""

    def bounds_sql(self) -> str:
        """Per group and level: the interval aggregates' sums, and each bounds row's share of its
        cell's WIS (runs without quantiles; excluded cells left out unless included)."""
        horizon = "(b.period_index - r.origin_index)"
        frm, params = self._from("bounds", "b", horizon, "a.period")
        if self.has_quantiles:   # bound levels that a quantile pair of the run overrides
            frm = frm.replace(" WHERE TRUE", " LEFT JOIN _s_over ov ON ov.run_id = b.run_id AND ov.level = b.level WHERE TRUE", 1)
        self.params.update(params)
        s, bd = self.sums, self.bound
        y, k = "a.value", self._k()
        penalty = (f"(2 / (1 - b.level / 100)) * greatest(b.lower - {y}, 0) "
                   f"+ (2 / (1 - b.level / 100)) * greatest({y} - b.upper, 0)")
        score = f"((b.upper - b.lower) + {penalty})"
        share = "CASE WHEN r.wis_rows AND ov.run_id IS NULL THEN" if self.has_quantiles else "CASE WHEN TRUE THEN"
        disp = f"round(1 - b.level / 100, 9) / 2 * (b.upper - b.lower) / ({k} + 0.5)"
        over = f"greatest(b.lower - {y}, 0) / ({k} + 0.5)"
        under = f"greatest({y} - b.upper, 0) / ({k} + 0.5)"
        keep = "" if self.sel.include_excluded else " AND ex.series IS NULL"
        group = ", ".join([*self._key_exprs("b", horizon, "a.period"), "b.level"])
        return f"""
        SELECT {self._key_sql('b', horizon, 'a.period')}b.level AS level,
            count(*) AS n,
            count(*) FILTER (WHERE b.lower <= {y} AND {y} <= b.upper) AS n_covered,
            {s.total("b.upper - b.lower", bd["width"])} AS s_width,
            {s.total(score, bd["is"])} AS s_is,
            {s.total(f"{score} / sc.q", bd["is_q"])} AS s_is_q, count(sc.q) AS n_is_q,
            {self._wis_sums(share, disp, over, under)}
        {frm}{keep}
        GROUP BY {group}"""

    def _wis_sums(self, guard: str, disp: str, over: str, under: str) -> str:
        """The four WIS sums of a row's share (dispersion, over, under, scaled total), each taken
        only where ``guard`` (an open ``CASE WHEN … THEN``) holds."""
        s, bd = self.sums, self.bound
        return (f'{s.total(f"{guard} {disp} END", bd["wis"])} AS s_disp, '
                f'{s.total(f"{guard} {over} END", bd["wis"])} AS s_over, '
                f'{s.total(f"{guard} {under} END", bd["wis"])} AS s_under, '
                f'{s.total(f"{guard} ({disp} + {over} + {under}) / sc.q END", bd["wis_q"])} AS s_wisq')

    def quantiles_sql(self) -> str:
        """Per group and quantile level, over the quantile rows of runs summed row by row (fast_q):
        rows, actuals below, pinball sum, crps_q share, and each row's share of its cell's WIS."""
        horizon = "(qt.period_index - r.origin_index)"
        frm, params = self._from("quantiles", "qt", horizon, "a.period")
        frm = frm.replace(" WHERE TRUE", f" JOIN _s_qroles ro ON ro.run_id = qt.run_id AND ro.tau = round(qt.tau, {TAU_DIGITS}) "
                                         "WHERE r.fast_q", 1)
        self.params.update(params)
        s, bd = self.sums, self.bound
        y, v, tau, k = "a.value", "qt.value", "ro.tau", "r.k"
        loss = f"CASE WHEN {y} >= {v} THEN {tau} * ({y} - {v}) ELSE (1 - {tau}) * ({v} - {y}) END"
        disp = f"CASE ro.role WHEN 1 THEN -{tau} * {v} WHEN 2 THEN (1 - {tau}) * {v} ELSE 0 END / ({k} + 0.5)"
        over = f"CASE ro.role WHEN 1 THEN greatest({v} - {y}, 0) WHEN 3 THEN 0.5 * greatest({v} - {y}, 0) ELSE 0 END / ({k} + 0.5)"
        under = f"CASE ro.role WHEN 2 THEN greatest({y} - {v}, 0) WHEN 3 THEN 0.5 * greatest({y} - {v}, 0) ELSE 0 END / ({k} + 0.5)"
        wis = f"CASE WHEN {k} > 0 THEN"
        keep = "" if self.sel.include_excluded else " AND ex.series IS NULL"
        group = ", ".join([*self._key_exprs("qt", horizon, "a.period"), tau])
        return f"""
        SELECT {self._key_sql('qt', horizon, 'a.period')}{tau} AS tau,
            count(*) AS n, count(*) FILTER (WHERE {y} < {v}) AS n_below,
            {s.total(loss, bd["pinball_row"])} AS s_pin,
            {s.total(f"2 * ({loss}) / r.n_tau", bd["crps"])} AS s_crps,
            {self._wis_sums(wis, disp, over, under)}
        {frm}{keep}
        GROUP BY {group}"""

    def materialise_quantile_cells(self) -> None:
        """_scored: the selected cells of runs with quantiles (not excluded), with an integer
        cell_id, the key columns and what the general WIS query reads."""
        frm, params = self._from("forecasts", "f", "f.horizon", "f.period")
        keep = "" if self.sel.include_excluded else " AND ex.series IS NULL"
        # any numbering will do on DuckDB; Spark numbers rows only in a window with an order
        number = "OVER ()" if self.sums.exact else "OVER (ORDER BY f.run_id, f.series, f.period_index)"
        self.run(f"""
            CREATE OR REPLACE TEMP TABLE _scored AS
            SELECT row_number() {number} AS cell_id, {self._key_sql('f', 'f.horizon', 'f.period', 'k__')}
                   f.run_id, f.series, f.period_index, f.point, a.value AS actual, sc.q
            {frm} AND r.has_q AND NOT r.fast_q{keep}""", params)


def _check_keys(store: Store, sel: Selection, by: Sequence[str]) -> list[str]:
    keys = [k.strip().lower() for k in by if k.strip()]
    if len(set(keys)) != len(keys):
        raise UnknownName(f"--by names a key twice: {', '.join(by)}")
    for k in keys:
        if k not in GROUP_KEYS:
            known = known_attributes(store, sel.as_of)
            if k not in known:
                extra = f", or an attribute ({', '.join(known)})" if known else ""
                raise UnknownName(f"cannot group by {k}; use a comma list of {', '.join(GROUP_KEYS)}{extra}")
    return keys


def _split_excluded(point: pd.DataFrame, keys: list[str], include_excluded: bool) -> tuple[pd.DataFrame, pd.DataFrame]:
    """The point rows of included cells, with the derived sums made metrics; excluded cells per group."""
    excluded = point[point["excluded"]].rename(columns={"n": "n_excluded"})[keys + ["n_excluded"]]
    point = point[~point["excluded"]].drop(columns="excluded").reset_index(drop=True)
    ay = point["m_sum_ay"]
    point["wape"] = (100 * point["m_sum_ae"] / ay).where(ay > 0)
    point["bias_pct"] = (100 * point["m_sum_e"] / ay).where(ay > 0)
    point = point.drop(columns=["m_sum_ae", "m_sum_ay", "m_sum_e"])
    order = keys + list(POINT_COLUMNS) + [c for c in point.columns if c not in keys and c not in POINT_COLUMNS]
    return point[order], (excluded if not include_excluded else excluded.iloc[0:0])


def _with_excluded(point: pd.DataFrame, excluded: pd.DataFrame, keys: list[str]) -> pd.DataFrame:
    """Add n_excluded; a group whose every cell is excluded still gets a row (n = 0)."""
    if not keys:
        if not len(point):    # no cell at all: one row of counts 0 and no metrics
            point = pd.DataFrame([{c: 0 if c.startswith("n") else float("nan") for c in point.columns}])
        return point.assign(n_excluded=int(excluded["n_excluded"].sum()) if len(excluded) else 0)
    out = point.merge(excluded, on=keys, how="outer") if len(excluded) else point.assign(n_excluded=0)
    for c in ("n", "n_zero_actual", "n_unscaled", "n_excluded", "n_w", "n_wq"):
        out[c] = out[c].fillna(0)
    return out


def _levels(bounds: pd.DataFrame, keys: list[str]) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Per group and level the interval metrics; per group the bounds rows' WIS sums (levels added
    in increasing order, so the same floats every run)."""
    b = bounds.sort_values(keys + ["level"], kind="stable").reset_index(drop=True)
    levels = b[keys + ["level"]].assign(
        coverage=b["n_covered"] / b["n"], n=b["n"], width=b["s_width"] / b["n"],
        interval_score=b["s_is"] / b["n"], msis=(b["s_is_q"] / b["n_is_q"]).where(b["n_is_q"] > 0))
    sums = b[keys + list(_WIS_SUMS)]
    if keys:
        wis = sums.groupby(keys, sort=False, dropna=False)[list(_WIS_SUMS)].agg(_ordered_sum).reset_index()
    else:
        wis = pd.DataFrame([{c: _ordered_sum(sums[c]) for c in _WIS_SUMS}])
    return levels, wis


def _ordered_sum(values: pd.Series) -> float:
    """The sum of a few values in their given order (NaN when all are missing)."""
    out, seen = 0.0, False
    for v in values:
        if pd.notna(v):
            out, seen = out + float(v), True
    return out if seen else float("nan")


_QSUMS = ("n", "n_below", "s_pin", "s_crps", "s_disp", "s_over", "s_under", "s_wisq")


def _sum_over_taus(quant: pd.DataFrame, keys: list[str]) -> pd.DataFrame:
    """Per group: the quantile scan's sums added over the levels, in increasing tau."""
    q = quant.sort_values(keys + ["tau"], kind="stable")
    if not keys:
        return pd.DataFrame([{c: _ordered_sum(q[c]) for c in _QSUMS}])
    return q.groupby(keys, sort=False, dropna=False)[list(_QSUMS)].agg(_ordered_sum).reset_index()


def _per_tau(quant: pd.DataFrame | None, slow: pd.DataFrame | None, keys: list[str]) -> pd.DataFrame | None:
    """Per group and level: rows, actuals below and pinball sum, from the scan and the cell-by-cell query."""
    parts = [p[keys + ["tau", "n", "n_below", "s_pin"]] for p in (quant, slow) if p is not None and len(p)]
    if not parts:
        return None
    both = pd.concat(parts, ignore_index=True)
    return both.groupby(keys + ["tau"], sort=True, dropna=False)[["n", "n_below", "s_pin"]].agg(
        {"n": "sum", "n_below": "sum", "s_pin": _ordered_sum}).reset_index()


def _detail(per_tau: pd.DataFrame, keys: list[str]) -> pd.DataFrame:
    return per_tau[keys + ["tau"]].assign(below=per_tau["n_below"] / per_tau["n"], pinball=per_tau["s_pin"] / per_tau["n"])


def _wis(point: pd.DataFrame, rows: pd.DataFrame, qrows: pd.DataFrame | None, general: pd.DataFrame | None,
         keys: list[str]) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Per group: the WIS columns (and the mean pinball loss) from the sums of the bounds rows,
    the quantile rows, the cells' own terms and the cell-by-cell query, over the cells that
    have a central interval (crps_q: that have quantiles). The parts are added in that order."""
    cells = point[keys + ["n_w", "n_wq", "n_cq", "m_over", "m_under", "m_wisq"]].reset_index(drop=True)

    def aligned(frame):
        if frame is None:
            return None
        if not keys:
            return frame.reindex([0]).reset_index(drop=True)
        return cells[keys].merge(frame, on=keys, how="left")

    b, q, g = aligned(rows), aligned(qrows), aligned(general)

    def add(*parts):
        out = pd.Series(0.0, index=range(len(cells)))
        for frame, column in parts:
            if frame is not None:
                out = out + pd.to_numeric(frame[column], errors="coerce").reset_index(drop=True).fillna(0.0)
        return out

    c = cells
    n_w = add((c, "n_w"), (g, "n_wis"))
    n_wq = add((c, "n_wq"), (g, "n_swis"))
    disp = add((b, "s_disp"), (q, "s_disp"), (g, "s_disp"))
    over = add((c, "m_over"), (b, "s_over"), (q, "s_over"), (g, "s_over"))
    under = add((c, "m_under"), (b, "s_under"), (q, "s_under"), (g, "s_under"))
    wisq = add((c, "m_wisq"), (b, "s_wisq"), (q, "s_wisq"), (g, "s_wisq"))
    n_crps = add((c, "n_cq"), (g, "n_crps"))
    crps = add((q, "s_crps"), (g, "s_crps"))
    n_pin = add((q, "n"), (g, "n_pin"))
    pin = add((q, "s_pin"), (g, "s_pin"))
    out = c[keys].copy()
    has = n_w > 0
    out["wis"] = ((disp + over + under) / n_w).where(has)
    out["wis_dispersion"] = (disp / n_w).where(has)
    out["wis_overprediction"] = (over / n_w).where(has)
    out["wis_underprediction"] = (under / n_w).where(has)
    out["swis"] = (wisq / n_wq).where(n_wq > 0)
    out["crps_q"] = (crps / n_crps).where(n_crps > 0)
    pinball = c[keys].assign(pinball=(pin / n_pin).where(n_pin > 0)) if (q is not None or g is not None) \
        else pd.DataFrame()
    return out, pinball


def _assemble(point: pd.DataFrame, levels: pd.DataFrame, pinball: pd.DataFrame,
              keys: list[str], freqs: list[str], probabilistic=None) -> pd.DataFrame:
    if keys and len(point) == 0:
        return point[keys + list(POINT_COLUMNS) + ["n_zero_actual", "n_unscaled", "n_excluded"]]
    out = point.copy()
    for level in sorted(levels["level"].unique()) if len(levels) else []:
        part = levels[levels["level"] == level].drop(columns="level")
        name = format_level(float(level))
        part = part.rename(columns={c: f"{c}_{name}" for c in ("coverage", "n", "width", "interval_score", "msis")})
        out = out.merge(part, on=keys, how="left") if keys else pd.concat([out, part.reset_index(drop=True)], axis=1)
        out[f"n_{name}"] = out[f"n_{name}"].fillna(0).astype("int64")
    if len(pinball) and pinball["pinball"].notna().any():
        out = out.merge(pinball, on=keys, how="left") if keys else pd.concat([out, pinball], axis=1)
    if probabilistic is not None:
        out = add_probabilistic_columns(out, *probabilistic, keys)
    tail = ["n_zero_actual", "n_unscaled", "n_excluded"]
    ordered = keys + [c for c in out.columns if c not in keys and c not in tail] + tail
    out = out[ordered]
    for c in ("n", "n_zero_actual", "n_unscaled", "n_excluded"):
        out[c] = out[c].astype("int64")
    if "horizon" in keys:
        out["horizon"] = out["horizon"].astype("int64")
    if keys:
        out = out.sort_values(keys, kind="stable").reset_index(drop=True)
    for key in ("origin", "period"):
        if key in keys:
            out[key] = _labels(out[key], freqs)
    return out


def _labels(days: pd.Series, freqs: list[str]) -> pd.Series:
    """Period labels (2026-11, 2026Q3) when the cells share one frequency, else ISO dates."""
    as_dates = pd.to_datetime(days).dt.date
    if len(freqs) == 1:
        return as_dates.map(lambda d: period_label(d, freqs[0])).astype(object)
    return as_dates.map(lambda d: d.isoformat()).astype(object)
