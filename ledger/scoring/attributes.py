"""Series attributes (region, family, planner, unit price …), versioned, and what builds on them:
grouping keys for scores, filters, and weights.

Attributes are never required. A file of attributes has a ``series`` column and one column per
attribute; recording it appends a version for every value that changed (an empty cell removes
the attribute), so ``--as-of`` reproduces the groupings that held at that time.
"""

from __future__ import annotations

import dataclasses
import re

import numpy as np
from ..lazy import pandas as pd

from ..errors import InputError, UnknownName
from ..intake.sources import read_table
from ..store import Store
from ..wording import shorten

__all__ = ["AttributesResult", "TOTAL_OF", "write_attributes", "attributes_sql", "known_attributes", "check_attribute",
           "parse_where", "series_attributes"]

TOTAL_OF = "total_of"   # reserved attribute: this series is forecast directly as the total of a group
_NAME = re.compile(r"^[a-z][a-z0-9_]{0,62}$")
_BUILT_IN = {"series", "model", "horizon", "origin", "period"}


@dataclasses.dataclass(frozen=True)
class AttributesResult:
    series: int
    changed: int
    unchanged: int
    names: list[str]
    warnings: list[str]


def attributes_sql() -> str:
    """The attribute values in force at the as-of ($as_of): one row per series and name."""
    return """
    SELECT series, name, value FROM (
        SELECT *, row_number() OVER (PARTITION BY series, name ORDER BY recorded_at DESC) AS rn
        FROM attributes WHERE recorded_at <= $as_of) t
    WHERE rn = 1 AND value IS NOT NULL"""


def _read(data, name, total_of: str | None) -> tuple[str, pd.DataFrame]:
    source, frame = read_table(data, name=name)
    if "series" not in frame.columns:
        raise InputError(source, f"missing required column series (found {', '.join(frame.columns[:12])})")
    for col in frame.columns:
        if col != "series" and (not _NAME.match(col) or col in _BUILT_IN):
            why = "is a built-in grouping key" if col in _BUILT_IN else "is not a usable name (letters, digits, _)"
            raise InputError(source, f"{why}; rename the attribute", column=col)
    text = frame.astype("string").fillna("").apply(lambda c: c.str.strip())
    empty = (text["series"] == "").to_numpy()
    if empty.any():
        raise InputError(source, "is empty", row=int(np.argmax(empty)) + 1, column="series")
    dup = text["series"].duplicated().to_numpy()
    if dup.any():
        raise InputError(source, "a second row for the same series", row=int(np.argmax(dup)) + 1, column="series")
    if total_of is not None:
        text[TOTAL_OF] = _check_total_of(total_of, source)
    return source, text


def _check_total_of(value: str, source: str) -> str:
    attr, sep, group = value.partition("=")
    if not sep or not _NAME.match(attr.strip()) or not group.strip():
        raise InputError(source, f"--total-of {shorten(value)!r} is not ATTR=VALUE (e.g. region=North)")
    return f"{attr.strip()}={group.strip()}"


def write_attributes(store: Store, data, *, name: str | None = None, total_of: str | None = None) -> AttributesResult:
    """Record the attribute columns of a file or frame; one transaction."""
    source, text = _read(data, name, total_of)
    long = text.melt(id_vars="series", var_name="name", value_name="value")
    long["value"] = long["value"].where(long["value"] != "", None)
    with store.transaction() as con:
        now = store.next_timestamp()
        con.register("_attrs", long)
        con.execute(f"""
            CREATE TEMP TABLE _attr_diff AS
            SELECT n.series, n.name, n.value, (o.value IS NOT DISTINCT FROM n.value) AS same
            FROM _attrs n LEFT JOIN ({attributes_sql().replace('AND value IS NOT NULL', '')}) o
            ON o.series = n.series AND o.name = n.name
            WHERE NOT (o.series IS NULL AND n.value IS NULL)""", {"as_of": now})
        con.unregister("_attrs")
        changed, same = con.execute(
            "SELECT count(*) FILTER (NOT same), count(*) FILTER (same) FROM _attr_diff").fetchall()[0]
        con.execute("INSERT INTO attributes SELECT series, name, value, ? FROM _attr_diff WHERE NOT same", [now])
        con.execute("DROP TABLE _attr_diff")
    names = [c for c in text.columns if c != "series"]
    return AttributesResult(len(text), int(changed), int(same), names, [])


def known_attributes(store: Store, as_of) -> list[str]:
    rows = store.con.execute(f"SELECT DISTINCT name FROM ({attributes_sql()}) ORDER BY name", {"as_of": as_of}).fetchall()
    return [r[0] for r in rows]


def check_attribute(store: Store, as_of, name: str, *, option: str) -> str:
    """``name`` if it is an attribute in force at the as-of, else UnknownName listing the known ones."""
    known = known_attributes(store, as_of)
    if name not in known:
        listed = ", ".join(known) if known else "none recorded yet (backsight attributes FILE)"
        raise UnknownName(f"{option}: no attribute named {name!r}; known attributes: {listed}")
    return name


def parse_where(items) -> list[tuple[str, str]]:
    """``["region=North", …]`` -> ``[("region", "North"), …]``."""
    out = []
    for item in items or ():
        attr, sep, value = str(item).partition("=")
        if not sep or not attr.strip():
            raise UnknownName(f"--where {shorten(item)!r} is not ATTR=VALUE (e.g. region=North)")
        out.append((attr.strip().lower(), value.strip()))
    return out


def series_attributes(store: Store, as_of) -> pd.DataFrame:
    """One row per series, one column per attribute in force at the as-of."""
    long = store.con.execute(f"SELECT * FROM ({attributes_sql()})", {"as_of": as_of}).df()
    if long.empty:
        return pd.DataFrame({"series": pd.Series([], dtype=object)})
    return long.pivot(index="series", columns="name", values="value").reset_index().rename_axis(None, axis=1)
