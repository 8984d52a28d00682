"""ledger.wording: the one home of labels and number formatting. Expected strings are the
project's own conventions (common practice, no source), pinned so that a change is deliberate."""

from __future__ import annotations

import math

import pandas as pd

from ledger.periods import period_index, parse_period
from ledger.wording import (
    format_level,
    label,
    labels,
    list_names,
    num,
    p_value,
    pct,
    pval,
    severity_rank,
    short_num,
    shorten,
    signed,
)


def test_period_labels_from_indexes():
    i = period_index(parse_period("2026-03", "monthly"), "monthly")
    assert label(i, "monthly") == "2026-03"
    assert label(period_index(parse_period("2026Q3", "quarterly"), "quarterly"), "quarterly") == "2026Q3"
    assert labels(pd.Series([i, i + 1, i]), "monthly").tolist() == ["2026-03", "2026-04", "2026-03"]


def test_levels_keep_each_callers_precision():
    assert [format_level(v) for v in (80, 97.5, 99.0)] == ["80", "97.5", "99"]
    # input columns: 6 significant figures; reference methods' columns: 10
    assert format_level(99.1234567) == "99.1235"
    assert format_level(99.1234567, 10) == "99.1234567"


def test_numbers_for_reports_and_for_evidence():
    assert [num(x) for x in (1234.5, 12.34, 1.234, 0.1234, 0.001234, 0)] == \
        ["1,234", "12.3", "1.23", "0.123", "0.00123", "0.00"]
    assert [short_num(x) for x in (1234.5, 12.34, 1.234, 0.1234, 0.001234, 0)] == \
        ["1,234", "12.3", "1.23", "0.12", "0.0012", "0.00"]
    assert signed(0.41) == "+0.41" and signed(-9.81) == "-9.81" and signed(math.nan) == "–"
    assert num(None) == num(math.inf) == short_num(math.nan) == "–"
    assert pct(6.14) == "6.1%" and pct(62.5, 0) == "62%" and pct(None) == "–"


def test_p_values():
    assert [p_value(p) for p in (0.0312, 0.00005, math.nan)] == ["0.031", "< 0.0001", "–"]
    assert [pval(p) for p in (0.0312, 0.00005, None)] == ["p 0.031", "p < 0.0001", "p –"]


def test_severity_order_and_lists():
    assert sorted(["note", "act", "other", "watch"], key=severity_rank) == ["act", "other", "watch", "note"]
    assert list_names("abcdefg") == "a, b, c, d, e and 2 more"
    assert list_names(["x", "y"]) == "x, y"
    assert shorten("z" * 50) == "z" * 40 + "… (50 characters)"
