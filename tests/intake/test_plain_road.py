"""The fast road for plain CSV files (ledger/intake/plaincsv.py: DuckDB's reader, checks in SQL)
stages exactly what the exact reader stages: the same runs, content hashes, tables and warnings.
A file it cannot vouch for goes to the exact reader, so every message is the exact reader's
(the bad-input corpus, tests/intake/test_bad_inputs.py, runs through both roads)."""

from __future__ import annotations

import csv
import struct

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings, strategies as st

from ledger import Ledger
from ledger.errors import InputError
from ledger.intake import ingest
from ledger.intake.plaincsv import NotPlain

from tests.helpers import TESTS, write
from tests.intake.test_bad_inputs import ARGS, READ, SNAP
from tests.intake.test_streaming import TABLES, _forecasts


_OPEN_TABLE = ingest.open_table


def _no_exact_reader(data, **kwargs):
    """open_table for frames only: a file given here must have gone the fast road."""
    if not isinstance(data, pd.DataFrame):
        raise AssertionError("the exact reader was used for a plain file")
    return _OPEN_TABLE(data, **kwargs)


def _both_roads(tmp_path, monkeypatch, path, record, *, plain_only: bool = True):
    """(table hashes, runs, result) after recording ``path`` by each road into a ledger of its own;
    ``plain_only``: the first road may not fall back to the exact reader."""
    out = []
    for road in ("plain", "exact"):
        with monkeypatch.context() as m:
            if road == "exact":
                m.setattr(ingest, "PLAIN_ROAD", False)
            elif plain_only:
                m.setattr(ingest, "open_table", _no_exact_reader)
            with Ledger.open(tmp_path / f"{road}.duckdb") as book:
                book.record_actuals(pd.DataFrame({"series": ["s0", "s1"], "period": ["2026-01", "2026-01"],
                                                  "actual": [100.0, 101.0]}))
                result = record(book, path)
                out.append(({t: book.store.table_hash(t) for t in TABLES if t not in ("runs", "series", "actuals")},
                            book.store.con.execute("SELECT model, origin_index, content_hash, n_cells FROM runs "
                                                   "ORDER BY ALL").fetchall(), result))
    return out


def test_a_plain_forecast_file_stages_what_the_exact_reader_stages(tmp_path, monkeypatch):
    frame = _forecasts()
    frame.loc[5, "forecast"] = frame.loc[5, "upper_80"] + 1          # a point outside its own interval
    frame.loc[7, ["lower_80", "upper_80"]] = np.nan                   # a row without bounds
    frame["note"] = "ignored"                                         # an extra column, warned about
    path = tmp_path / "f.csv"
    frame.to_csv(path, index=False)
    plain, exact = _both_roads(tmp_path, monkeypatch, path, lambda book, p: book.snapshot(p))
    assert plain[0] == exact[0] and plain[1] == exact[1] and len(plain[1]) == 6
    assert [(r.run_id, r.cells, r.status) for r in plain[2].runs] == [(r.run_id, r.cells, r.status) for r in exact[2].runs]
    assert plain[2].warnings == exact[2].warnings
    assert any("1 point forecast(s) lie outside their own 80% interval (first at row 6)" in w for w in plain[2].warnings)


def test_plain_actuals_and_options_stage_what_the_exact_reader_stages(tmp_path, monkeypatch):
    path = write(tmp_path / "a.csv", "series,period,actual\ns0,2026-02,1.5\ns1,2026-02,-0\ns2,2026-03,1e3\n")
    plain, exact = _both_roads(tmp_path, monkeypatch, path, lambda book, p: book.record_actuals(p))
    assert plain[2] == exact[2]
    f = write(tmp_path / "o.csv", "series,period,forecast,model\ns0,2026-02,1.5,m\ns1,2026-03,2,m\n")
    plain, exact = _both_roads(tmp_path, monkeypatch, f, lambda book, p: book.snapshot(p, model="m", origin="2026-01"))
    assert plain[:2] == exact[:2] and plain[2].runs == exact[2].runs


@pytest.mark.parametrize("name", sorted(n for n in READ if not n.startswith("actuals_")))
def test_corpus_files_that_read_give_the_same_ledger_by_either_road(tmp_path, monkeypatch, name):
    """Files the fast road cannot vouch for (UTF-16, keys with spaces around them) go the exact
    way; whichever road reads a file, the ledger is the same."""
    assert name not in ARGS
    plain, exact = _both_roads(tmp_path, monkeypatch, TESTS / "bad_inputs" / name,
                               lambda book, p: book.snapshot(p, model=SNAP[1], origin=SNAP[3]), plain_only=False)
    assert plain[:2] == exact[:2] and len(plain[1]) == 1


def test_rows_are_numbered_in_file_order_deep_in_a_large_file(tmp_path, monkeypatch):
    """DuckDB reads in parallel; the staged row numbers must still be the file's (insertion order)."""
    n = 300_000
    rows = pd.DataFrame({"series": [f"s{i % 1000}" for i in range(n)],
                         "period": [f"{2030 + i // 12000}-{(i // 1000) % 12 + 1:02d}" for i in range(n)],
                         "forecast": np.arange(n) + 0.5})
    rows = pd.concat([rows, rows.iloc[[123_456]]], ignore_index=True)          # row 300,001 repeats row 123,457
    path = tmp_path / "big.csv"
    rows.to_csv(path, index=False)
    monkeypatch.setattr(ingest, "open_table", _no_exact_reader)
    with Ledger.open(tmp_path / "b.duckdb") as book, pytest.raises(InputError) as err:
        book.snapshot(path, model="m", origin="2029-12")
    assert str(err.value) == ("big.csv row 300001 column period: a second forecast for the same series, period, "
                              "model and origin (first at row 123457)")


# Cell texts near the edge of what a number is: digits with signs, points, exponents, digit
# groups (1_000, 1,000), white space (ASCII and Unicode), words (inf, nan), letters of hex.
_NEAR_NUMBERS = st.one_of(
    st.text(alphabet="0123456789.eE+-_ \t\u00a0\u2003,infatyINFATYxX", min_size=1, max_size=9),
    st.floats(allow_nan=True, allow_infinity=True).map(repr),
    st.from_regex(r"\A[-+]?[0-9]{0,4}(\.[0-9]{0,6})?([eE][-+]?[0-9]{1,4})?\Z", fullmatch=True),
    st.from_regex(r"\A[-+]?[0-9]{1,3}([_,' ][0-9]{1,3}){1,2}(\.[0-9]+)?([eE][0-9_]{1,3})?\Z", fullmatch=True),
)


def _staged_values(book, path, plain: bool):
    """The staged actual of each row, or None when the road refuses (or cannot vouch for) the file."""
    try:
        with ingest._read_actuals(book.store, path, None, None, None, plain=plain) as frame:
            rows = book.store.con.execute(f"SELECT row, value FROM {frame.stage.ready} ORDER BY row").fetchall()
    except (NotPlain, InputError):
        return None
    return [(row, struct.pack("<d", value)) for row, value in rows]    # bit for bit: -0.0 is not 0.0


@settings(suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(texts=st.lists(_NEAR_NUMBERS, min_size=1, max_size=4))
def test_a_number_the_fast_road_reads_is_the_number_the_exact_reader_reads(tmp_path_factory, texts):
    """The fast road casts number cells with DuckDB; whatever text it accepts, the exact reader
    (Arrow's cast, then pandas) accepts too and reads to the same double, bit for bit."""
    folder = tmp_path_factory.mktemp("numbers")
    path = folder / "a.csv"
    with open(path, "w", encoding="utf-8", newline="") as out:
        writer = csv.writer(out)
        writer.writerow(["series", "period", "actual"])
        writer.writerows([f"s{i}", "2026-01", text] for i, text in enumerate(texts))
    with Ledger.open(folder / "n.duckdb") as book:
        fast = _staged_values(book, path, plain=True)
        if fast is not None:
            assert _staged_values(book, path, plain=False) == fast, texts


def test_the_fast_road_leaves_digit_groups_to_the_exact_reader(tmp_path):
    """DuckDB's cast reads 1_000 as 1000; the exact reader refuses it, so the fast road must not vouch for it."""
    path = write(tmp_path / "a.csv", "series,period,actual\ns0,2026-01,1_000\n")
    with Ledger.open(tmp_path / "n.duckdb") as book:
        assert _staged_values(book, path, plain=True) is None
        with pytest.raises(InputError, match="'1_000' is not a finite number"):
            book.record_actuals(path)


def test_keys_with_underscores_still_take_the_fast_road(tmp_path, monkeypatch):
    """A '_' below the header sends the numbers through a text read and a cast, not to the exact reader."""
    frame = _forecasts()
    frame["series"] = frame["series"].str.replace("s", "store_", regex=False)
    path = tmp_path / "f.csv"
    frame.to_csv(path, index=False)
    plain, exact = _both_roads(tmp_path, monkeypatch, path, lambda book, p: book.snapshot(p))
    assert plain[:2] == exact[:2] and len(plain[1]) == 6
