"""Frequencies, period labels and period arithmetic.

A period is stored as the DATE of its first day, and, for arithmetic, as an integer *index*:
consecutive periods of one frequency have consecutive indices, so a horizon is a subtraction and
a seasonal lag is ``index - m``. The index scheme is part of the ledger format:

=========  =============================================  ===========
frequency  index                                          season m
=========  =============================================  ===========
yearly     year                                           1
quarterly  4·year + quarter − 1                            4
monthly    12·year + month − 1                             12
weekly     (Monday − 1970-01-05) / 7 days (ISO weeks)      52
daily      days since 1970-01-01                           7
=========  =============================================  ===========

Season lengths are common practice, no source; they can be overridden per series.
"""

from __future__ import annotations

import datetime as dt
import re
from typing import Literal, get_args

from .errors import PeriodOutOfRange

__all__ = [
    "Frequency",
    "FREQUENCIES",
    "SEASON_LENGTHS",
    "parse_period",
    "parse_label",
    "period_index",
    "period_start",
    "period_label",
    "check_frequency",
    "index_start",
    "period_sql",
]

Frequency = Literal["yearly", "quarterly", "monthly", "weekly", "daily"]
FREQUENCIES: tuple[str, ...] = get_args(Frequency)
SEASON_LENGTHS: dict[str, int] = {"yearly": 1, "quarterly": 4, "monthly": 12, "weekly": 52, "daily": 7}

_EPOCH_DAY = dt.date(1970, 1, 1)
_EPOCH_MONDAY = dt.date(1970, 1, 5)

# re.ASCII: \d is 0-9 only, so Arabic-Indic or full-width digits are refused as in numbers
_YEAR = re.compile(r"^(\d{4})$", re.ASCII)
_QUARTER = re.compile(r"^(\d{4})-?[Qq]([1-4])$", re.ASCII)
_MONTH = re.compile(r"^(\d{4})-(\d{1,2})$", re.ASCII)
_WEEK = re.compile(r"^(\d{4})-?[Ww](\d{1,2})$", re.ASCII)
_DATE = re.compile(r"^(\d{4})-(\d{2})-(\d{2})(?:[T ](\d{2}):(\d{2})(?::(\d{2})(?:\.\d+)?)?(Z|[+-]\d{2}:?\d{2})?)?$",
                   re.ASCII)
_SERIAL = re.compile(r"^\d{5}(\.\d+)?$", re.ASCII)


def check_frequency(freq: str) -> str:
    """Return ``freq`` lower-cased if it is a known frequency, else raise ValueError listing them."""
    value = str(freq).strip().lower()
    if value not in FREQUENCIES:
        raise ValueError(f"unknown frequency {freq!r}; use one of {', '.join(FREQUENCIES)}")
    return value


def parse_label(text: str) -> tuple[str | None, dt.date]:
    """Parse one period label into ``(frequency or None, date inside the period)``.

    The frequency is None for a bare ISO date, which could belong to any frequency.
    Raises ValueError with the offending text when nothing matches.

    >>> parse_label("2026Q3")
    ('quarterly', datetime.date(2026, 7, 1))
    >>> parse_label("2026-W05")
    ('weekly', datetime.date(2026, 1, 26))
    """
    s = str(text).strip()
    if len(s) > 40:
        raise ValueError(f"{s[:40]!r}… ({len(s):,} characters) is not a period")
    if m := _DATE.match(s):
        _check_time(s, m)
        return None, _date(s, int(m[1]), int(m[2]), int(m[3]))
    if m := _MONTH.match(s):
        month = int(m[2])
        if not 1 <= month <= 12:
            raise ValueError(f"month {month} out of range in {text!r}")
        return "monthly", dt.date(int(m[1]), month, 1)
    if m := _QUARTER.match(s):
        return "quarterly", dt.date(int(m[1]), 3 * int(m[2]) - 2, 1)
    if m := _WEEK.match(s):
        year, week = int(m[1]), int(m[2])
        try:
            return "weekly", dt.date.fromisocalendar(year, week, 1)
        except ValueError:
            raise ValueError(f"ISO week {week} does not exist in {year} ({text!r})") from None
    if m := _YEAR.match(s):
        return "yearly", dt.date(int(m[1]), 1, 1)
    hint = " (it looks like a spreadsheet date serial number; export dates as text)" if _SERIAL.match(s) else ""
    raise ValueError(
        f"{text!r} is not a period{hint}; use an ISO date (2026-07-31) or a label such as "
        "2026, 2026Q3, 2026-11 or 2026-W05"
    )


def _check_time(text: str, m: re.Match) -> None:
    """A time of day is allowed (and ignored) when it is a real time without a UTC offset.

    An offset is refused rather than applied: a period is a calendar date where the data was
    recorded, and moving it to UTC could move it to another day.
    """
    hour, minute, second = (int(g) if g else 0 for g in (m[4], m[5], m[6]))
    if hour > 23 or minute > 59 or second > 59:
        raise ValueError(f"{text!r} is not a valid time of day")
    if m[7]:
        raise ValueError(f"{text!r} has a UTC offset; give the date alone (a period is a calendar date, "
                         "in no time zone)")


def _date(text: str, year: int, month: int, day: int) -> dt.date:
    try:
        return dt.date(year, month, day)
    except ValueError:
        raise ValueError(f"{text!r} is not a valid date") from None


def period_start(day: dt.date, freq: str) -> dt.date:
    """First day of the period of frequency ``freq`` that contains ``day``."""
    if freq == "yearly":
        return dt.date(day.year, 1, 1)
    if freq == "quarterly":
        return dt.date(day.year, 3 * ((day.month - 1) // 3) + 1, 1)
    if freq == "monthly":
        return dt.date(day.year, day.month, 1)
    if freq == "weekly":
        return day - dt.timedelta(days=day.weekday())
    if freq == "daily":
        return day
    raise ValueError(f"unknown frequency {freq!r}")


def period_index(day: dt.date, freq: str) -> int:
    """Integer index of the period containing ``day`` (see the module docstring)."""
    if freq == "yearly":
        return day.year
    if freq == "quarterly":
        return 4 * day.year + (day.month - 1) // 3
    if freq == "monthly":
        return 12 * day.year + day.month - 1
    if freq == "weekly":
        return (period_start(day, "weekly") - _EPOCH_MONDAY).days // 7
    if freq == "daily":
        return (day - _EPOCH_DAY).days
    raise ValueError(f"unknown frequency {freq!r}")


def index_start(index: int, freq: str) -> dt.date:
    """Inverse of :func:`period_index`: the first day of the period with that index.

    Raises :class:`ledger.errors.PeriodOutOfRange` for a period outside the years 1 to 9999.
    """
    try:
        return _index_start(index, freq)
    except (ValueError, OverflowError) as exc:
        if "unknown frequency" in str(exc):
            raise
        raise PeriodOutOfRange(f"a {freq} period (index {index:,}) would fall outside the years 1 to 9999, "
                               "where Backsight's dates end; use a shorter horizon or earlier periods") from None


def _index_start(index: int, freq: str) -> dt.date:
    if freq == "yearly":
        return dt.date(index, 1, 1)
    if freq == "quarterly":
        return dt.date(index // 4, 3 * (index % 4) + 1, 1)
    if freq == "monthly":
        return dt.date(index // 12, index % 12 + 1, 1)
    if freq == "weekly":
        return _EPOCH_MONDAY + dt.timedelta(days=7 * index)
    if freq == "daily":
        return _EPOCH_DAY + dt.timedelta(days=index)
    raise ValueError(f"unknown frequency {freq!r}")


def period_label(day: dt.date, freq: str) -> str:
    """The canonical label of the period containing ``day``: 2026, 2026Q3, 2026-11, 2026-W05, 2026-11-30.

    ``day`` may be a datetime (a pandas Timestamp from a query): its time of day is not part of a
    period, so every message prints the same label (a daily origin 2021-01-02, never 2021-01-02T00:00:00).
    """
    if isinstance(day, dt.datetime):
        day = day.date()
    start = period_start(day, freq)
    if freq == "yearly":
        return f"{start.year}"
    if freq == "quarterly":
        return f"{start.year}Q{(start.month - 1) // 3 + 1}"
    if freq == "monthly":
        return f"{start.year}-{start.month:02d}"
    if freq == "weekly":
        year, week, _ = start.isocalendar()
        return f"{year}-W{week:02d}"
    return start.isoformat()


def parse_period(text: str, freq: str) -> dt.date:
    """Parse ``text`` as a period of frequency ``freq``; return the period's first day.

    A label of another frequency is refused (``2026-11`` is not a quarter); an ISO date maps to
    the period that contains it, so quarter-end dates work.

    >>> parse_period("2026-09-30", "quarterly")
    datetime.date(2026, 7, 1)
    """
    label_freq, day = parse_label(text)
    if label_freq is not None and label_freq != freq:
        raise ValueError(f"{text!r} is a {label_freq} label, not a {freq} period")
    return period_start(day, freq)



def period_sql(day: str, freq: str) -> tuple[str, str]:
    """SQL for (first day, index) of the period of frequency ``freq`` holding DATE ``day``:
    the formulas of :func:`period_start` and :func:`period_index`, for set-based staging."""
    freq = check_frequency(freq)
    if freq == "yearly":
        return f"make_date(year({day}), 1, 1)", f"year({day})"
    if freq == "quarterly":
        return f"CAST(date_trunc('quarter', {day}) AS DATE)", f"4 * year({day}) + (month({day}) - 1) // 3"
    if freq == "monthly":
        return f"CAST(date_trunc('month', {day}) AS DATE)", f"12 * year({day}) + month({day}) - 1"
    if freq == "weekly":
        monday = f"CAST({day} - CAST(isodow({day}) - 1 AS INTEGER) AS DATE)"
        return monday, f"({monday} - DATE '1970-01-05') // 7"
    return day, f"{day} - DATE '1970-01-01'"
