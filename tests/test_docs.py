"""Docs that cannot drift: every command has help text and appears in the README."""

from __future__ import annotations

import re
from pathlib import Path

import pytest
import typer

from ledger.cli import app

README = (Path(__file__).resolve().parents[1] / "README.md").read_text(encoding="utf-8")
COMMANDS = sorted(typer.main.get_command(app).commands)


def test_the_expected_commands_exist():
    assert COMMANDS == sorted(["snapshot", "actuals", "scores", "attributes", "runs", "verify", "export", "import",
                               "backtest", "demo", "flags", "compare", "standings", "advise", "report", "review", "changes",
                               "events", "stability", "adjusts"])


@pytest.mark.parametrize("name", COMMANDS)
def test_every_command_has_help_and_is_in_the_readme(runner, name):
    result = runner.invoke(app, [name, "--help"])
    assert result.exit_code == 0
    assert len(result.stdout.strip().splitlines()) >= 3
    assert re.search(rf"backsight (--ledger \S+ )?{name}\b", README), f"README shows no `backsight {name}`"


def test_quick_start_has_exactly_two_commands():
    block = README.split("## Quick start", 1)[1].split("```", 2)[1]
    lines = [line for line in block.splitlines()[1:] if line.strip()]
    assert len(lines) == 2
    assert lines[0].endswith("backsight demo") and lines[1].endswith("python -m pytest -q")
