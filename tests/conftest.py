"""Shared fixtures: a fresh ledger path, the CLI runner, the demo built once (helpers live in tests/helpers.py)."""

from __future__ import annotations

import pytest
from typer.testing import CliRunner



@pytest.fixture
def ledger_path(tmp_path):
    return tmp_path / "test.duckdb"


@pytest.fixture
def runner():
    return CliRunner()


@pytest.fixture(scope="session")
def demo_site(tmp_path_factory):
    """The demo built once per test session (replay + report), shared by the demo tests."""
    from reports.demo import build_demo
    out = tmp_path_factory.mktemp("demo-site")
    return out, build_demo(out)
