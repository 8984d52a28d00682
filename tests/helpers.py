"""Helpers shared by the test modules: table hashes, file writing, paths of the test data."""

from __future__ import annotations

from pathlib import Path

from ledger import Ledger
from ledger.store import TABLES

TESTS = Path(__file__).resolve().parent
REPO = TESTS.parent


def table_hashes(path) -> dict[str, str]:
    """Content hash of every table (meta excluded only for its created_at row, which never changes)."""
    with Ledger.open(path, create=False) as book:
        return {t: book.store.table_hash(t) for t in TABLES}


def write(path, text: str):
    path.write_text(text, encoding="utf-8")
    return path
