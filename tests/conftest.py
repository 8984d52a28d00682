"""Shared fixtures: a fresh ledger path, the CLI runner, and table hashes."""

from __future__ import annotations

import pytest
from typer.testing import CliRunner

from ledger import Ledger
from ledger.store import TABLES


@pytest.fixture
def ledger_path(tmp_path):
    return tmp_path / "test.duckdb"


@pytest.fixture
def runner():
    return CliRunner()


def table_hashes(path) -> dict[str, str]:
    """Content hash of every table (meta excluded only for its created_at row, which never changes)."""
    with Ledger.open(path, create=False) as book:
        return {t: book.store.table_hash(t) for t in TABLES}


def write(path, text: str):
    path.write_text(text, encoding="utf-8")
    return path


@pytest.fixture(scope="session")
def demo_site(tmp_path_factory):
    """The demo built once per test session (replay + report), shared by the demo tests."""
    from reports.demo import build_demo
    out = tmp_path_factory.mktemp("demo-site")
    return out, build_demo(out)
