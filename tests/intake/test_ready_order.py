"""The duplicate check is answered by the sorted ready table when its keys strictly increase
(ledger/intake/staging.py, ``Stage.resolve``): then no grouping runs. A repeated key anywhere —
neighbours, across a batch edge of the order check — is still refused with its rows, and any row
order of the file gives the ledger the sorted file gives."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from ledger import Ledger
from ledger.errors import InputError
from ledger.intake import staging

from tests.intake.test_streaming import TABLES, _forecasts, table_hashes

_SORTED_KEYS = ["model", "origin", "series", "period"]


def _ledger(tmp_path, name: str, frame: pd.DataFrame) -> dict:
    path = tmp_path / f"{name}.csv"
    frame.to_csv(path, index=False)
    with Ledger.open(tmp_path / f"{name}.duckdb") as book:
        book.snapshot(path)
        con = book.store.con    # runs and series also hold the time of recording: compared without it
        return table_hashes(book.store, [t for t in TABLES if t not in ("runs", "series")]) | {
            "runs": con.execute("SELECT model, origin_index, content_hash, n_cells FROM runs ORDER BY ALL").fetchall(),
            "series": con.execute("SELECT series, frequency, season_length FROM series ORDER BY ALL").fetchall()}


def test_any_row_order_gives_the_ledger_of_the_sorted_file(tmp_path):
    frame = _forecasts().sort_values(_SORTED_KEYS, kind="stable").reset_index(drop=True)
    expected = _ledger(tmp_path, "sorted", frame)
    orders = {"shuffled": frame.sample(frac=1, random_state=5), "reversed": frame.iloc[::-1],
              "runs descending": frame.sort_values(["model", "origin"], ascending=False, kind="stable")}
    for name, rows in orders.items():
        assert _ledger(tmp_path, name, rows) == expected, name


@pytest.mark.parametrize("batch", [4, 12, 13, 1 << 20])
def test_a_repeated_key_is_refused_with_both_rows_wherever_the_batch_edge_falls(tmp_path, monkeypatch, batch):
    """Rows 12 and 13 (sorted, 0-based 11 and 12) repeat a key: the order check is not strict
    however its batches cut the table, so the duplicate grouping runs and names the rows."""
    monkeypatch.setattr(staging, "ORDER_BATCH", batch)
    grouped = []
    original = staging.Stage.check_unique

    def spy(self, *args, **kwargs):
        grouped.append(self._unique is None)
        return original(self, *args, **kwargs)

    monkeypatch.setattr(staging.Stage, "check_unique", spy)
    frame = _forecasts().sort_values(_SORTED_KEYS, kind="stable").reset_index(drop=True)
    frame = pd.concat([frame.iloc[:12], frame.iloc[[11]], frame.iloc[12:]], ignore_index=True)  # data rows 12, 13 alike
    path = tmp_path / "dup.csv"
    frame.to_csv(path, index=False)
    with Ledger.open(tmp_path / "d.duckdb") as book, pytest.raises(InputError) as err:
        book.snapshot(path)
    assert str(err.value) == ("dup.csv row 13 column period: a second forecast for the same series, period, "
                              "model and origin (first at row 12)")
    assert grouped == [True]


def test_strictly_increasing_keys_skip_the_grouping(tmp_path, monkeypatch):
    seen = []
    original = staging.Stage.check_unique

    def spy(self, source, keys, *args, **kwargs):
        seen.append(self._unique == list(keys))       # True: answered by the order check
        return original(self, source, keys, *args, **kwargs)

    monkeypatch.setattr(staging.Stage, "check_unique", spy)
    path = tmp_path / "f.csv"
    _forecasts().sample(frac=1, random_state=2).to_csv(path, index=False)     # any order: sorted by resolve
    with Ledger.open(tmp_path / "o.duckdb") as book:
        book.record_actuals(pd.DataFrame({"series": ["s0"], "period": ["2026-01"], "actual": [1.0]}))
        result = book.snapshot(path)
    assert seen == [True, True] and len(result.runs) == 6     # the actuals file and the forecast file


def test_the_order_check_compares_every_neighbour(tmp_path):
    """_strictly_ascending against a plain Python comparison of neighbours, on random keys and batch sizes."""
    rng = np.random.default_rng(11)
    with Ledger.open(tmp_path / "o.duckdb") as book:
        con = book.store.con
        for trial in range(40):
            n = int(rng.integers(1, 30))
            rows = sorted({(f"m{rng.integers(0, 2)}", int(rng.integers(0, 3)), f"s{rng.integers(0, 3)}")
                           for _ in range(n)})
            if trial % 3 and rows:                            # most trials: one random disorder or repeat
                i, j = sorted(rng.integers(0, len(rows), 2))
                rows[i] = rows[j]
            con.execute("CREATE OR REPLACE TEMP TABLE _o_ready (model VARCHAR, origin_index INTEGER, series VARCHAR)")
            con.executemany("INSERT INTO _o_ready VALUES (?, ?, ?)", rows)
            stage = staging.Stage.__new__(staging.Stage)
            stage.con, stage.ready = con, "_o_ready"
            pairs = list(zip(rows, rows[1:]))
            for batch in (1, 2, 5, 1 << 20):
                staging.ORDER_BATCH = batch
                try:
                    got = stage._strictly_ascending(["model", "origin_index", "series"])
                finally:
                    staging.ORDER_BATCH = 1 << 20
                assert got == all(a < b for a, b in pairs), (rows, batch)
