"""Helpers shared by the test modules: table hashes, file writing, invented ledgers, paths of the test data."""

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


def record_invented(path, forecasts: list[dict], actuals: list[dict], attributes=None) -> Path:
    """A ledger at ``path`` holding the invented rows (one back-fill, the actuals, optional attributes)."""
    import pandas as pd

    with Ledger.open(path) as book:
        book.snapshot(pd.DataFrame(forecasts), name="invented-forecasts.csv")
        book.record_actuals(pd.DataFrame(actuals), name="invented-actuals.csv")
        if attributes is not None:
            book.record_attributes(attributes, name="invented-attributes.csv")
    return path
