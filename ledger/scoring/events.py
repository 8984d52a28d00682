"""Events (a stock-out, a promotion, a shutdown), versioned, and the cells they exclude from scoring.

An events file has the columns ``series`` (a series key, ``*`` for every series, or
``ATTR=VALUE`` for the series whose attribute has that value at the as-of), ``first`` and
``last`` (period labels, both included), ``label`` and ``exclude`` (yes or no). An event's
identity is (series, first, last); recording a file appends a version for every event whose
label or exclude flag changed, so ``--as-of`` reproduces the exclusions in force at that time.
To stop excluding an event, send its row again with ``exclude`` no (the event stays as a mark).

A cell is excluded when an event in force with exclude yes covers its series and its target
period: the period's first day lies in [first day of ``first``, first day after ``last``).
The scale q is not affected: it is a property of the series' history, kept as recorded.
"""

from __future__ import annotations

import dataclasses
import datetime as dt
import re

import numpy as np
from ..lazy import pandas as pd

from ..errors import InputError
from ..intake.csvread import shorten
from ..intake.sources import read_table
from ..periods import index_start, parse_label, period_index
from ..store import Store
from .attributes import attributes_sql

__all__ = ["EventsResult", "EVENT_COLUMNS", "write_events", "events_sql", "excluded_spans_sql", "events_in_force"]

EVENT_COLUMNS = ("series", "first", "last", "label", "exclude")
_YES, _NO = {"yes", "y", "true", "1"}, {"no", "n", "false", "0"}
_ATTR = re.compile(r"^([A-Za-z][A-Za-z0-9_]{0,62})\s*=\s*(.+)$")


@dataclasses.dataclass(frozen=True)
class EventsResult:
    events: int
    changed: int
    unchanged: int


def events_sql() -> str:
    """The version of each event in force at the as-of ($as_of): one row per event."""
    return """
    SELECT target, first_day, end_day, first_label, last_label, label, exclude, recorded_at FROM (
        SELECT *, row_number() OVER (PARTITION BY target, first_day, end_day ORDER BY recorded_at DESC) AS rn
        FROM events WHERE recorded_at <= $as_of) t
    WHERE rn = 1"""


def excluded_spans_sql() -> str:
    """(series, first_day, end_day) for every excluding event in force at $as_of, one row per series covered."""
    ev = f"(SELECT target, first_day, end_day FROM ({events_sql()}) e WHERE exclude)"
    return f"""
    SELECT s.series, ev.first_day, ev.end_day FROM {ev} ev
    JOIN series s ON ev.target = '*' OR ev.target = s.series
    UNION ALL
    SELECT a.series, ev.first_day, ev.end_day FROM {ev} ev
    JOIN ({attributes_sql()}) a ON ev.target = a.name || '=' || a.value"""


def events_in_force(store: Store, as_of: dt.datetime) -> pd.DataFrame:
    """Events in force at the as-of: series, first, last, label, exclude, recorded_at; by first period."""
    return store.con.execute(
        f"SELECT target AS series, first_label AS first, last_label AS last, label, exclude, recorded_at, "
        f"first_day, end_day FROM ({events_sql()}) ORDER BY first_day, end_day, target", {"as_of": as_of}).df()


def _target(text: str) -> str:
    """Series keys stay as written; ATTR=VALUE gets a lower-case attribute name, as --where does."""
    if m := _ATTR.match(text):
        return f"{m[1].lower()}={m[2].strip()}"
    return text


def _span(source: str, row: int, first: str, last: str) -> tuple[dt.date, dt.date]:
    days = []
    for column, text in (("first", first), ("last", last)):
        try:
            freq, day = parse_label(text)
        except ValueError as exc:
            raise InputError(source, f"{exc}; use a period label such as 2026-03 or 2026Q1", row=row,
                             column=column) from None
        start = day if freq is None else index_start(period_index(day, freq), freq)
        end = day + dt.timedelta(days=1) if freq is None else index_start(period_index(day, freq) + 1, freq)
        days.append((start, end))
    if days[1][1] <= days[0][0]:
        raise InputError(source, f"last {shorten(last)!r} is before first {shorten(first)!r}", row=row, column="last")
    return days[0][0], days[1][1]


def _read(data, name: str | None) -> tuple[str, pd.DataFrame]:
    source, frame = read_table(data, name=name)
    missing = [c for c in EVENT_COLUMNS if c not in frame.columns]
    if missing:
        raise InputError(source, f"missing required column {', '.join(missing)}; expected "
                                 f"{', '.join(EVENT_COLUMNS)} (found {', '.join(frame.columns[:12])})")
    text = frame[list(EVENT_COLUMNS)].astype("string").fillna("").apply(lambda c: c.str.strip())
    rows = []
    for i, (target, first, last, label, exclude) in enumerate(text.itertuples(index=False), start=1):
        for column, value in (("series", target), ("first", first), ("last", last), ("label", label)):
            if not value:
                raise InputError(source, "is empty", row=i, column=column)
        flag = exclude.lower()
        if flag not in _YES | _NO:
            raise InputError(source, f"{shorten(exclude)!r} is not yes or no", row=i, column="exclude")
        first_day, end_day = _span(source, i, first, last)
        rows.append((_target(target), first_day, end_day, first, last, label, flag in _YES))
    out = pd.DataFrame(rows, columns=["target", "first_day", "end_day", "first_label", "last_label", "label",
                                      "exclude"])
    dup = out.duplicated(["target", "first_day", "end_day"]).to_numpy()
    if dup.any():
        raise InputError(source, "a second row for the same series, first and last", row=int(np.argmax(dup)) + 1,
                         column="series")
    return source, out


def write_events(store: Store, data, *, name: str | None = None) -> EventsResult:
    """Record the events of a file or frame; a changed label or exclude flag is a new version. One transaction."""
    source, frame = _read(data, name)
    with store.transaction() as con:
        now = store.next_timestamp()
        con.register("_events_in", frame)
        try:
            con.execute(f"""
                CREATE OR REPLACE TEMP TABLE _event_diff AS
                SELECT n.*, (o.label IS NOT DISTINCT FROM n.label AND o.exclude IS NOT DISTINCT FROM n.exclude) AS same
                FROM _events_in n LEFT JOIN ({events_sql()}) o
                ON o.target = n.target AND o.first_day = n.first_day AND o.end_day = n.end_day""", {"as_of": now})
        finally:
            con.unregister("_events_in")
        changed, same = con.execute(
            "SELECT count(*) FILTER (NOT same), count(*) FILTER (same) FROM _event_diff").fetchall()[0]
        con.execute("INSERT INTO events SELECT target, first_day, end_day, first_label, last_label, label, exclude, "
                    "?, ? FROM _event_diff WHERE NOT same ORDER BY target, first_day", [now, source])
        con.execute("DROP TABLE _event_diff")
    return EventsResult(len(frame), int(changed), int(same))
