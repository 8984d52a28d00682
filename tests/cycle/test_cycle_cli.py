"""The cycle through the command line: review, changes, events, and the gate's exit codes."""

from __future__ import annotations

import json
import shutil

import numpy as np

import pandas as pd
import pytest
from typer.testing import CliRunner

from ledger import Ledger
from ledger.cli import app
from ledger.cycle.gate import GATE_EXIT, GATE_LEVELS, at_or_above
from tests.cycle.test_review import _month, _narrow_inbox
from tests.helpers import copy_ledger, table_hashes


@pytest.fixture(scope="module")
def first_review(tmp_path_factory):
    """Month 0 reviewed once for the module: the review and its report took most of each test's time."""
    root = tmp_path_factory.mktemp("reviewed")
    path, inbox = root / "l.duckdb", root / "inbox"
    _month(inbox, 0)
    r = CliRunner().invoke(app, ["--ledger", str(path), "review", str(inbox), "--out", str(root / "rep")])
    assert r.exit_code == 0, r.output
    return path, inbox, r


@pytest.fixture
def reviewed(first_review, tmp_path):
    # the tests review again and record events, so each gets its own ledger and report folder
    # (the report too, so a second review replaces a report as it would after a first); the inbox
    # is only read, and stays where the first review found it
    built, inbox, r = first_review
    path = copy_ledger(built, tmp_path)
    shutil.copytree(built.parent / "rep", tmp_path / "rep")
    return path, inbox, r


def test_review_prints_what_it_recorded_and_writes_the_report(reviewed, first_review, tmp_path):
    path, inbox, r = reviewed
    lines = r.stdout.splitlines()
    assert lines[0].startswith("review 1: 5 run(s) and 108 actual(s) recorded from 4 file(s); as-of ")
    with Ledger.open(path, create=False, read_only=True) as book:
        stored = book.reviews().iloc[0]
        found = book.changes().findings
    assert lines[0].endswith(f"state {stored['state_hash'][:12]}")
    assert lines[1] == f"{len(found)} finding(s); report {first_review[0].parent / 'rep' / 'index.html'}"
    html = (tmp_path / "rep" / "index.html").read_text(encoding="utf-8")
    assert stored["state_hash"][:12] in html


def test_gate_exit_codes(tmp_path, runner):
    path, inbox = tmp_path / "g.duckdb", tmp_path / "inbox"
    base = ["--ledger", str(path)]
    assert GATE_EXIT not in (0, 1, 2) and GATE_LEVELS == ("act", "watch")
    _narrow_inbox(inbox)
    r = runner.invoke(app, base + ["review", str(inbox), "--out", str(tmp_path / "rep"), "--fail-on", "act"])
    assert r.exit_code == GATE_EXIT and r.stderr.endswith("gate: 1 finding(s) at or above act; exit code 3\n")
    assert r.stdout.startswith("review 1: 23 run(s) and 144 actual(s) recorded")   # the output comes first
    with Ledger.open(path, create=False, read_only=True) as book:
        found = book.flags()
    assert found.loc[found["severity"] == "act", "check"].tolist() == ["too narrow"]
    r = runner.invoke(app, base + ["flags", "--fail-on", "act"])
    assert r.exit_code == GATE_EXIT and "gate: 1 finding(s) at or above act; exit code 3" in r.stderr
    assert runner.invoke(app, base + ["flags", "--fail-on", "watch", "--format", "csv"]).exit_code == GATE_EXIT
    r = runner.invoke(app, base + ["flags", "--kind", "data", "--fail-on", "watch"])   # notes only
    assert r.exit_code == 0 and "gate:" not in r.stderr
    assert runner.invoke(app, base + ["flags"]).exit_code == 0
    r = runner.invoke(app, base + ["flags", "--fail-on", "severe"])
    assert r.exit_code == 1 and r.stderr == "Error: --fail-on 'severe' is not a severity the gate takes; use act or watch\n"
    before = table_hashes(path)
    r = runner.invoke(app, base + ["review", str(inbox), "--out", str(tmp_path / "rep2"), "--fail-on", "watch"])
    assert r.exit_code == GATE_EXIT and r.stdout.startswith("nothing new in ")
    assert table_hashes(path) == before


def test_the_gate_stays_open_on_notes(reviewed, runner):
    path, inbox, _ = reviewed     # month 0: too little history for anything but notes
    r = runner.invoke(app, ["--ledger", str(path), "review", str(inbox), "--out", str(path.parent / "r"),
                            "--fail-on", "watch"])
    assert r.exit_code == 0 and "gate:" not in r.stderr


def test_gate_order_of_severities():
    frame = pd.DataFrame({"severity": ["watch", "note", "note"]})
    assert len(at_or_above(frame, "act")) == 0
    assert len(at_or_above(frame, "watch")) == 1
    assert len(at_or_above(frame, "WATCH")) == 1


def test_json_has_one_object_per_finding_with_stable_keys(reviewed, runner):
    path, inbox, _ = reviewed
    flags = json.loads(runner.invoke(app, ["--ledger", str(path), "flags", "--format", "json"]).stdout)
    assert len(flags) > 0 and len({tuple(sorted(f)) for f in flags}) == 1
    r = runner.invoke(app, ["--ledger", str(path), "review", str(inbox), "--out", str(path.parent / "rep"),
                            "--format", "json"])
    objects = json.loads(r.stdout)
    assert [sorted(o) for o in objects] == [sorted(["key", "kind", "model", "series", "level", "severity", "since",
                                                    "figure", "evidence"])] * len(objects)
    assert len({o["key"] for o in objects}) == len(objects)


def test_changes_and_events_commands(reviewed, runner, tmp_path):
    path, inbox, _ = reviewed
    base = ["--ledger", str(path)]
    r = runner.invoke(app, base + ["changes"])
    assert r.exit_code == 0 and r.stdout.startswith("review 1 against nothing (the first review): ")
    body = json.loads(runner.invoke(app, base + ["changes", "--format", "json"]).stdout)
    assert body["review"] == 1 and body["since_review"] is None and body["mase_change"] == 0.1
    r = runner.invoke(app, base + ["changes", "--since-review", "7"])
    assert r.exit_code == 1 and r.stderr == "Error: --since-review 7: no such review; stored reviews: 1\n"
    events = tmp_path / "events.csv"
    events.write_text("series,first,last,label,exclude\neast/pumps,2025-10,2025-11,stock-out,yes\n"
                      "*,2025-12,2025-12,plant shutdown,no\n", encoding="utf-8")
    r = runner.invoke(app, base + ["events", str(events)])
    assert r.exit_code == 0 and r.stdout == "2 event(s): 2 recorded, 0 unchanged\n"
    assert runner.invoke(app, base + ["events", str(events)]).stdout == "2 event(s): 0 recorded, 2 unchanged\n"
    listed = runner.invoke(app, base + ["events", "--format", "csv"]).stdout.splitlines()
    assert listed[0] == "series,first,last,label,exclude,recorded_at" and len(listed) == 3
    scored = pd.read_csv(pd.io.common.StringIO(runner.invoke(app, base + ["scores", "--by", "series",
                                                                          "--format", "csv"]).stdout))
    back = pd.read_csv(pd.io.common.StringIO(runner.invoke(app, base + ["scores", "--by", "series", "--format", "csv",
                                                                        "--include-excluded"]).stdout))
    east = scored.set_index("series").loc["east/pumps"]
    # planner's back-fill: origins 2025-09..11 at h = 1..3 put 1 + 2 cells in 2025-10..11 (2025-10: h1 of 09; 2025-11: h1 of 10, h2 of 09)
    assert east["n_excluded"] == 3 and back.set_index("series").loc["east/pumps", "n"] == east["n"] + 3
    r = runner.invoke(app, base + ["review", str(inbox), "--out", str(tmp_path / "rep3")])
    assert r.exit_code == 0 and r.stdout.startswith("review 2: 0 run(s) and 0 actual(s) recorded")


def test_the_report_shows_changes_events_and_stability(tmp_path, runner):
    path, inbox = tmp_path / "l.duckdb", tmp_path / "inbox"
    base = ["--ledger", str(path)]
    for k in range(2):
        _month(inbox, k)
        assert runner.invoke(app, base + ["review", str(inbox), "--out", str(tmp_path / f"rep{k}")]).exit_code == 0
    events = tmp_path / "events.csv"
    events.write_text("series,first,last,label,exclude\neast/pumps,2025-10,2025-11,<b>stock-out</b>,yes\n",
                      encoding="utf-8")
    assert runner.invoke(app, base + ["events", str(events)]).exit_code == 0
    _month(inbox, 2)
    out = tmp_path / "rep2"
    assert runner.invoke(app, base + ["review", str(inbox), "--out", str(out)]).exit_code == 0
    index = (out / "index.html").read_text(encoding="utf-8")
    with Ledger.open(path, create=False, read_only=True) as book:
        diff = book.changes()
    assert diff.then == 2 and diff.now == 3
    counts = {s: diff.count(s) for s in ("new", "resolved", "persisting")}
    assert (f"Review 3: {counts['new']} new, {counts['resolved']} resolved and {counts['persisting']} "
            "persisting findings") in index
    # a line on the first screen (the review section), the block right after the accuracy matrix
    line = f"{counts['new']} new, {counts['resolved']} resolved, {counts['persisting']} persisting findings"
    assert index.index(line) < index.index('id="matrix"') < index.index('id="changes"')
    methods = (out / "methods.html").read_text(encoding="utf-8")
    assert "&lt;b&gt;stock-out&lt;/b&gt;" in methods and "<b>stock-out" not in methods   # escaped
    series = next(p for p in out.glob("s-east-pumps-*.html")).read_text(encoding="utf-8")
    assert "2025-10 to 2025-11: &lt;b&gt;stock-out&lt;/b&gt; (excluded from scoring)" in series
    assert 'id="c-paths-fig"' in series and "forecasts of the last targets, run by run" in series
    model = next(p for p in out.glob("m-planner-*.html")).read_text(encoding="utf-8")
    assert 'id="c-revisions-fig"' in model and "revision size by horizon" in model
