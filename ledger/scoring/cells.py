"""Scoring: join forecasts to actuals in DuckDB, per-cell errors and scales, grouped aggregates.

All of it is set-based SQL, so the same queries can later run on another SQL engine over
Parquet exports. The definitions match :mod:`ledger.stats.metrics`, which the tests use as the
oracle.

Standard SQL in these queries (and in the ``live_runs_sql`` / ``latest_actuals_sql`` of
:mod:`ledger.store` and ``attributes_sql`` of :mod:`ledger.scoring.attributes` that they
compose): ``WITH`` common table expressions, inner and left joins, ``UNION ALL``, ``GROUP BY``,
``CASE``, ``abs``, ``sqrt``, ``avg`` / ``sum`` / ``count`` / ``max``, ``count(*) FILTER (WHERE …)``,
the boolean literal ``TRUE``, ``row_number()`` and running ``sum`` / ``max`` over a named
``WINDOW … (PARTITION BY … ORDER BY … ROWS UNBOUNDED PRECEDING)``, ``IN (…)`` lists.

DuckDB dialect, each with a plain equivalent elsewhere:

- ``$name`` query parameters (``$as_of``, ``$since``, ``$m0`` …): DuckDB's named-parameter
  syntax; another engine binds them its own way (``?``, ``:name``) or gets literals.
- ``greatest(x, 0)`` in the interval score: not in the standard, but in most engines (Spark,
  PostgreSQL, MySQL); the standard form is ``CASE WHEN x > 0 THEN x ELSE 0 END``.
- ``LIMIT 1`` (whether any selected run has quantiles): standard ``FETCH FIRST 1 ROW ONLY``;
  DuckDB and Spark both take ``LIMIT``.
- ``CREATE OR REPLACE TEMP TABLE _scored AS …`` and ``DROP TABLE IF EXISTS``: the grouped
  scores materialise the selected cells once per call (standard: ``CREATE LOCAL TEMPORARY
  TABLE … AS (…) WITH DATA``; on Spark a temporary view).

Not SQL at all: the aggregates run on one DuckDB thread over cells sorted by their key, so that
their floats are the same on every run (:mod:`ledger.scoring.repeatable`); this leans on DuckDB
keeping the rows of ``_scored`` in the order of its ``ORDER BY`` (insertion order is preserved). The probabilistic
scores have their own module and docstring (:mod:`ledger.scoring.quantile_sql`).

Scale of a cell (Hyndman & Koehler 2006): q = mean |y_t − y_{t−m}| over the pairs of the series'
actuals with t at or before the cell's origin (q2 likewise with squares). Pairs are formed by
period index, so a gap never pairs values that are not m periods apart. A cell whose series has
no such pair yet, or q = 0, has no scale: its scaled metrics are left out and counted in
``n_unscaled``.

Cells whose series and target period an excluding event covers (:mod:`ledger.scoring.events`)
are left out unless the selection includes them (``include_excluded``); ``scores`` counts them
in ``n_excluded``.
"""

from __future__ import annotations

import dataclasses
import datetime as dt
from collections.abc import Sequence
from typing import Literal, get_args

import pandas as pd

from ..errors import LedgerError, UnknownName
from ..periods import index_start, parse_label, period_index, period_label
from .attributes import attributes_sql, check_attribute, known_attributes
from .events import excluded_spans_sql
from .interval_wis import interval_wis_group_sql
from .quantile_sql import add_probabilistic_columns, quantile_detail_sql, wis_group_sql
from .repeatable import one_thread
from ..store import Store, latest_actuals_sql, live_runs_sql
from ..wording import format_level

__all__ = ["GroupKey", "GROUP_KEYS", "Selection", "bounds_join", "cells_sql", "scale_sql", "forecasts_sql", "period_filter", "score_cells", "interval_cells", "interval_misses", "scores", "POINT_COLUMNS"]

GroupKey = Literal["series", "model", "horizon", "origin", "period"]
GROUP_KEYS: tuple[str, ...] = get_args(GroupKey)
POINT_COLUMNS = ("n", "mae", "rmse", "mape", "smape", "wape", "mase", "rmsse", "bias", "bias_pct")


@dataclasses.dataclass(frozen=True)
class Selection:
    """Which cells to score: filters on model, series, horizon, target period and series
    attributes (``where``: (attribute, value) pairs in force at the as-of), and an as-of."""

    as_of: dt.datetime
    models: Sequence[str] = ()
    series: Sequence[str] = ()
    horizons: Sequence[int] = ()
    since: str | None = None
    until: str | None = None
    where: Sequence[tuple[str, str]] = ()
    include_excluded: bool = False

    def params(self) -> dict:
        out = {"as_of": self.as_of}
        if self.since:
            out["since"] = _label_day(self.since, "--since")[1]
        if self.until:
            out["until"] = _day_after(self.until)
        return out


def _label_day(label: str, option: str) -> tuple[str | None, dt.date]:
    """parse_label's (frequency, day) of a period label; a bad label is an error naming the option."""
    try:
        return parse_label(label)
    except ValueError as exc:
        raise LedgerError(f"{option}: {exc}") from None


def _day_after(label: str) -> dt.date:
    """The first day after the labelled period, so --until 2026-06 includes all of June."""
    freq, day = _label_day(label, "--until")
    if freq is None:
        return day + dt.timedelta(days=1)
    return index_start(period_index(day, freq) + 1, freq)


def period_filter(sel: Selection, column: str = "f.period") -> str:
    """The --since/--until condition on a target-period column (" AND …", or "" when unbounded)."""
    return (f" AND {column} >= $since" if sel.since else "") + (f" AND {column} < $until" if sel.until else "")


def bounds_join(cells: str = "c") -> str:
    """The join of a cell (alias ``cells``: run_id, series, period_index) to its bounds, alias b."""
    return f"JOIN bounds b ON b.run_id = {cells}.run_id AND b.series = {cells}.series AND b.period_index = {cells}.period_index"


def _in_list(column: str, values: Sequence, name: str) -> tuple[str, dict]:
    if not values:
        return "", {}
    names = [f"{name}{i}" for i in range(len(values))]
    sql = f" AND {column} IN ({', '.join('$' + n for n in names)})"
    return sql, dict(zip(names, values))


def forecasts_sql(sel: Selection) -> tuple[str, dict]:
    """SQL (and parameters) for every live forecast in the selection, with or without an actual."""
    sql, params = _parts(sel)
    return f"WITH live AS ({live_runs_sql()}), {sql} SELECT * FROM fc", params


def _parts(sel: Selection) -> tuple[str, dict]:
    params = sel.params()
    where = ""
    for column, values, name in (("l.model", sel.models, "m"), ("f.series", sel.series, "s"),
                                 ("f.horizon", [int(h) for h in sel.horizons], "h")):
        sql, p = _in_list(column, values, name)
        where += sql
        params.update(p)
    where += period_filter(sel)
    for j, (name, value) in enumerate(sel.where):
        params.update({f"wn{j}": name, f"wv{j}": value})
        where += (f" AND f.series IN (SELECT series FROM ({attributes_sql()}) "
                  f"WHERE name = $wn{j} AND value = $wv{j})")
    return f"""
    fc AS (
        SELECT f.run_id, l.model, l.frequency, l.origin, l.origin_index, f.series, f.period,
               f.period_index, f.horizon, f.point
        FROM forecasts f JOIN live l ON f.run_id = l.run_id
        WHERE TRUE {where})""", params


def cells_sql(sel: Selection, *, keep_excluded: bool = False) -> tuple[str, dict]:
    """SQL (and parameters) for every scorable cell in the selection, one row per cell.

    Columns: run_id, model, frequency, origin, origin_index, series, period, period_index,
    horizon, point, actual, e, q, q2, excluded (an excluding event covers the cell). Excluded
    cells are left out unless ``sel.include_excluded`` or ``keep_excluded``.
    """
    prefix, params = scale_sql(sel)
    sql = f"""
    {prefix},
    spans AS ({excluded_spans_sql()}),
    scored AS (
        SELECT fc.*, a.value AS actual, a.value - fc.point AS e, sc.q, sc.q2,
               EXISTS (SELECT 1 FROM spans x WHERE x.series = fc.series AND fc.period >= x.first_day
                       AND fc.period < x.end_day) AS excluded
        FROM fc
        JOIN act a ON a.series = fc.series AND a.period_index = fc.period_index
        LEFT JOIN scale sc ON sc.series = fc.series AND sc.origin_index = fc.origin_index)
    SELECT * FROM scored {"" if keep_excluded or sel.include_excluded else "WHERE NOT excluded"}
    """
    return sql, params


def scale_sql(sel: Selection) -> tuple[str, dict]:
    """The head of a query (``WITH act, live, fc, …, scale``) that later CTEs and a SELECT can follow.

    act: the actuals in force; fc: the live forecasts of the selection; scale: (series,
    origin_index, q, q2) for every series and origin in fc.
    """
    fc, params = _parts(sel)
    sql = f"""
    WITH
    act AS ({latest_actuals_sql()}),
    live AS ({live_runs_sql()}),
    {fc},
    lagged AS (
        SELECT a.series, a.period_index, abs(a.value - b.value) AS d
        FROM act a
        JOIN series s ON s.series = a.series
        JOIN act b ON b.series = a.series AND b.period_index = a.period_index - s.season_length),
    running AS (
        SELECT series, period_index, 0 AS marker,
               sum(d) OVER w AS sd, sum(d * d) OVER w AS sd2, count(*) OVER w AS nd
        FROM lagged
        WINDOW w AS (PARTITION BY series ORDER BY period_index ROWS UNBOUNDED PRECEDING)),
    marked AS (
        SELECT series, period_index, marker, sd, sd2, nd FROM running
        UNION ALL
        SELECT DISTINCT series, origin_index, 1, NULL, NULL, NULL FROM fc),
    -- Running sums are non-decreasing, so a running max carries the last value forward to
    -- each origin marker (markers sort after a pair at the same period: t <= origin).
    carried AS (
        SELECT series, period_index AS origin_index, marker,
               max(sd) OVER w AS sd, max(sd2) OVER w AS sd2, max(nd) OVER w AS nd
        FROM marked
        WINDOW w AS (PARTITION BY series ORDER BY period_index, marker ROWS UNBOUNDED PRECEDING)),
    scale AS (
        SELECT series, origin_index,
               CASE WHEN nd > 0 AND sd > 0 THEN sd / nd END AS q,
               CASE WHEN nd > 0 AND sd2 > 0 THEN sd2 / nd END AS q2
        FROM carried WHERE marker = 1)"""
    return sql, params


def score_cells(store: Store, sel: Selection) -> pd.DataFrame:
    """Every scored cell with its per-cell errors (for findings and reports)."""
    sql, params = cells_sql(sel)
    return store.con.execute(f"SELECT * FROM ({sql}) c ORDER BY model, series, origin_index, period_index",
                             params).df()


def interval_cells(store: Store, sel: Selection) -> pd.DataFrame:
    """One row per scored cell and interval level: its bounds and whether the actual fell inside.

    Columns: model, series, origin, origin_index, period, period_index, horizon, level, lower,
    upper, actual, below (actual < lower), above (actual > upper), q.
    """
    sql, params = cells_sql(sel)
    return store.con.execute(f"""
        SELECT c.model, c.series, c.origin, c.origin_index, c.period, c.period_index, c.horizon,
               b.level, b.lower, b.upper, c.actual, c.actual < b.lower AS below,
               c.actual > b.upper AS above, c.q
        FROM ({sql}) c
        {bounds_join()}
        ORDER BY c.model, b.level, c.series, c.horizon, c.period_index""", params).df()


def interval_misses(store: Store, sel: Selection) -> pd.DataFrame:
    """The rows of :func:`interval_cells`, in its order, with only what calibration tests use.

    Columns: model, series, period_index, horizon, level, below, above, ratio (|e| over the
    half-width on the side of the actual, NULL when that half-width is not positive), dist (how
    far the actual fell outside the interval, over the scale q; 0 inside, NULL without a scale).
    Fewer columns than :func:`interval_cells`: the findings of a large ledger read millions of
    these rows.
    """
    sql, params = cells_sql(sel)
    return store.con.execute(f"""
        SELECT c.model, c.series, c.period_index, c.horizon, b.level,
               c.actual < b.lower AS below, c.actual > b.upper AS above,
               CASE WHEN c.e >= 0 AND b.upper > c.point THEN c.e / (b.upper - c.point)
                    WHEN c.e < 0 AND c.point > b.lower THEN -c.e / (c.point - b.lower) END AS ratio,
               (greatest(b.lower - c.actual, 0) + greatest(c.actual - b.upper, 0)) / c.q AS dist
        FROM ({sql}) c
        {bounds_join()}
        ORDER BY c.model, b.level, c.series, c.horizon, c.period_index""", params).df()


_POINT_AGG = """
    count(*) AS n,
    avg(abs(e)) AS mae,
    sqrt(avg(e * e)) AS rmse,
    avg(CASE WHEN actual <> 0 THEN 100 * abs(e) / abs(actual) END) AS mape,
    avg(CASE WHEN abs(actual) + abs(point) > 0 THEN 200 * abs(e) / (abs(actual) + abs(point)) ELSE 0 END) AS smape,
    CASE WHEN sum(abs(actual)) > 0 THEN 100 * sum(abs(e)) / sum(abs(actual)) END AS wape,
    avg(abs(e) / q) AS mase,
    sqrt(avg(e * e / q2)) AS rmsse,
    avg(e) AS bias,
    CASE WHEN sum(abs(actual)) > 0 THEN 100 * sum(e) / sum(abs(actual)) END AS bias_pct,
    count(*) FILTER (WHERE actual = 0) AS n_zero_actual,
    count(*) FILTER (WHERE q IS NULL OR q2 IS NULL) AS n_unscaled
"""

# n: the cells that carry level L's bounds (a model may send bounds for some series only), so
# coverage_L and width_L state how many cells they are over (column n_L).
_LEVEL_AGG = """
    avg(CASE WHEN b.lower <= c.actual AND c.actual <= b.upper THEN CAST(1 AS DOUBLE) ELSE CAST(0 AS DOUBLE) END) AS coverage,
    count(*) AS n,
    avg(b.upper - b.lower) AS width,
    avg((b.upper - b.lower)
        + (2 / (1 - b.level / 100)) * greatest(b.lower - c.actual, 0)
        + (2 / (1 - b.level / 100)) * greatest(c.actual - b.upper, 0)) AS interval_score,
    avg(((b.upper - b.lower)
        + (2 / (1 - b.level / 100)) * greatest(b.lower - c.actual, 0)
        + (2 / (1 - b.level / 100)) * greatest(c.actual - b.upper, 0)) / c.q) AS msis
"""

_KEY_SQL = {"series": "c.series", "model": "c.model", "horizon": "c.horizon",
            "origin": "c.origin", "period": "c.period"}


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


def _materialise(store: Store, sel: Selection, attrs: list[str], where: list[tuple[str, str]]) -> None:
    """The temp table _scored: the selected cells, with a column g__<name> per attribute used."""
    sql, params = cells_sql(sel, keep_excluded=True)
    joins, filters = [], []
    for i, name in enumerate(attrs):
        params[f"attr{i}"] = name
        joins.append(f"LEFT JOIN ({attributes_sql()}) a{i} ON a{i}.series = c.series AND a{i}.name = $attr{i}")
    for j, (name, value) in enumerate(where):
        params[f"where{j}"] = value
        filters.append(f"a{attrs.index(name)}.value = $where{j}")
    cols = "".join(f", a{i}.value AS g__{name}" for i, name in enumerate(attrs))
    cond = f"WHERE {' AND '.join(filters)}" if filters else ""
    # sorted by the cell's key, so that the aggregates add each group's values in one order
    store.con.execute(f"CREATE OR REPLACE TEMP TABLE _scored AS SELECT row_number() OVER (ORDER BY c.model, c.series, "
                      f"c.origin_index, c.period_index) AS cell_id, c.*{cols} FROM ({sql}) c "
                      f"{' '.join(joins)} {cond} ORDER BY c.model, c.series, c.origin_index, c.period_index",
                      params)


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
    _materialise(store, sel, attrs, where)
    try:
        excluded = _count_excluded(con, keys)
        if not sel.include_excluded:
            con.execute("DELETE FROM _scored WHERE excluded")
        with one_thread(con):  # the same sums, to the last bit, on every run
            point, levels, pinball, wis, detail = _aggregates(con, keys, quantile_detail)
        point = _with_excluded(point, excluded if not sel.include_excluded else excluded.iloc[0:0], keys)
        freqs = [r[0] for r in con.execute("SELECT DISTINCT frequency FROM _scored").fetchall()]
    finally:
        con.execute("DROP TABLE IF EXISTS _scored")
    return _assemble(point, levels, pinball, keys, freqs, (wis, detail))


def _aggregates(con, keys: list[str], quantile_detail: bool) -> tuple:
    """Point, level, pinball, WIS (and quantile detail) aggregates of _scored per group."""
    key_sql = {k: _KEY_SQL.get(k, f"c.g__{k}") for k in keys}
    group = ", ".join(key_sql[k] for k in keys)
    select_keys = ", ".join(f"{key_sql[k]} AS {k}" for k in keys)
    gb = f"GROUP BY {group}" if keys else ""
    point = con.execute(
        f"SELECT {select_keys + ',' if keys else ''} {_POINT_AGG} FROM _scored c {gb}").df()
    levels = con.execute(
        f"SELECT {select_keys + ',' if keys else ''} b.level, {_LEVEL_AGG} FROM _scored c "
        f"{bounds_join()} "
        f"GROUP BY {group + ',' if keys else ''} b.level").df()
    if not _has_quantiles(con):
        # bounds alone: no pinball, no quantile detail, and WIS in one grouping of the bounds
        wis = con.execute(interval_wis_group_sql("_scored", select_keys, group)).df()
        return point, levels, pd.DataFrame(), wis, None
    # pinball comes with the WIS, from the same join of the cells to their quantile rows
    wis = con.execute(wis_group_sql("_scored", select_keys, group)).df()
    pinball, wis = wis[keys + ["pinball"]], wis.drop(columns="pinball")
    detail = con.execute(quantile_detail_sql("_scored", select_keys, group)).df() if quantile_detail else None
    return point, levels, pinball, wis, detail


def _has_quantiles(con) -> bool:
    """Whether any run of _scored has quantile rows (a semi-join that stops at the first)."""
    return len(con.execute("SELECT run_id FROM quantiles WHERE run_id IN (SELECT run_id FROM _scored) "
                           "LIMIT 1").fetchall()) > 0


def _count_excluded(con, keys: list[str]) -> pd.DataFrame:
    """Excluded cells of _scored per group (before they are deleted from it)."""
    key_sql = {k: _KEY_SQL.get(k, f"c.g__{k}") for k in keys}
    select_keys = ", ".join(f"{key_sql[k]} AS {k}" for k in keys)
    gb = f"GROUP BY {', '.join(key_sql.values())}" if keys else ""
    return con.execute(f"SELECT {select_keys + ',' if keys else ''} count(*) AS n_excluded FROM _scored c "
                       f"WHERE excluded {gb}").df()


def _with_excluded(point: pd.DataFrame, excluded: pd.DataFrame, keys: list[str]) -> pd.DataFrame:
    """Add n_excluded; a group whose every cell is excluded still gets a row (n = 0)."""
    if not keys:
        point = point.assign(n_excluded=int(excluded["n_excluded"].iloc[0]) if len(excluded) else 0)
        return point
    out = point.merge(excluded, on=keys, how="outer") if len(excluded) else point.assign(n_excluded=0)
    for c in ("n", "n_zero_actual", "n_unscaled", "n_excluded"):
        out[c] = out[c].fillna(0)
    return out


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
