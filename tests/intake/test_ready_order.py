"""The ready table is sorted only when a file's runs are not each in one block, in ascending
order (ledger/intake/staging.py, ``Stage.resolve``): a file a run at a time skips the sort and,
when its keys strictly increase, the duplicate grouping too; any other order is sorted. Whichever
way, the ledger is the one the sorted file gives, and a repeated key is still refused with its
rows."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from ledger import Ledger
from ledger.errors import InputError
from ledger.intake import staging

from tests.intake.test_streaming import TABLES, _forecasts, table_hashes

_SORTED_KEYS = ["model", "origin", "series", "period"]


def _ledger(tmp_path, name: str, frame: pd.DataFrame) -> dict[str, str]:
    path = tmp_path / f"{name}.csv"
    frame.to_csv(path, index=False)
    with Ledger.open(tmp_path / f"{name}.duckdb") as book:
        book.snapshot(path)
        con = book.store.con    # runs and series also hold the time of recording: compared without it
        return table_hashes(book.store, [t for t in TABLES if t not in ("runs", "series")]) | {
            "runs": con.execute("SELECT model, origin_index, content_hash, n_cells FROM runs ORDER BY ALL").fetchall(),
            "series": con.execute("SELECT series, frequency, season_length FROM series ORDER BY ALL").fetchall()}


def _spy_sorts(monkeypatch) -> list[str]:
    """The SQL of every re-sort of a ready table during the test."""
    sorts = []
    original = staging.Stage._in_order

    def spy(self, keys, together):
        ordered, strictly = original(self, keys, together)
        if not ordered:
            sorts.append(self.ready)
        return ordered, strictly

    monkeypatch.setattr(staging.Stage, "_in_order", spy)
    return sorts


@pytest.mark.parametrize("batch", [3, 7, 1 << 20])
def test_any_row_order_gives_the_ledger_of_the_sorted_file(tmp_path, monkeypatch, batch):
    """Shuffled, reversed, or out of order only across a batch boundary: the same tables and runs."""
    monkeypatch.setattr(staging, "ORDER_BATCH", batch)
    sorts = _spy_sorts(monkeypatch)
    frame = _forecasts().sort_values(_SORTED_KEYS, kind="stable").reset_index(drop=True)
    expected = _ledger(tmp_path, "sorted", frame)
    assert sorts == []                                          # in order: no sort
    boundary, i = frame.copy(), batch - 1 if batch < len(frame) else 0
    boundary.iloc[[i, i + 1]] = boundary.iloc[[i + 1, i]].to_numpy()   # two neighbours swapped, across a batch edge
    runs_back = frame.sort_values(["model", "origin"], ascending=False, kind="stable")   # each run whole, runs descending
    sorted_ones = {"shuffled": frame.sample(frac=1, random_state=5), "reversed": frame.iloc[::-1],
                   "runs descending": runs_back}
    for name, rows in sorted_ones.items():
        assert _ledger(tmp_path, name, rows) == expected, name
    assert len(sorts) == len(sorted_ones)
    # within a run the order is the hash's business (it sorts a run's rows): no sort of the table
    within = {"swapped": boundary, "series descending": frame.sort_values(
        ["model", "origin", "series", "period"], ascending=[True, True, False, True], kind="stable")}
    for name, rows in within.items():
        assert _ledger(tmp_path, name, rows) == expected, name
    assert len(sorts) == len(sorted_ones)


def test_a_repeated_key_in_a_sorted_file_is_refused_with_both_rows(tmp_path, monkeypatch):
    """Keys in order but one repeated (neighbours): the order check is not strict, so the duplicate
    grouping runs and names the rows, as for any other file."""
    monkeypatch.setattr(staging, "ORDER_BATCH", 4)
    frame = _forecasts().sort_values(_SORTED_KEYS, kind="stable").reset_index(drop=True)
    frame = pd.concat([frame.iloc[:12], frame.iloc[[11]], frame.iloc[12:]], ignore_index=True)  # data rows 12, 13 alike
    path = tmp_path / "dup.csv"
    frame.to_csv(path, index=False)
    with Ledger.open(tmp_path / "d.duckdb") as book, pytest.raises(InputError) as err:
        book.snapshot(path)
    assert str(err.value) == ("dup.csv row 13 column period: a second forecast for the same series, period, "
                              "model and origin (first at row 12)")


def test_the_order_check_compares_every_neighbour(tmp_path):
    """_in_order against a plain Python comparison of neighbours, on random keys and batch sizes."""
    rng = np.random.default_rng(11)
    with Ledger.open(tmp_path / "o.duckdb") as book:
        con = book.store.con
        for trial in range(40):
            n = int(rng.integers(1, 30))
            rows = sorted((f"m{rng.integers(0, 2)}", int(rng.integers(0, 3)), f"s{rng.integers(0, 3)}")
                          for _ in range(n))
            if trial % 3:                                     # most trials: one random disorder or repeat
                i, j = sorted(rng.integers(0, n, 2))
                rows[i], rows[j] = rows[j], rows[i]
            con.execute("CREATE OR REPLACE TEMP TABLE _o_ready (model VARCHAR, origin_index INTEGER, series VARCHAR)")
            con.executemany("INSERT INTO _o_ready VALUES (?, ?, ?)", rows)
            stage = staging.Stage.__new__(staging.Stage)
            stage.con, stage.ready = con, "_o_ready"
            pairs = list(zip(rows, rows[1:]))
            for batch in (1, 2, 5, 1 << 20):
                for together in (0, 1, 2, 3):
                    staging.ORDER_BATCH = batch
                    try:
                        got = stage._in_order(["model", "origin_index", "series"], together)
                    finally:
                        staging.ORDER_BATCH = 1 << 20
                    grouped = all(a[:together] <= b[:together] for a, b in pairs)
                    assert got == (grouped, grouped and all(a < b for a, b in pairs)), (rows, batch, together)
