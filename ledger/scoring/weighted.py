"""Weighted accuracy: so that a hundred tiny series do not outvote the three that carry the volume.

Weight of a series (``--weight volume``): its volume, Σ|y| over the m periods (one season)
immediately before the first target period of that series in the scored selection, using the
actuals in force at the as-of. ``--weight ATTR`` multiplies that volume by a numeric attribute,
such as a unit price, for revenue-style weights.

A weighted metric of a group is Σ_s w_s·M_s / Σ_s w_s over the group's series s, where M_s is
the metric over that series' cells in the group; series with no volume (w = 0) or no value of M
are left out. This is how the M5 competition weights its scaled errors (WRMSSE: per-series RMSSE
weighted by each series' share of recent dollar sales; Makridakis, Spiliotis & Assimakopoulos
2022, "M5 accuracy competition: results, findings, and conclusions", IJF 38(4) — the weighting
scheme from memory; M5 uses the last 28 days, Backsight one season).
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
from ..lazy import pandas as pd

from ..errors import UnknownName
from .attributes import check_attribute, series_attributes
from .cells import Selection, cells_sql
from .grouped import scores
from .repeatable import sums_for
from ..store import Store, latest_actuals_sql

__all__ = ["WEIGHTED", "volume_weights", "weighted_scores"]

WEIGHTED = {"mape": "wmape", "bias_pct": "wbias_pct", "mase": "wmase", "rmsse": "wrmsse"}


def volume_weights(store: Store, sel: Selection) -> pd.DataFrame:
    """Per series: first scored target period index, season length, volume (see module docstring)."""
    sql, params = cells_sql(sel)
    size, rows = store.con.execute("SELECT max(abs(value)), count(*) FROM actuals").fetchone()
    volume = sums_for(store.con, rows).total("abs(a.value)", float(size or 0.0))  # the same last bit every run
    return store.con.execute(f"""
        WITH first AS (SELECT series, min(period_index) AS first_index FROM ({sql}) c GROUP BY series),
        act AS ({latest_actuals_sql()})
        SELECT f.series, f.first_index, s.season_length,
               coalesce({volume}, 0) AS volume, count(a.value) AS n_volume
        FROM first f JOIN series s ON s.series = f.series
        LEFT JOIN act a ON a.series = f.series
             AND a.period_index >= f.first_index - s.season_length AND a.period_index < f.first_index
        GROUP BY f.series, f.first_index, s.season_length""", params).df()


def _weights(store: Store, sel: Selection, weight: str) -> tuple[pd.Series, str]:
    frame = volume_weights(store, sel).set_index("series")
    if weight == "volume":
        return frame["volume"], "volume: Σ|actual| over the season before each series' first scored target"
    check_attribute(store, sel.as_of, weight, option="--weight")
    attrs = series_attributes(store, sel.as_of).set_index("series")
    raw = attrs[weight].reindex(frame.index)
    values = pd.to_numeric(raw, errors="coerce")
    bad = raw.notna() & values.isna()
    if bad.any():
        key = bad[bad].index[0]
        raise UnknownName(f"--weight {weight}: series {key!r} has {weight} = {raw[key]!r}, not a number")
    return (values.fillna(0.0) * frame["volume"]), f"{weight} × volume (volume: Σ|actual| over the season before each series' first scored target)"


def weighted_scores(store: Store, sel: Selection, by: Sequence[str], *, weight: str,
                    where: Sequence[tuple[str, str]] = (), quantile_detail: bool = False) -> pd.DataFrame:
    """:func:`ledger.scoring.cells.scores` plus weighted MAPE, bias %, MASE and RMSSE per group."""
    keys = [k.strip().lower() for k in by if k.strip()]
    base = scores(store, sel, keys, where=where, quantile_detail=quantile_detail)
    per_series = scores(store, sel, keys if "series" in keys else keys + ["series"], where=where)
    w, label = _weights(store, sel, weight)
    per_series["_w"] = per_series["series"].map(w).fillna(0.0).to_numpy(dtype=float)
    rows = []
    groups = per_series.groupby(keys, sort=False, dropna=False) if keys else [((), per_series)]
    for key, part in groups:
        row = dict(zip(keys, key if isinstance(key, tuple) else (key,)))
        row["weight_total"] = float(part["_w"].sum())
        for metric, name in WEIGHTED.items():
            ok = part[metric].notna().to_numpy() & (part["_w"].to_numpy() > 0)
            ws = part["_w"].to_numpy()[ok]
            row[name] = float(np.sum(ws * part[metric].to_numpy()[ok]) / ws.sum()) if ok.any() else np.nan
        rows.append(row)
    extra = pd.DataFrame(rows, columns=keys + ["weight_total", *WEIGHTED.values()])
    out = base.merge(extra, on=keys, how="left") if keys else pd.concat([base, extra], axis=1)
    out.insert(len(out.columns) - 4, "weighting", label)
    return out
