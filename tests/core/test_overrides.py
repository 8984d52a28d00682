"""The override relation recorded in the ledger (ledger/overrides.py): versioned, checked, carried
by export, import and the lake, covered by the state hash, used by the value findings."""

from __future__ import annotations

import duckdb
import pytest

from ledger import Ledger
from ledger.cli import app
from ledger.errors import UnknownName
from ledger.findings.base import OVER_BASE
from ledger.store import parse_as_of

from tests.helpers import table_hashes
from tests.planted import build

MODELS = {"good": {"sigma": 3.0}, "bad": {"sigma": 7.0}, "ref-snaive": {"sigma": 5.0}}


@pytest.fixture(scope="module")
def planted(tmp_path_factory):
    """Three models with invented noise levels (planted, tests/planted.py); no relation recorded."""
    path = tmp_path_factory.mktemp("overrides") / "l.duckdb"
    build(path, n_series=20, horizons=(1, 2), seed=9, models=MODELS).close()
    return path


@pytest.fixture
def copy(planted, tmp_path):
    target = tmp_path / "c.duckdb"
    target.write_bytes(planted.read_bytes())
    return target


def test_recorded_versions_and_as_of(copy):
    with Ledger.open(copy) as book:
        assert book.overrides() == {}
        assert book.record_overrides({"bad": "good"}).changed == 1
        again = book.record_overrides({"bad": "good"})
        assert (again.changed, again.unchanged) == (0, 1)                 # the same pair again: unchanged
        t1 = book.store.next_timestamp()
        assert book.record_overrides({"bad": "ref-snaive"}).changed == 1   # a new version
        t2 = book.store.next_timestamp()
        assert book.record_overrides({"bad": None}).changed == 1           # withdrawn
        assert book.overrides(as_of=t1) == {"bad": "good"}
        assert book.overrides(as_of=t2) == {"bad": "ref-snaive"}
        assert book.overrides() == {}
        assert book.store.con.execute("SELECT count(*) FROM overrides").fetchone()[0] == 3   # nothing overwritten
        assert book.verify() == []


def test_bad_relations_are_refused_and_nothing_is_written(copy):
    with Ledger.open(copy) as book:
        with pytest.raises(UnknownName, match=r"unknown model 'godo'; did you mean 'good'\? known models: bad, good, ref-snaive"):
            book.record_overrides({"bad": "godo"})
        with pytest.raises(UnknownName, match="cannot adjust itself"):
            book.record_overrides({"bad": "bad"})
        book.record_overrides({"bad": "good"})
        with pytest.raises(UnknownName, match="'good' adjusts 'bad' adjusts 'good': the steps go round in a circle"):
            book.record_overrides({"good": "bad"})
        assert book.overrides() == {"bad": "good"}                       # the refused call wrote nothing
        assert book.store.con.execute("SELECT count(*) FROM overrides").fetchone()[0] == 1


def test_cli_records_lists_and_withdraws(copy, runner):
    def run(*args):
        return runner.invoke(app, ["--ledger", str(copy), "adjusts", *args])

    assert run().stderr == "no override recorded; record one with backsight adjusts OVERRIDE=BASE\n"
    assert run("bad=good").stdout == "1 change recorded, 0 unchanged\n"
    assert run("bad=good").stdout == "0 changes recorded, 1 unchanged\n"
    assert run("--format", "csv").stdout == "override,base\nbad,good\n"
    wrong = run("bad")
    assert wrong.exit_code == 1 and "write OVERRIDE=BASE with two different model names" in wrong.stderr
    assert run("--withdraw", "bad").stdout == "1 change recorded, 0 unchanged\n"
    assert run("--format", "csv").stdout == "override,base\n"


def test_state_hash_covers_the_relation_and_a_ledger_without_keeps_its_hash(copy):
    with Ledger.open(copy) as book:
        before = book.store.state_hash(parse_as_of(None))
        book.record_overrides({"bad": "good"})
        after = book.store.state_hash(parse_as_of(None))
        book.record_overrides({"bad": None})
        withdrawn = book.store.state_hash(parse_as_of(None))
    assert len({before, after, withdrawn}) == 3


@pytest.mark.parametrize("fmt", ["parquet", "csv"])
def test_export_and_import_carry_the_relation(copy, tmp_path, fmt):
    with Ledger.open(copy) as book:
        book.record_overrides({"bad": "good"})
        book.export(tmp_path / "out", fmt=fmt)
    with Ledger.open(tmp_path / "back.duckdb") as book:
        book.import_export(tmp_path / "out")
        assert book.overrides() == {"bad": "good"}
    assert table_hashes(tmp_path / "back.duckdb")["overrides"] == table_hashes(copy)["overrides"]


def test_the_lake_carries_the_relation(copy, tmp_path):
    with Ledger.open(copy) as book:
        book.record_overrides({"bad": "good"})
        done = book.export_lake(tmp_path / "lake")
    assert done.manifest.tables["overrides"] == 1
    with Ledger.open(tmp_path / "back.duckdb") as book:
        book.import_export(tmp_path / "lake")
        assert book.overrides() == {"bad": "good"}


def test_verify_reports_a_damaged_relation(copy):
    with Ledger.open(copy) as book:
        book.record_overrides({"bad": "good"})
    con = duckdb.connect(str(copy))
    con.execute("INSERT INTO overrides SELECT 'ghost', 'good', recorded_at, NULL FROM overrides")
    con.execute("INSERT INTO overrides VALUES ('good', 'good', TIMESTAMP '2100-01-01', NULL)")
    con.close()
    with Ledger.open(copy, read_only=True, create=False) as book:
        problems = sorted(str(p) for p in book.verify())
    assert problems == ["overrides naming a model with no run: 1 row(s)", "overrides that adjust themselves: 1 row(s)"]


def test_value_findings_use_the_recorded_relation_unless_an_option_is_given(copy):
    # Planted: "bad" (error sd 7) adjusts "good" (sd 3): the step makes the forecast worse, so it
    # adds no value over its base; MAE is proportional to sigma for normal errors, so the figure
    # 1 - MAE_bad / MAE_good is about 1 - 7/3 = -1.33.
    with Ledger.open(copy) as book:
        none = book.flags(kinds=["value"])
        book.record_overrides({"bad": "good", "good": "ref-snaive"})
        recorded = book.flags(kinds=["value"])
        replaced = book.flags(kinds=["value"], adjusts="good=bad")
        empty = book.flags(kinds=["value"], adjusts="")
        before = book.flags(kinds=["value"], as_of="2000-01-01")
    assert not (none["check"] == OVER_BASE).any()
    step = recorded[recorded["check"] == OVER_BASE]
    assert step[["model", "series", "severity"]].values.tolist() == [["bad", "", "act"]]    # good beats ref-snaive: no finding
    row = step.iloc[0]
    assert row["figure"] == pytest.approx(-4 / 3, abs=0.25)
    assert row["evidence"].startswith("no value added over its base good in the last 12 evaluation periods (since ")
    assert "the base is significantly more accurate (DM-HLN p" in row["evidence"]
    assert row["action"].startswith("use good instead of bad: ") and row["key"] == "value|bad|||base"
    # bad adds no value over the benchmark either: one problem, one finding (the step's), and
    # without the relation the benchmark's finding stands alone under its own key
    assert recorded.loc[(recorded["model"] == "bad") & (recorded["series"] == ""), "key"].tolist() == ["value|bad|||base"]
    assert "; and no value added over ref-snaive in the last 12 evaluation periods" in row["evidence"]
    assert none.loc[(none["model"] == "bad") & (none["series"] == ""), "key"].tolist() == ["value|bad|||"]
    assert row["impact"] >= none.loc[(none["model"] == "bad") & (none["series"] == ""), "impact"].iloc[0]
    assert not (replaced["check"] == OVER_BASE).any()        # good adjusting bad adds value: no finding
    assert not (empty["check"] == OVER_BASE).any() and not (before["check"] == OVER_BASE).any()
    with Ledger.open(copy, read_only=True, create=False) as book, pytest.raises(UnknownName, match="unknown model 'nope'"):
        book.flags(kinds=["value"], adjusts="nope=good")
