"""Names are data, never markup or terminal control (issue 16, class 1).

A model named ``[/]`` once crashed every table command (rich read it as markup); an ESC in a
name reached the terminal raw; ``--model`` with a newline forged a second "run … recorded" line.
Here names from all of Unicode go through the table renderer, CSV and JSON, and hostile names go
through every command that prints a table.
"""

from __future__ import annotations

import io
import json
import unicodedata

import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings, strategies as st

from ledger import Ledger
from ledger.errors import LedgerError
from ledger.intake.keys import key_problem
from ledger.cli import app
from ledger.cli.common import Format, emit
from ledger.cli.terminal import printable, render_table

from tests import planted
from tests.helpers import NAMES

UNSAFE = {"Cc", "Cf", "Zl", "Zp", "Cs", "Co", "Cn"}


def _inert(line: str) -> bool:
    return not any(unicodedata.category(ch) in UNSAFE for ch in line)


@given(st.lists(NAMES, min_size=1, max_size=5))
def test_any_name_is_inert_in_a_table(names):
    frame = pd.DataFrame({"model": names, "mae": [1.5] * len(names)})
    lines = render_table(frame, title="t", width=None)
    assert len(lines) == 3 + len(names)          # title, header, rule, one line per name: nothing forged
    for line, name in zip(lines[3:], names):
        assert _inert(line)
        assert line.startswith(printable(name))  # the name, shown as written (controls escaped)
    for width in (20, 80):
        assert all(_inert(line) for line in render_table(frame, width=width))


@settings(suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(names=st.lists(NAMES, min_size=1, max_size=5))
def test_any_name_round_trips_through_csv_and_json(capsys, names):
    frame = pd.DataFrame({"series": names, "n": range(len(names))})
    emit(frame, Format.csv)
    back = pd.read_csv(io.StringIO(capsys.readouterr().out), keep_default_na=False, dtype={"series": str})
    assert back["series"].tolist() == names
    emit(frame, Format.json)
    assert [r["series"] for r in json.loads(capsys.readouterr().out)] == names


def test_printable_escapes_exactly_the_unsafe():
    assert printable("[red]m[/red]") == "[red]m[/red]"
    assert printable("a\x1b[2Jb") == "a\\x1b[2Jb"
    assert printable("x\u202ey") == "x\\u202ey"
    assert printable("café") == "café" and printable("e\u0301") == "e\u0301"
    assert printable("a\nb") == "a\\x0ab"


HOSTILE_MODELS = ["[/]", "[red]m[/red]", "[link=https://example.invalid]x[/link]", "m\x1b[2J"]
HOSTILE_SERIES = ["[bold]A[/bold]", "B\x1b]8;;x\x1b\\", "C"]


@pytest.fixture(scope="module")
def hostile(tmp_path_factory):
    """A ledger whose model and series names are markup and escape sequences (if intake admits them)."""
    p = tmp_path_factory.mktemp("hostile") / "l.duckdb"
    y = planted.actuals(3, planted.HISTORY + 14, seed=9)
    # intake refuses control characters in keys (the identity rule, ledger/intake/keys.py)
    rename = {old: new for old, new in zip(planted.names(3), HOSTILE_SERIES) if key_problem(new) is None}
    admitted = []
    with Ledger.open(p) as book:
        book.record_actuals(planted.actual_frame(y).replace({"series": rename}))
        for k, model in enumerate(HOSTILE_MODELS):
            frame = planted.run_frame(y, origins=range(planted.HISTORY - 1, planted.HISTORY + 13), horizons=(1,),
                                      sigma=3.0 + k, seed=k + 1).replace({"series": rename})
            try:
                book.snapshot(frame, model=model)
                admitted.append(model)
            except LedgerError:        # a stricter intake may refuse control characters: fine
                pass
    assert "[/]" in admitted and "[red]m[/red]" in admitted
    return str(p), admitted


@pytest.mark.parametrize("args", [("runs",), ("scores", "--by", "series,model"), ("flags", "--long"),
                                  ("compare", "[/]", "[red]m[/red]"), ("standings",), ("standings", "--periods"),
                                  ("advise", "--incumbent", "[/]")])
def test_hostile_names_in_every_table(runner, hostile, args):
    path, admitted = hostile
    result = runner.invoke(app, ["--ledger", path, *args], env={"COLUMNS": "200"})
    assert result.exit_code == 0, result.output
    assert all(_inert(line) for line in result.output.splitlines())
    if args[0] in ("runs", "scores", "standings"):
        for model in admitted:
            assert printable(model) in result.stdout       # brackets shown literally, not as markup


def test_unknown_hostile_name_error_is_one_inert_line(runner, hostile):
    path, _ = hostile
    result = runner.invoke(app, ["--ledger", path, "scores", "--model", "[/]\x1b[2J\nError: forged"])
    assert result.exit_code == 1
    assert len(result.stderr.splitlines()) == 1 and _inert(result.stderr.rstrip("\n"))


def test_model_with_a_newline_cannot_forge_a_line(runner, tmp_path):
    f = tmp_path / "f.csv"
    f.write_text("series,period,forecast\nA,2026-01,1\n", encoding="utf-8")
    result = runner.invoke(app, ["--ledger", str(tmp_path / "l.duckdb"), "snapshot", str(f),
                                 "--model", "m\nrun 0000000000000000  x at 2025-12: 1 cell recorded",
                                 "--origin", "2025-12"])
    out = (result.stdout + result.stderr).splitlines()
    assert sum(line.startswith("run ") for line in out) <= 1
    assert all(_inert(line) for line in out)
