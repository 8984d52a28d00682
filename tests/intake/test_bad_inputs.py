"""The bad-input corpus (tests/bad_inputs/, plus two huge files made here): every file is either
read with a stated interpretation or refused with one line naming file, row and column, and a
refused file leaves every table's content hash unchanged."""

from __future__ import annotations

from pathlib import Path

import pytest

from ledger import Ledger
from ledger.cli import app

from tests.helpers import TESTS, table_hashes

CORPUS = TESTS / "bad_inputs"
SNAP = ["--model", "m", "--origin", "2025-12"]
ISO_HINT = "use an ISO date (2026-07-31) or a label such as 2026, 2026Q3, 2026-11 or 2026-W05"
NOT_PERIOD = "row 1 column period: '{}' is not a period; " + ISO_HINT

KEYS = "; keys may not hold control, bidirectional or zero-width characters"
REFUSED = {
    "truncated_row.csv": "row 2 column forecast: is empty",
    "truncated_quote.csv": "row 2 column series: a quoted field is not closed before the end of the file",
    "latin1.csv": "row 2 column series: byte 0xe9 is not UTF-8 text; save the file as UTF-8",
    "binary_garbage.csv": "row 1 column 2 (past the header): byte 0x80 is not UTF-8 text; save the file as UTF-8",
    "xlsx_renamed.csv": "the header holds a NUL byte, so it is not a text CSV file (a workbook? export it as CSV)",
    "semicolon_decimal_comma.csv": "row 1 column forecast: '10,5' is not a finite number; write the decimal mark as a point (10.5)",
    "decimal_comma_quoted.csv": "row 1 column forecast: '10,5' is not a finite number; write the decimal mark as a point (10.5)",
    "thousands_separator.csv": "row 1 column forecast: '1,234.5' is not a finite number; remove the thousands separators",
    "thousands_space.csv": "row 1 column forecast: '1 234' is not a finite number; remove the thousands separators",
    "nul_byte.csv": "row 1 column forecast: holds a NUL byte, so it is not a text CSV file (a workbook? export it as CSV)",
    "nul_in_key.csv": "row 1 column series: holds a NUL byte, so it is not a text CSV file (a workbook? export it as CSV)",
    "duplicate_header.csv": "the header names forecast more than once (column names are case-insensitive)",
    "duplicate_header_case.csv": "the header names series more than once (column names are case-insensitive)",
    "dates_us_slash.csv": NOT_PERIOD.format("01/31/2026"),
    "dates_eu_dot.csv": NOT_PERIOD.format("31.01.2026"),
    "dates_month_name.csv": NOT_PERIOD.format("Jan 2026"),
    "spreadsheet_serial.csv": "row 1 column period: '46053' is not a period (it looks like a spreadsheet date serial "
                        "number; export dates as text); " + ISO_HINT,
    "year_too_big.csv": NOT_PERIOD.format("10000-01"),
    "horizon_huge.csv": "row 1 column period: target period is 95,688 periods after the origin; "
                        "Backsight accepts horizons up to 1000",
    "horizon_negative.csv": "row 1 column period: target period 1999-01 is not after the origin 2025-12",
    "nan_spellings.csv": "row 1 column forecast: 'nan' is not a finite number",
    "nan_upper.csv": "row 1 column forecast: 'NAN' is not a finite number",
    "na_r.csv": "row 1 column forecast: 'NA' is not a finite number",
    "null_word.csv": "row 1 column forecast: 'NULL' is not a finite number",
    "spreadsheet_error.csv": "row 1 column forecast: '#N/A' is not a finite number",
    "inf_spellings.csv": "row 1 column forecast: 'Infinity' is not a finite number",
    "neg_inf.csv": "row 1 column forecast: '-inf' is not a finite number",
    "huge_number.csv": "row 1 column forecast: '1e400' is not a finite number",
    "hex_number.csv": "row 1 column forecast: '0x1A' is not a finite number",
    "percent_number.csv": "row 1 column forecast: '12%' is not a finite number",
    "currency_number.csv": "row 1 column forecast: '$12' is not a finite number",
    "extra_field.csv": "row 1 column 4 (past the header): has 4 fields; the header has 3",
    "missing_field.csv": "row 1 column forecast: is empty",
    "only_bom.csv": "the file is empty",
    "whitespace_only.csv": "the file is empty",
    "actuals_week_53.csv": "row 2 column period: ISO week 53 does not exist in 2025 ('2025-W53')",
    "actuals_quarter_end.csv": "row 1 column period: holds bare dates, which fit several frequencies; say which "
                               "with --freq (yearly, quarterly, monthly, weekly, daily)",
    "cr_only.csv": "lines end with a carriage return alone (an old Mac format); save the file with LF or CRLF line ends",
    "parquet_binary_key.parquet": "row 1 column series: holds binary data, not text; write the column as plain values",
    "parquet_bool_forecast.parquet": "row 1 column forecast: holds true/false values, not numbers",
    "parquet_list_key.parquet": "row 1 column series: holds a list, not text; write the column as plain values",
    "period_arabic_digits.csv": NOT_PERIOD.format("\u0662\u0660\u0662\u0666-\u0660\u0661"),
    "period_fullwidth_digits.csv": NOT_PERIOD.format("\uff12\uff10\uff12\uff16-01"),
    "period_bad_time.csv": "row 1 column period: '2026-01-31 99:99:99' is not a valid time of day",
    "period_utc_offset.csv": "row 1 column period: '2026-01-31T10:00+05:00' has a UTC offset; give the date alone "
                             "(a period is a calendar date, in no time zone)",
    # the series identity rule (README): control, bidirectional and zero-width characters are refused
    "key_newline.csv": "row 1 column series: 'line one\\nline two' holds a control character (U+000A)" + KEYS,
    "key_escape.csv": "row 1 column series: 'A\\x1b[2J' holds a control character (U+001B)" + KEYS,
    "key_zero_width.csv": "row 1 column series: 'nor\\u200bth' holds a zero-width character "
                          "(U+200B ZERO WIDTH SPACE)" + KEYS,
    "key_bidi_override.csv": "row 1 column series: 'abc\\u202efed' holds a bidirectional embedding or override "
                             "(U+202E RIGHT-TO-LEFT OVERRIDE)" + KEYS,
    "key_bom_inside.csv": "row 1 column series: 'A\\ufeffB' holds a byte-order mark "
                          "(U+FEFF ZERO WIDTH NO-BREAK SPACE)" + KEYS,
}

# Files read as they stand; the value is (series, period start, value) rows the ledger must hold.
READ = {
    "utf16_bom.csv": [("A", "2026-01-01", 10.0), ("A", "2026-02-01", 11.0)],       # UTF-16 LE with BOM
    "utf16be_bom.csv": [("A", "2026-01-01", 10.0)],                                 # UTF-16 BE with BOM
    "utf8_bom.csv": [("A", "2026-01-01", 10.0)],
    "semicolon.csv": [("A", "2026-01-01", 10.0), ("A", "2026-02-01", 11.0)],       # delimiter from header
    "tab_delimited.tsv": [("A", "2026-01-01", 10.0)],
    "blank_lines.csv": [("A", "2026-01-01", 10.0), ("A", "2026-02-01", 11.0)],     # blank lines skipped
    "crlf.csv": [("A", "2026-01-01", 10.0), ("A", "2026-02-01", 11.0)],
    "header_spaces.csv": [("A", "2026-01-01", 10.0)],                               # names trimmed
    "dates_iso.csv": [("A", "2026-01-01", 10.0), ("A", "2026-02-01", 11.0)],       # month-end dates -> month
    "dates_iso_time.csv": [("A", "2026-01-01", 10.0)],
    "dates_iso_time_nonzero.csv": [("A", "2026-01-01", 10.0)],                      # the time of day is ignored
    "key_quotes.csv": [('he said "hi"', "2026-01-01", 10.0)],                       # CSV quoting undone
    "key_html.csv": [("<script>alert(1)</script>", "2026-01-01", 10.0)],            # kept verbatim, escaped on output
    "key_path.csv": [("../../etc/passwd", "2026-01-01", 10.0), ("..\\..\\windows", "2026-01-01", 11.0)],
    "key_spaces.csv": [("north", "2026-01-01", 10.0)],                              # keys are trimmed
    "actuals_negative_zero.csv": [("A", "2026-01-01", 0.0), ("A", "2026-02-01", 0.0)],
    "actuals_key_nfd.csv": [("caf\u00e9", "2026-01-01", 10.0), ("caf\u00e9", "2026-02-01", 11.0)],  # NFC: one series
    "actuals_key_case.csv": [("North", "2026-01-01", 10.0), ("north", "2026-01-01", 11.0)],   # two, with a warning
}
ARGS = {"actuals_quarter_end.csv": [], "actuals_negative_zero.csv": [], "actuals_week_53.csv": [],
        "actuals_key_nfd.csv": [], "actuals_key_case.csv": []}


def test_corpus_is_complete():
    names = {p.name for p in CORPUS.iterdir()}
    assert names == set(REFUSED) | set(READ)
    assert len(names) + 2 >= 40          # plus the two huge files built below


def _invoke(runner, ledger, path: Path, args=None):
    command = "actuals" if path.name.startswith("actuals_") else "snapshot"
    extra = ARGS.get(path.name, SNAP) if args is None else args
    return runner.invoke(app, ["--ledger", str(ledger), command, str(path), *extra])


@pytest.fixture
def base(tmp_path):
    path = tmp_path / "l.duckdb"
    Ledger.open(path).close()
    return path


def _expected(name: str) -> str:
    message = REFUSED[name]
    return f"Error: {name} {message}\n" if message.startswith("row ") else f"Error: {name}: {message}\n"


@pytest.mark.parametrize("name", sorted(REFUSED))
def test_refused_with_file_row_column(runner, base, name):
    before = table_hashes(base)
    result = _invoke(runner, base, CORPUS / name)
    assert result.exit_code == 1, result.output
    assert result.stderr == _expected(name)
    assert table_hashes(base) == before


@pytest.mark.parametrize("name", sorted(READ))
def test_read_with_stated_interpretation(runner, base, name):
    result = _invoke(runner, base, CORPUS / name)
    assert result.exit_code == 0, result.output
    with Ledger.open(base, create=False, read_only=True) as book:
        table = "actuals" if name.startswith("actuals_") else "forecasts"
        column = "value" if table == "actuals" else "point"
        rows = book.store.con.execute(
            f"SELECT series, strftime(period, '%Y-%m-%d'), {column} FROM {table} ORDER BY series, period").fetchall()
    assert sorted(rows) == sorted(READ[name])


def test_quarter_end_dates_read_with_freq(runner, base):
    result = _invoke(runner, base, CORPUS / "actuals_quarter_end.csv", ["--freq", "quarterly"])
    assert result.exit_code == 0 and result.stdout == "2 new, 0 revised, 0 unchanged\n"


def test_100000_column_row(runner, base, tmp_path):
    path = tmp_path / "wide.csv"
    extra = [f"x{i}" for i in range(100_000 - 3)]
    path.write_text(",".join(["series", "period", "forecast", *extra]) + "\n" +
                    ",".join(["A", "2026-01", "10", *["1"] * len(extra)]) + "\n")
    result = _invoke(runner, base, path)
    assert result.exit_code == 0, result.output   # read: the extra columns are ignored, with a short warning
    assert result.stderr == "Warning: wide.csv: ignored columns x0, x1, x2, x3, x4, x5, x6, x7, x8, x9 and 99,987 more\n"


def test_10_megabyte_cell(runner, base, tmp_path):
    path = tmp_path / "bigcell.csv"
    path.write_text("series,period,forecast\n" + "K" * 10_000_000 + ",2026-01,10\n")
    before = table_hashes(base)
    result = _invoke(runner, base, path)
    assert result.exit_code == 1
    assert result.stderr == ("Error: bigcell.csv row 1 column series: 'KKKKKKKKKKKKKKKKKKKKKKKKKKKKKKKKKKKKKKKK… "
                             "(10,000,000 characters)' is longer than 200 characters\n")
    assert table_hashes(base) == before


def test_header_field_over_the_csv_limit(runner, base, tmp_path):
    path = tmp_path / "hugefield.csv"
    path.write_text("series,period,forecast," + "x" * 140_000 + "\nA,2026-01,10,1\n")
    before = table_hashes(base)
    result = _invoke(runner, base, path)
    assert result.exit_code == 1
    assert result.stderr == ("Error: hugefield.csv: the header cannot be read (field larger than field limit "
                             "(131072)); is this a CSV file?\n")
    assert table_hashes(base) == before


def test_keys_differing_only_by_case_are_named(runner, base):
    result = _invoke(runner, base, CORPUS / "actuals_key_case.csv")
    assert result.exit_code == 0
    assert result.stderr == ("Warning: actuals_key_case.csv: series names that differ only by case: "
                             "'North' / 'north'; they are different series (case is significant)\n")
