"""verify finds every kind of damage: logical (values, periods, horizons, frequencies, supersede
chains, orphans, schema) and physical (a truncated file, flipped bytes), never with a traceback."""

from __future__ import annotations


import duckdb
import pandas as pd
import pytest

from ledger import Ledger
from ledger.cli import app
from tests.helpers import copy_ledger


@pytest.fixture(scope="module")
def sound_once(tmp_path_factory):
    """The sound ledger, recorded once for the module; every test damages its own copy."""
    path = tmp_path_factory.mktemp("sound") / "l.duckdb"
    with Ledger.open(path) as book:
        book.record_actuals(pd.DataFrame({"series": ["a", "b", "c"], "period": "2026-01", "actual": [1.0, 2.0, 3.0]}))
        book.record_actuals(pd.DataFrame({"series": ["a"], "period": "2026-01", "actual": [1.5]}))
        frame = pd.DataFrame({"series": ["a", "b"], "period": ["2026-02", "2026-03"], "forecast": [1.0, 2.0],
                              "lower_80": [0.0, 1.0], "upper_80": [2.0, 3.0], "q10": [0.5, 1.5]})
        book.snapshot(frame, model="m", origin="2026-01")
        book.snapshot(frame.assign(forecast=[1.1, 2.1]), model="m", origin="2026-01", supersede=True)
        book.snapshot(frame, model="other", origin="2026-01")
        assert book.verify() == []
    return path


@pytest.fixture
def sound(sound_once, tmp_path):
    return copy_ledger(sound_once, tmp_path)


CHAIN = "actual revisions whose chain hash does not match"
WRITES = "writes of actuals whose rows were changed or deleted"
DAMAGE = {
    "actual value changed": ("UPDATE actuals SET value = 9 WHERE series = 'b'", [CHAIN]),
    "actual and its chain hash changed": (
        "UPDATE actuals SET value = 9, chain_hash = sha256('forged') WHERE series = 'b'", [CHAIN, WRITES]),
    "newest revision deleted": ("DELETE FROM actuals WHERE series = 'a' AND revision = 2", [WRITES]),
    "only revision deleted": ("DELETE FROM actuals WHERE series = 'c'", [WRITES]),
    "first of two revisions deleted": ("DELETE FROM actuals WHERE series = 'a' AND revision = 1",
                                       ["orphaned or missing revisions", CHAIN, WRITES]),
    "actual time changed": ("UPDATE actuals SET recorded_at = recorded_at + INTERVAL 1 SECOND WHERE series = 'c'",
                            ["actuals without a write record", CHAIN, WRITES]),
    "horizon changed": ("UPDATE forecasts SET horizon = 5 WHERE series = 'a'",
                        ["horizons that do not match the run's origin"]),
    "period index changed": ("UPDATE forecasts SET period_index = period_index + 1 WHERE series = 'b'",
                             ["forecast periods that do not match their period index",
                              "horizons that do not match the run's origin", "content hash",
                              "bounds without a forecast", "quantiles without a forecast"]),
    "period moved inside its month": ("UPDATE forecasts SET period = period + 3 WHERE series = 'b'",
                                      ["forecast periods that do not match their period index"]),
    "series frequency changed": ("UPDATE series SET frequency = 'quarterly' WHERE series = 'a'",
                                 ["forecasts whose series has another frequency than their run",
                                  "actual periods that do not match their period index"]),
    "run origin changed": ("UPDATE runs SET origin = DATE '2025-12-01' WHERE model = 'other'",
                           ["run origins that do not match their period index"]),
    "run origin index changed": ("UPDATE runs SET origin_index = origin_index - 1 WHERE model = 'other'",
                                 ["horizons that do not match the run's origin",
                                  "run origins that do not match their period index", "content hash"]),
    "self-superseded": ("UPDATE runs SET superseded_by = run_id WHERE model = 'other'",
                        ["runs superseded by themselves", "runs of one model and origin not chained by superseded_by"]),
    "superseded by another model": (
        "UPDATE runs SET superseded_by = (SELECT run_id FROM runs WHERE model = 'other') "
        "WHERE model = 'm' AND superseded_by IS NOT NULL",
        ["runs superseded by a run of another model, frequency or origin, or by an older run",
         "runs of one model and origin not chained by superseded_by"]),
    "supersede link removed": ("UPDATE runs SET superseded_by = NULL",
                               ["runs of one model and origin not chained by superseded_by"]),
    "orphan quantile": ("INSERT INTO quantiles VALUES ('nope', 'a', 1, 0.5, 1)", ["quantiles without a forecast"]),
    "duplicate quantile": ("INSERT INTO quantiles SELECT * FROM quantiles LIMIT 1",
                           ["duplicate quantiles", "cell count"]),
    "level out of range": ("UPDATE quantiles SET tau = 1.5 WHERE series = 'a'",
                           ["levels outside (0, 100) or taus outside (0, 1)", "content hash"]),
    "column dropped": ("ALTER TABLE runs DROP COLUMN note", ["schema"]),
    "table dropped": ("DROP TABLE actual_writes", ["schema"]),
}


@pytest.mark.parametrize("name", sorted(DAMAGE))
def test_every_kind_of_logical_damage_is_found(sound, name):
    sql, expected = DAMAGE[name]
    con = duckdb.connect(str(sound))
    con.execute(sql)
    con.close()
    with Ledger.open(sound) as book:
        found = sorted({p.check for p in book.verify()})
    assert found == sorted(expected)


def _damage_bytes(path, how):
    data = bytearray(path.read_bytes())
    if how == "truncated":
        data = data[: len(data) // 2]
    else:                                   # flip every byte of a block in the middle of the file
        start = (len(data) // 2) & ~4095
        data[start:start + 4096] = bytes(b ^ 0xFF for b in data[start:start + 4096])
    path.write_bytes(bytes(data))


@pytest.fixture(scope="module")
def big_once(tmp_path_factory):
    path = tmp_path_factory.mktemp("big") / "big.duckdb"
    with Ledger.open(path) as book:      # big enough that the data lies in many blocks
        n = 20_000
        book.record_actuals(pd.DataFrame({"series": [f"s{i % 500}" for i in range(n)],
                                          "period": [f"{2000 + i // 6000}-{i // 500 % 12 + 1:02d}" for i in range(n)],
                                          "actual": range(n)}))
        book.store.con.execute("CHECKPOINT")
    return path


@pytest.mark.parametrize("how", ["truncated", "flipped"])
def test_physical_damage_is_listed_never_a_traceback(big_once, tmp_path, runner, how):
    path = copy_ledger(big_once, tmp_path)    # the bytes are damaged in this copy only
    _damage_bytes(path, how)
    result = runner.invoke(app, ["--ledger", str(path), "verify"])
    assert result.exit_code == 1
    assert result.exception is None or isinstance(result.exception, SystemExit), result.exception
    lines = (result.stdout + result.stderr).splitlines()
    assert lines and all(line.startswith(("problem: ", "Error: ", f"{path}: ")) for line in lines), lines
