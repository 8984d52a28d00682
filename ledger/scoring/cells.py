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
- ``CREATE OR REPLACE TEMP TABLE … AS …`` and ``DROP TABLE IF EXISTS``: the grouped scores
  build their small parts (actuals in force, scales, runs) once per call as temporary tables
  (standard: ``CREATE LOCAL TEMPORARY TABLE … AS (…) WITH DATA``; on Spark a temporary view);
  see :mod:`ledger.scoring.grouped`.

Not SQL at all: on DuckDB the grouped sums are fixed-point 128-bit integer sums, so that their
floats are the same on every run whatever the number of threads (:mod:`ledger.scoring.repeatable`).
The probabilistic scores have their own module and docstring (:mod:`ledger.scoring.quantile_sql`).

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

from ..lazy import pandas as pd

from ..errors import LedgerError
from ..periods import index_start, parse_label, period_index
from .attributes import attributes_sql
from .events import excluded_spans_sql
from ..store import Store, latest_actuals_sql, live_runs_sql

__all__ = ["GroupKey", "GROUP_KEYS", "Selection", "bounds_join", "cells_sql", "scale_sql", "forecasts_sql", "period_filter",
           "selection_filter", "model_filter", "excluded_cells_sql", "lagged_sql", "running_scale_sql", "score_cells",
           "interval_cells", "interval_misses", "interval_misses_sql", "POINT_COLUMNS"]

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


def selection_filter(sel: Selection, *, series: str, horizon: str, period: str) -> tuple[str, dict]:
    """The selection's conditions on series, horizon and target period (" AND …") and their
    parameters, for a query whose columns are the given expressions (models: by the runs joined)."""
    params = sel.params()
    where = ""
    for column, values, name in ((series, sel.series, "s"), (horizon, [int(h) for h in sel.horizons], "h")):
        sql, p = _in_list(column, values, name)
        where += sql
        params.update(p)
    where += period_filter(sel, period)
    for j, (name, value) in enumerate(sel.where):
        params.update({f"wn{j}": name, f"wv{j}": value})
        where += (f" AND {series} IN (SELECT series FROM ({attributes_sql()}) "
                  f"WHERE name = $wn{j} AND value = $wv{j})")
    return where, params


def model_filter(sel: Selection, column: str = "l.model") -> tuple[str, dict]:
    """The --model condition (" AND model IN (…)") and its parameters."""
    return _in_list(column, sel.models, "m")


def _parts(sel: Selection) -> tuple[str, dict]:
    where, params = selection_filter(sel, series="f.series", horizon="f.horizon", period="f.period")
    models, p = model_filter(sel)
    params.update(p)
    return f"""
    fc AS (
        SELECT f.run_id, l.model, l.frequency, l.origin, l.origin_index, f.series, f.period,
               f.period_index, f.horizon, f.point
        FROM forecasts f JOIN live l ON f.run_id = l.run_id
        WHERE TRUE {models}{where})""", params


def cells_sql(sel: Selection, *, keep_excluded: bool = False) -> tuple[str, dict]:
    """SQL (and parameters) for every scorable cell in the selection, one row per cell.

    Columns: run_id, model, frequency, origin, origin_index, series, period, period_index,
    horizon, point, actual, e, q, q2, excluded (an excluding event covers the cell). Excluded
    cells are left out unless ``sel.include_excluded`` or ``keep_excluded``.
    """
    prefix, params = scale_sql(sel)
    sql = f"""
    {prefix},
    ex AS ({excluded_cells_sql("fc")}),
    scored AS (
        SELECT fc.*, a.value AS actual, a.value - fc.point AS e, sc.q, sc.q2, ex.series IS NOT NULL AS excluded
        FROM fc
        JOIN act a ON a.series = fc.series AND a.period_index = fc.period_index
        LEFT JOIN scale sc ON sc.series = fc.series AND sc.origin_index = fc.origin_index
        LEFT JOIN ex ON ex.series = fc.series AND ex.period = fc.period)
    SELECT * FROM scored {"" if keep_excluded or sel.include_excluded else "WHERE NOT excluded"}
    """
    return sql, params


def excluded_cells_sql(cells: str) -> str:
    """SQL: the distinct (series, period) of ``cells`` that an excluding event in force covers.

    A join to the few event spans, then a left join of the cells to its result: an EXISTS per
    cell made DuckDB group all the cells by (series, period) even when no event excludes anything.
    """
    return f"""
    SELECT DISTINCT x.series, x.period FROM {cells} x
    JOIN ({excluded_spans_sql()}) sp ON sp.series = x.series AND x.period >= sp.first_day AND x.period < sp.end_day"""


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
    {lagged_sql("act")},
    markers AS (SELECT DISTINCT series, origin_index FROM fc),
    {running_scale_sql("lagged", "markers")}"""
    return sql, params


def lagged_sql(act: str) -> str:
    """The CTEs lag_of and lagged: per series and period with an actual one season earlier, d = |y_t - y_{t-m}|.

    The lagged index is computed first, so the self-join is on (series, period_index): joining
    on series alone and filtering made 69 times as many rows on a ledger of 69 periods per series.
    """
    return f"""lag_of AS (
        SELECT a.series, a.period_index, a.value, a.period_index - s.season_length AS lag_index
        FROM {act} a JOIN series s ON s.series = a.series),
    lagged AS (
        SELECT a.series, a.period_index, abs(a.value - b.value) AS d
        FROM lag_of a JOIN {act} b ON b.series = a.series AND b.period_index = a.lag_index)"""


def running_scale_sql(lagged: str, markers: str) -> str:
    """The CTEs running, marked, carried and scale: (series, origin_index, q, q2) for each marker
    (series, origin_index) of ``markers``, from the pairs of ``lagged`` with t at or before the origin."""
    return f"""running AS (
        SELECT series, period_index, 0 AS marker,
               sum(d) OVER w AS sd, sum(d * d) OVER w AS sd2, count(*) OVER w AS nd
        FROM {lagged}
        WINDOW w AS (PARTITION BY series ORDER BY period_index ROWS UNBOUNDED PRECEDING)),
    marked AS (
        SELECT series, period_index, marker, sd, sd2, nd FROM running
        UNION ALL
        SELECT series, origin_index, 1, NULL, NULL, NULL FROM {markers}),
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
    sql, params = interval_misses_sql(sel)
    return store.con.execute(f"{sql}\n        ORDER BY c.model, b.level, c.series, c.horizon, c.period_index",
                             params).df()


def interval_misses_sql(sel: Selection) -> tuple[str, dict]:
    """SQL (and parameters) for the rows of :func:`interval_misses`, in no order (aliases c, b)."""
    sql, params = cells_sql(sel)
    return f"""
        SELECT c.model, c.series, c.period_index, c.horizon, b.level,
               c.actual < b.lower AS below, c.actual > b.upper AS above,
               CASE WHEN c.e >= 0 AND b.upper > c.point THEN c.e / (b.upper - c.point)
                    WHEN c.e < 0 AND c.point > b.lower THEN -c.e / (c.point - b.lower) END AS ratio,
               (greatest(b.lower - c.actual, 0) + greatest(c.actual - b.upper, 0)) / c.q AS dist
        FROM ({sql}) c
        {bounds_join()}""", params
