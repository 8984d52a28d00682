"""Forecast stability: how the successive forecasts of one target period change from run to run.

For one series, model and target period t, the live runs that forecast t, in origin order,
give forecasts f_1, f_2, …, f_K. A revision is r_k = f_k − f_{k−1} (k ≥ 2), between runs that
are consecutive in the ledger (a month without a run makes one revision over two origins).
The revision's horizon is the later run's horizon (t − origin_k).

Per group (series × model by default):

- ``revision``: mean |r_k| / q_k, where q_k is the MASE scale of the series at the later run's
  origin (Hyndman & Koehler 2006; the scale of :mod:`ledger.scoring.cells`). Orientation: lower is
  steadier; 0.5 means a typical revision is half the in-sample seasonal-naive error.
  Revisions without a scale are counted in ``n_unscaled``.
- ``toward``: the share of non-zero revisions that moved the forecast closer to the eventual
  actual, |y − f_k| < |y − f_{k−1}|, over revisions whose target has an actual
  (``n_toward``). Higher is better: revisions that carry news move toward the outcome.
- ``nervousness``: the share of consecutive revision pairs of one target (r_{k−1}, r_k, both
  non-zero) whose signs are opposite — the forecast moves up, then back down (or the reverse).
  Reasoning: revisions of an efficient forecast are unpredictable from earlier revisions
  (Nordhaus, W.D. (1987) "Forecasting efficiency: concepts and applications", *Review of
  Economics and Statistics* 69(4), 667–674; from memory), so with independent, symmetric
  revisions about half of the pairs flip; well above 0.5 the forecast over-reacts and takes it
  back, well below it moves in one direction by steps (smoothed, slow to adjust). Over
  ``n_pairs`` pairs; the 0.5 reference is exact for independent revisions with a median of 0.

Events (:mod:`ledger.scoring.events`) act as in the scores: a target period that an excluding
event in force covers (for its series) is left out with all its revisions, counted in
``n_excluded`` (revisions left out), unless the selection includes excluded cells
(``include_excluded``; then ``n_excluded`` is 0). Exclusion is a property of the target, so the
same for every run of it: leaving a target out never joins two revisions across a gap.

Set-based SQL with standard window functions (lag over each target's runs), like the scores.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Literal, get_args

from ..lazy import pandas as pd

from ..errors import UnknownName
from ..store import Store
from .attributes import attributes_sql, known_attributes
from .cells import Selection, scale_sql
from .events import excluded_spans_sql
from .repeatable import sums_for

__all__ = ["StabilityKey", "STABILITY_KEYS", "STABILITY_COLUMNS", "revisions_sql", "stability", "forecast_paths"]

StabilityKey = Literal["series", "model", "horizon"]
STABILITY_KEYS: tuple[str, ...] = get_args(StabilityKey)
STABILITY_COLUMNS = ("n_targets", "n_revisions", "revision", "toward", "nervousness", "n_toward", "n_pairs",
                     "n_unscaled", "n_excluded")
_COUNTS = ("n_targets", "n_revisions", "n_toward", "n_pairs", "n_unscaled", "n_excluded")


def revisions_sql(sel: Selection) -> tuple[str, dict]:
    """One row per revision: model, frequency, series, period, period_index, origin_index, horizon, point,
    prev_point, prev2_point (NULL for the second run of a target), q, actual (NULL when not in yet),
    excluded (an excluding event covers the target; such rows are kept, for counting: the
    aggregates of :func:`stability` leave them out unless ``sel.include_excluded``)."""
    prefix, params = scale_sql(sel)
    sql = f"""
    {prefix},
    spans AS ({excluded_spans_sql()}),
    runs_of_target AS (
        SELECT model, frequency, series, period, period_index, origin_index, horizon, point,
               lag(point) OVER w AS prev_point, lag(point, 2) OVER w AS prev2_point
        FROM fc
        WINDOW w AS (PARTITION BY model, frequency, series, period_index ORDER BY origin_index))
    SELECT r.*, sc.q, a.value AS actual,
           EXISTS (SELECT 1 FROM spans x WHERE x.series = r.series AND r.period >= x.first_day
                   AND r.period < x.end_day) AS excluded
    FROM runs_of_target r
    LEFT JOIN scale sc ON sc.series = r.series AND sc.origin_index = r.origin_index
    LEFT JOIN act a ON a.series = r.series AND a.period_index = r.period_index
    WHERE r.prev_point IS NOT NULL"""
    return sql, params


# The figures of one group, over its revisions in use (r.used) only; n_excluded counts the rest.
# The shares are means of 0/1, exact in any order; the revision mean is an order-independent sum
# (ledger.scoring.repeatable), so the figures are the same bits on every run.
_AGG = """
    count(DISTINCT r.series || '|' || CAST(r.period_index AS VARCHAR)) FILTER (WHERE r.used) AS n_targets,
    count(*) FILTER (WHERE r.used) AS n_revisions,
    {revision} AS revision,
    avg(CASE WHEN r.actual IS NOT NULL AND r.point <> r.prev_point THEN
             CASE WHEN abs(r.actual - r.point) < abs(r.actual - r.prev_point) THEN 1.0 ELSE 0.0 END END)
        FILTER (WHERE r.used) AS toward,
    avg(CASE WHEN (r.point - r.prev_point) * (r.prev_point - r.prev2_point) <> 0 THEN
             CASE WHEN (r.point - r.prev_point) * (r.prev_point - r.prev2_point) < 0 THEN 1.0 ELSE 0.0 END END)
        FILTER (WHERE r.used) AS nervousness,
    count(*) FILTER (WHERE r.used AND r.actual IS NOT NULL AND r.point <> r.prev_point) AS n_toward,
    count(*) FILTER (WHERE r.used AND (r.point - r.prev_point) * (r.prev_point - r.prev2_point) <> 0) AS n_pairs,
    count(*) FILTER (WHERE r.used AND r.q IS NULL) AS n_unscaled,
    count(*) FILTER (WHERE NOT r.used) AS n_excluded
"""


def _keys(store: Store, sel: Selection, by: Sequence[str]) -> list[str]:
    keys = [k.strip().lower() for k in by if k.strip()]
    known = known_attributes(store, sel.as_of)
    for k in keys:
        if k not in STABILITY_KEYS and k not in known:
            extra = f", or an attribute ({', '.join(known)})" if known else ""
            raise UnknownName(f"stability: cannot group by {k}; use a comma list of {', '.join(STABILITY_KEYS)}{extra}")
    if len(set(keys)) != len(keys):
        raise UnknownName(f"stability --by names a key twice: {', '.join(by)}")
    return keys


def stability(store: Store, sel: Selection, by: Sequence[str] = ("series", "model")) -> pd.DataFrame:
    """Revision size, share toward the actual and nervousness per group; columns: the keys, then STABILITY_COLUMNS.

    A group whose every revision is excluded still gets a row (n_revisions 0, figures NaN), as
    in the scores."""
    keys = _keys(store, sel, by)
    sql, params = revisions_sql(sel)
    joins, cols = [], {}
    for i, k in enumerate(keys):
        if k in STABILITY_KEYS:
            cols[k] = f"r.{k}"
        else:
            params[f"attr{i}"] = k
            joins.append(f"LEFT JOIN ({attributes_sql()}) a{i} ON a{i}.series = r.series AND a{i}.name = $attr{i}")
            cols[k] = f"a{i}.value"
    select = "".join(f"{c} AS {k}, " for k, c in cols.items())
    group = f"GROUP BY {', '.join(cols.values())} ORDER BY {', '.join(cols.values())}" if keys else ""
    used = "TRUE" if sel.include_excluded else "NOT excluded"
    source = f"(SELECT *, {used} AS used FROM ({sql}) v) r"
    size, rows = store.con.execute(f"SELECT max(abs(r.point - r.prev_point) / r.q) FILTER (WHERE r.used), "
                                   f"count(*) FROM {source}", params).fetchone()
    revision = sums_for(store.con, int(rows or 1)).mean(
        "CASE WHEN r.used THEN abs(r.point - r.prev_point) / r.q END", float(size or 0.0))
    frame = store.con.execute(f"SELECT {select}{_AGG.format(revision=revision)} "
                              f"FROM {source} {' '.join(joins)} {group}", params).df()
    for c in _COUNTS:
        frame[c] = frame[c].astype("int64")
    if "horizon" in keys:
        frame["horizon"] = frame["horizon"].astype("int64")
    return frame[keys + list(STABILITY_COLUMNS)]


def forecast_paths(store: Store, sel: Selection, *, last: int = 4) -> pd.DataFrame:
    """The successive forecasts of each series × model's ``last`` newest target periods that have
    at least two runs: model, series, period_index, origin_index, horizon, point, actual (NULL if not in)."""
    prefix, params = scale_sql(sel)
    params["last"] = int(last)
    return store.con.execute(f"""
        {prefix},
        multi AS (
            SELECT model, series, period_index FROM fc GROUP BY model, series, period_index HAVING count(*) >= 2),
        ranked AS (
            SELECT model, series, period_index,
                   row_number() OVER (PARTITION BY model, series ORDER BY period_index DESC) AS back
            FROM multi)
        SELECT fc.model, fc.series, fc.period_index, fc.origin_index, fc.horizon, fc.point, a.value AS actual
        FROM fc JOIN ranked k ON k.model = fc.model AND k.series = fc.series AND k.period_index = fc.period_index
        LEFT JOIN act a ON a.series = fc.series AND a.period_index = fc.period_index
        WHERE k.back <= $last
        ORDER BY fc.model, fc.series, fc.period_index, fc.origin_index""", params).df()
