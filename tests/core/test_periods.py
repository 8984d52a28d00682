"""Period parsing and arithmetic (ISO 8601 weeks: Monday start, week 1 holds the first Thursday)."""

import datetime as dt

import pytest

from ledger.periods import (
    SEASON_LENGTHS, check_frequency, index_start, parse_label, parse_period, period_index,
    period_label, period_start,
)

D = dt.date


@pytest.mark.parametrize("text, freq, day", [
    ("2026", "yearly", D(2026, 1, 1)),
    ("2026Q3", "quarterly", D(2026, 7, 1)),
    ("2026-Q3", "quarterly", D(2026, 7, 1)),
    ("2026q1", "quarterly", D(2026, 1, 1)),
    ("2026-11", "monthly", D(2026, 11, 1)),
    ("2026-1", "monthly", D(2026, 1, 1)),
    ("2026-W05", "weekly", D(2026, 1, 26)),
    ("2026W05", "weekly", D(2026, 1, 26)),
    ("2026-W01", "weekly", D(2025, 12, 29)),   # ISO week 1 of 2026 starts in 2025
    ("2026-11-30", None, D(2026, 11, 30)),
    (" 2026-11-30 00:00:00 ", None, D(2026, 11, 30)),
])
def test_parse_label(text, freq, day):
    assert parse_label(text) == (freq, day)


@pytest.mark.parametrize("text", ["2026-13", "2026Q5", "2026-W54", "2025-W53", "26-01", "Nov 2026", "2026-02-30", ""])
def test_parse_label_refuses(text):
    with pytest.raises(ValueError):
        parse_label(text)


def test_week_53_exists_in_long_iso_years():
    # 2026 has 53 ISO weeks (it starts on a Thursday); 2025 does not.
    assert parse_label("2026-W53") == ("weekly", D(2026, 12, 28))


def test_any_day_in_a_period_maps_to_it():
    assert parse_period("2026-09-30", "quarterly") == D(2026, 7, 1)
    assert parse_period("2026-12-31", "yearly") == D(2026, 1, 1)
    assert parse_period("2026-11-30", "monthly") == D(2026, 11, 1)
    assert parse_period("2026-01-01", "weekly") == D(2025, 12, 29)   # a Thursday
    assert parse_period("2026-11-30", "daily") == D(2026, 11, 30)


def test_label_of_another_frequency_is_refused():
    with pytest.raises(ValueError, match="is a monthly label, not a quarterly period"):
        parse_period("2026-11", "quarterly")


@pytest.mark.parametrize("freq", list(SEASON_LENGTHS))
def test_index_is_consecutive_and_invertible(freq):
    day = D(2019, 12, 30)
    start = period_start(day, freq)
    i = period_index(start, freq)
    for k in range(-60, 60):
        assert period_index(index_start(i + k, freq), freq) == i + k
    nxt = index_start(i + 1, freq)
    assert nxt > start and period_index(nxt - dt.timedelta(days=1), freq) == i


def test_horizons_across_year_ends():
    assert period_index(D(2027, 2, 1), "monthly") - period_index(D(2026, 11, 1), "monthly") == 3
    assert period_index(D(2027, 1, 1), "quarterly") - period_index(D(2026, 7, 1), "quarterly") == 2
    assert period_index(D(2027, 1, 4), "weekly") - period_index(D(2026, 12, 28), "weekly") == 1


def test_labels_round_trip():
    for text, freq in [("2026", "yearly"), ("2026Q3", "quarterly"), ("2026-11", "monthly"),
                       ("2026-W05", "weekly"), ("2026-11-30", "daily")]:
        assert period_label(parse_period(text, freq), freq) == text


def test_season_lengths_are_the_common_ones():
    # yearly 1, quarterly 4, monthly 12, weekly 52, daily 7: common practice, no source.
    assert SEASON_LENGTHS == {"yearly": 1, "quarterly": 4, "monthly": 12, "weekly": 52, "daily": 7}


def test_check_frequency():
    assert check_frequency(" Monthly ") == "monthly"
    with pytest.raises(ValueError, match="use one of yearly, quarterly, monthly, weekly, daily"):
        check_frequency("fortnightly")


def test_period_sql_matches_the_python_formulas():
    # staging resolves labels in SQL; it must agree with period_start/period_index everywhere
    import datetime as dt

    import duckdb

    from ledger.periods import FREQUENCIES, period_index, period_sql, period_start

    days = [dt.date(1, 1, 8) + dt.timedelta(days=k * 997) for k in range(3600)] + \
        [dt.date(1969, 12, 28) + dt.timedelta(days=k) for k in range(20)] + [dt.date(9999, 12, 26)]
    con = duckdb.connect()
    con.execute("CREATE TABLE d AS SELECT unnest(?::DATE[]) AS day", [days])
    for freq in FREQUENCIES:
        start, index = period_sql("day", freq)
        got = con.execute(f"SELECT day, {start}, {index} FROM d ORDER BY day").fetchall()
        assert [(s, i) for _, s, i in got] == [(period_start(d, freq), period_index(d, freq)) for d in sorted(days)], freq
