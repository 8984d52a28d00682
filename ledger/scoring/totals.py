"""Group totals: the sum of the members' forecasts scored against the sum of their actuals.

Budgets are set on totals, whose accuracy differs from the members'. For an attribute ATTR,
each group (one value of ATTR) is scored per model, origin and target period on the members'
summed point forecasts and summed actuals, using only the target periods where every member of
the group has both a forecast and an actual (the others are counted in ``n_left_out``). The
total's scale for MASE/RMSSE comes from the summed actuals of the periods where every member has
an actual, up to the origin, pairing values one season apart (as for a single series).

Only point metrics: the interval of a sum is not the sum of the members' intervals (that would
assume the members' errors move perfectly together), and the members' joint distribution is
not in the ledger, so totals' intervals cannot be scored from members' intervals.

A series declared as the direct forecast of a total (attribute ``total_of`` = "ATTR=VALUE") is
scored on the same cells and against the same summed actuals, as ``forecast_of`` = "direct".
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
from ..lazy import pandas as pd

from .attributes import TOTAL_OF, check_attribute, series_attributes

from ..errors import UnknownName
from ..periods import index_start, period_label
from .cells import POINT_COLUMNS, Selection, forecasts_sql, score_cells
from .selection import selected_series
from ..store import Store, latest_actuals_sql

__all__ = ["INTERVAL_NOTE", "TOTAL_KEYS", "totals"]

TOTAL_KEYS = ("model", "horizon", "origin", "period")

INTERVAL_NOTE = ("intervals are not scored for totals: the interval of a sum is not the sum of the "
                 "members' intervals")


def _members(store: Store, sel: Selection, attr: str, extra: Sequence[str] = ()) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Member series and their group (a tuple of values when ``extra`` attributes split it further),
    and the series declared as direct forecasts of a group's total (only for a single attribute)."""
    attrs = series_attributes(store, sel.as_of)
    direct = pd.DataFrame(columns=["series", "group"])
    if TOTAL_OF in attrs.columns:
        decl = attrs[attrs[TOTAL_OF].notna()]
        parts = decl[TOTAL_OF].str.partition("=")
        if not extra:
            direct = pd.DataFrame({"series": decl["series"], "group": parts[2]})[parts[0] == attr]
        attrs = attrs[attrs[TOTAL_OF].isna()]
    if sel.series or sel.where:
        attrs = attrs[attrs["series"].isin(selected_series(store, sel))]
    names = [attr, *extra]
    attrs = attrs[attrs[names].notna().all(axis=1)]
    group = attrs[attr] if not extra else pd.Series(list(zip(*(attrs[n] for n in names))), index=attrs.index)
    members = pd.DataFrame({"series": attrs["series"], "group": group})
    return members, direct


def _history(store: Store, sel: Selection, members: pd.DataFrame) -> pd.DataFrame:
    """Summed actuals per group and period index, where every member has an actual."""
    acts = store.con.execute(f"SELECT series, period_index, value FROM ({latest_actuals_sql()})",
                             {"as_of": sel.as_of}).df().merge(members, on="series")
    size = members.groupby("group")["series"].nunique()
    hist = acts.groupby(["group", "period_index"]).agg(actual=("value", "sum"), k=("series", "nunique")).reset_index()
    return hist[hist["k"].to_numpy() == hist["group"].map(size).to_numpy()]


def _scale(hist: pd.DataFrame, m: int, origins: pd.DataFrame) -> pd.DataFrame:
    """q and q2 of each (group, origin_index) from the complete summed history up to the origin."""
    lagged = hist.assign(period_index=hist["period_index"] + m).rename(columns={"actual": "lag"})
    pairs = hist.merge(lagged[["group", "period_index", "lag"]], on=["group", "period_index"])
    pairs["d"] = (pairs["actual"] - pairs["lag"]).abs()
    out = []
    for (group, o), _ in origins.groupby(["group", "origin_index"]):
        d = pairs.loc[(pairs["group"] == group) & (pairs["period_index"] <= o), "d"].to_numpy()
        q, q2 = (d.mean(), (d * d).mean()) if len(d) else (np.nan, np.nan)
        out.append((group, o, q if q > 0 else np.nan, q2 if q2 > 0 else np.nan))
    return pd.DataFrame(out, columns=["group", "origin_index", "q", "q2"])


def _metrics(part: pd.DataFrame) -> dict:
    y, f = part["actual"].to_numpy(), part["point"].to_numpy()
    e = y - f
    ay = np.abs(y)
    nz = y != 0
    den = ay + np.abs(f)
    q, q2 = part["q"].to_numpy(), part["q2"].to_numpy()
    sc = np.isfinite(q)
    return {
        "n": len(part), "mae": np.mean(np.abs(e)), "rmse": np.sqrt(np.mean(e * e)),
        "mape": np.mean(100 * np.abs(e[nz]) / ay[nz]) if nz.any() else np.nan,
        "smape": np.mean(np.where(den > 0, 200 * np.abs(e) / np.where(den > 0, den, 1), 0.0)),
        "wape": 100 * np.abs(e).sum() / ay.sum() if ay.sum() > 0 else np.nan,
        "mase": np.mean(np.abs(e[sc]) / q[sc]) if sc.any() else np.nan,
        "rmsse": np.sqrt(np.mean(e[sc] ** 2 / q2[sc])) if sc.any() else np.nan,
        "bias": np.mean(e), "bias_pct": 100 * e.sum() / ay.sum() if ay.sum() > 0 else np.nan,
    }


def totals(store: Store, sel: Selection, attr: str, *, by: Sequence[str] = ("model",)) -> pd.DataFrame:
    """One row per group, ``by`` keys and kind of forecast (sum of members / direct); see module docstring.

    ``by``: model, horizon, origin, period and other attributes (the totals of the members
    sharing both values); ``series`` is refused, since a total has no series. Columns: the
    attribute, the other attributes, the built-in keys in the order given, ``forecast_of``,
    the point metrics and ``n_left_out`` (target periods of that row left out because a member
    lacked a forecast or an actual).
    """
    check_attribute(store, sel.as_of, attr, option="--totals")
    keys, extra = _total_keys(store, sel, attr, by)
    members, direct = _members(store, sel, attr, extra)
    cells = score_cells(store, sel)
    cols = [attr, *extra, *keys, "forecast_of", *POINT_COLUMNS, "n_left_out"]
    if cells.empty or members.empty:
        return pd.DataFrame(columns=cols)
    m = _season(store, members)
    size = members.groupby("group")["series"].nunique()
    mine = cells.merge(members, on="series")
    cell_keys = ["group", "model", "origin_index", "period_index"]
    summed = mine.groupby(cell_keys).agg(point=("point", "sum"), actual=("actual", "sum"),
                                         k=("series", "nunique")).reset_index()
    complete = summed["k"].to_numpy() == summed["group"].map(size).to_numpy()
    freq = _frequency(store, members)
    row_keys = ["group", *keys]
    left_out = _keyed(summed[~complete], freq).groupby(row_keys).size() if (~complete).any() else pd.Series(dtype=int)
    rows = _with_direct(summed[complete], _direct_forecasts(store, sel, direct), direct)
    scale = _scale(_history(store, sel, members), m, rows[["group", "origin_index"]].drop_duplicates())
    rows = _keyed(rows.merge(scale, on=["group", "origin_index"], how="left"), freq)
    out = []
    for key, part in rows.groupby([*row_keys, "forecast_of"], sort=True):
        group, rest, kind = key[0], key[1:-1], key[-1]
        names = group if isinstance(group, tuple) else (group,)
        lost = left_out.get((group, *rest) if rest else group, 0) if len(left_out) else 0
        out.append({**dict(zip([attr, *extra], names)), **dict(zip(keys, rest)), "forecast_of": kind,
                    **_metrics(part), "n_left_out": int(lost)})
    return pd.DataFrame(out, columns=cols)


def _total_keys(store: Store, sel: Selection, attr: str, by: Sequence[str]) -> tuple[list[str], list[str]]:
    """The built-in keys and the other attributes of ``by`` (checked), without ``attr`` itself."""
    wanted = [k.strip().lower() for k in by if k.strip() and k.strip().lower() != attr]
    if "series" in wanted:
        raise UnknownName(f"--totals {attr} --by series: a total has no series (it sums the series of each "
                          f"{attr}); group totals by model, horizon, origin, period or another attribute")
    if len(set(wanted)) != len(wanted):
        raise UnknownName(f"--by names a key twice: {', '.join(by)}")
    extra = [check_attribute(store, sel.as_of, k, option="--by") for k in wanted if k not in TOTAL_KEYS]
    return [k for k in wanted if k in TOTAL_KEYS], extra


def _frequency(store: Store, members: pd.DataFrame) -> str | None:
    rows = store.con.execute("SELECT DISTINCT frequency FROM series WHERE list_contains($keys, series)",
                             {"keys": members["series"].tolist()}).fetchall()
    return rows[0][0] if len(rows) == 1 else None


def _keyed(rows: pd.DataFrame, freq: str | None) -> pd.DataFrame:
    """``rows`` with horizon, origin and period columns (labels of the members' frequency)."""
    def labels(index: pd.Series) -> list[str]:
        if freq is None:
            return [str(i) for i in index]
        return [period_label(index_start(int(i), freq), freq) for i in index]
    return rows.assign(horizon=(rows["period_index"] - rows["origin_index"]).astype("int64"),
                       origin=labels(rows["origin_index"]), period=labels(rows["period_index"]))


def _season(store: Store, members: pd.DataFrame) -> int:
    rows = store.con.execute("SELECT DISTINCT season_length FROM series WHERE series IN (SELECT unnest($keys))",
                             {"keys": members["series"].tolist()}).fetchall()
    return int(max(r[0] for r in rows)) if rows else 1


def _direct_forecasts(store: Store, sel: Selection, direct: pd.DataFrame) -> pd.DataFrame:
    """Forecasts of the declared total series, whether or not they have actuals of their own."""
    if direct.empty:
        return pd.DataFrame(columns=["series", "model", "origin_index", "period_index", "point"])
    sql, params = forecasts_sql(sel)
    frame = store.con.execute(f"SELECT series, model, origin_index, period_index, point FROM ({sql}) "
                              "WHERE series IN (SELECT unnest($direct))", {**params, "direct": direct["series"].tolist()}).df()
    return frame


def _with_direct(summed: pd.DataFrame, cells: pd.DataFrame, direct: pd.DataFrame) -> pd.DataFrame:
    """Bottom-up rows, plus a direct total series' forecasts on the same cells (same summed actual)."""
    bottom_up = summed.assign(forecast_of="sum of members")[["group", "model", "origin_index", "period_index",
                                                               "point", "actual", "forecast_of"]]
    if direct.empty:
        return bottom_up
    own = cells.merge(direct, on="series")[["group", "model", "origin_index", "period_index", "point"]]
    both = own.merge(summed[["group", "model", "origin_index", "period_index", "actual"]],
                     on=["group", "model", "origin_index", "period_index"])
    return pd.concat([bottom_up, both.assign(forecast_of="direct")], ignore_index=True)
