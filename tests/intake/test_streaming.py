"""Imports stream in chunks: reading a file in many small chunks gives exactly what reading it in
one chunk gives — the same runs, hashes, tables, warnings and errors (rows counted across chunks).
These are tests of the exact reader, so the fast road for plain CSV files (plaincsv) is turned off.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from ledger import Ledger
from ledger.intake import ingest, sources
from ledger.errors import FrequencyError, InputError

from tests.helpers import write


def table_hashes(store, tables) -> dict[str, str]:
    return {t: store.table_hash(t) for t in tables}

TABLES = ("runs", "forecasts", "bounds", "quantiles", "actuals", "series")


def _forecasts(n_series: int = 7) -> pd.DataFrame:
    rng = np.random.default_rng(3)
    rows = []
    for model in ("m1", "m2"):
        for origin in ("2025-10", "2025-11", "2025-12"):
            for s in range(n_series):
                for h, period in enumerate(("2026-01", "2026-02", "2026-03")):
                    point = 100 + s + rng.normal()
                    rows.append((model, origin, f"s{s}", period, point, point - 5 - h, point + 5 + h,
                                 point - 3, point + 3))
    return pd.DataFrame(rows, columns=["model", "origin", "series", "period", "forecast",
                                       "lower_80", "upper_80", "q10", "q90"])


def _record(tmp_path, name: str, rows: int | None, monkeypatch, frame: pd.DataFrame):
    """Snapshot ``frame`` from a CSV file into a new ledger, reading ``rows`` rows per chunk."""
    monkeypatch.setattr(sources, "CHUNK_ROWS", rows or 200_000)
    monkeypatch.setattr(ingest, "PLAIN_ROAD", False)
    (tmp_path / name).mkdir()
    path = tmp_path / name / "forecasts.csv"
    frame.to_csv(path, index=False)
    seen = []
    with Ledger.open(tmp_path / f"{name}.duckdb") as book:
        book.record_actuals(pd.DataFrame({"series": ["s0", "s1"], "period": ["2026-01", "2026-01"],
                                          "actual": [100.0, 101.0]}))
        result = book.snapshot(path, progress=lambda done, total: seen.append((done, total)))
        hashes = table_hashes(book.store, [t for t in TABLES if t not in ("runs", "series", "actuals")])
        runs = book.store.con.execute("SELECT model, origin_index, content_hash, n_cells FROM runs "
                                      "ORDER BY ALL").fetchall()
    return result, hashes, runs, seen


def test_many_small_chunks_give_the_same_ledger(tmp_path, monkeypatch):
    frame = _forecasts()
    frame.loc[5, "forecast"] = frame.loc[5, "upper_80"] + 1      # one point outside its interval
    whole = _record(tmp_path, "whole", None, monkeypatch, frame)
    small = _record(tmp_path, "small", 10, monkeypatch, frame)
    assert len(frame) == 126 and len(small[0].runs) == 6
    assert [(r.run_id, r.cells, r.status) for r in small[0].runs] == [(r.run_id, r.cells, r.status) for r in whole[0].runs]
    assert small[1] == whole[1] and small[2] == whole[2]
    assert small[0].warnings == whole[0].warnings
    assert "1 point forecast(s) lie outside their own 80% interval (first at row 6)" in small[0].warnings[0]
    # progress: bytes read, rising, ending at the file's size; 13 chunks of at most 10 rows
    done = [d for d, _ in small[3]]
    assert done == sorted(done) and small[3][-1][0] == small[3][-1][1] and len(small[3]) == 13


def _error(tmp_path, monkeypatch, frame: pd.DataFrame, rows: int = 10) -> str:
    monkeypatch.setattr(sources, "CHUNK_ROWS", rows)
    monkeypatch.setattr(ingest, "PLAIN_ROAD", False)
    path = write(tmp_path / "bad.csv", frame.to_csv(index=False))
    with Ledger.open(tmp_path / "bad.duckdb") as book:
        before = table_hashes(book.store, TABLES)
        with pytest.raises((InputError, FrequencyError)) as err:
            book.snapshot(path)
        assert table_hashes(book.store, TABLES) == before
        assert not book.store.con.execute(
            "SELECT table_name FROM duckdb_tables() WHERE temporary").fetchall(), "staging table left behind"
    return str(err.value)


def test_a_bad_cell_in_a_later_chunk_names_its_row_in_the_file(tmp_path, monkeypatch):
    frame = _forecasts().astype({"forecast": object})
    frame.loc[94, "forecast"] = "12,5"                     # data row 95, in the tenth chunk
    assert _error(tmp_path, monkeypatch, frame) == \
        "bad.csv row 95 column forecast: '12,5' is not a finite number; write the decimal mark as a point (10.5)"


def test_a_duplicate_across_chunks_names_both_rows(tmp_path, monkeypatch):
    frame = _forecasts()
    frame = pd.concat([frame, frame.iloc[[3]]], ignore_index=True)     # row 127 repeats row 4
    assert _error(tmp_path, monkeypatch, frame) == (
        "bad.csv row 127 column period: a second forecast for the same series, period, model and origin "
        "(first at row 4)")


def test_a_second_frequency_in_a_later_chunk_is_refused(tmp_path, monkeypatch):
    frame = _forecasts()
    frame.loc[100, "period"] = "2026-Q1"
    assert _error(tmp_path, monkeypatch, frame) == \
        "bad.csv row 101 column period: mixes monthly and quarterly labels; one file holds one frequency"


def test_a_bad_label_in_a_later_chunk_names_its_row(tmp_path, monkeypatch):
    frame = _forecasts()
    frame.loc[57, "origin"] = "sometime"
    message = _error(tmp_path, monkeypatch, frame)
    assert message.startswith("bad.csv row 58 column origin: ")


def test_a_ragged_row_deep_in_the_file_names_its_row(tmp_path, monkeypatch):
    monkeypatch.setattr(sources, "CHUNK_ROWS", 10)
    text = _forecasts().to_csv(index=False).splitlines()
    text[80] += ",extra"                                      # data row 80
    path = write(tmp_path / "ragged.csv", "\n".join(text) + "\n")
    with Ledger.open(tmp_path / "r.duckdb") as book, pytest.raises(InputError) as err:
        book.snapshot(path)
    assert str(err.value) == "ragged.csv row 80 column 10 (past the header): has 10 fields; the header has 9"


def test_a_non_utf8_byte_far_into_a_file_names_row_and_column(tmp_path, monkeypatch):
    """Blocks of 1 MB are decoded one by one; the row count carries across them."""
    lines = ["series,period,actual"] + [f"s{i % 50},{2000 + i // 600}-{i % 12 + 1:02d},1" for i in range(150_000)]
    body = ("\n".join(lines) + "\n").encode()
    at = body.index(b"\ns7,", 1_200_000) + 1                # a row starting past the first block
    row = body[:at].count(b"\n")
    path = tmp_path / "late.csv"
    path.write_bytes(body[:at] + "s\xe9".encode("latin-1") + body[at + 2:])
    with Ledger.open(tmp_path / "l.duckdb") as book, pytest.raises(InputError) as err:
        book.record_actuals(path, freq="monthly")
    assert str(err.value) == f"late.csv row {row} column series: byte 0xe9 is not UTF-8 text; save the file as UTF-8"
