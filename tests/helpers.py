"""Helpers shared by the test modules: table hashes, file writing, invented ledgers, paths of the test data."""

from __future__ import annotations

import shutil
from pathlib import Path

from hypothesis import strategies as st

from ledger import Ledger
from ledger.store import TABLES

TESTS = Path(__file__).resolve().parent
REPO = TESTS.parent


def table_hashes(path) -> dict[str, str]:
    """Content hash of every table (meta excluded only for its created_at row, which never changes)."""
    with Ledger.open(path, create=False) as book:
        return {t: book.store.table_hash(t) for t in TABLES}


def copy_ledger(source: Path, folder: Path) -> Path:
    """A copy of the closed ledger ``source`` in ``folder``, under its own name: a ledger is built
    once for a module or session, and each test that writes works on a copy of its own."""
    assert not source.with_name(source.name + ".wal").exists(), "the ledger was not closed"
    target = Path(folder) / source.name
    shutil.copyfile(source, target)
    return target


def write(path, text: str):
    path.write_text(text, encoding="utf-8")
    return path


# Names from all of Unicode, with the troublesome corners drawn often: controls, bidi overrides,
# combining marks, zero-width characters, rich's markup brackets and HTML markup. Lone surrogates
# (category Cs) are left out: no UTF-8 file or Arrow string can carry one, so no name can hold one
# (pandas refuses them before Backsight sees them).
SPECIAL_CHARACTERS = st.sampled_from([
    "\x1b", "\x1b[2J", "\n", "\r", "\x00", "\x85", "\u202e", "\u2066", "\u200b", "\ufeff", "\u0301", " ",
    "[", "]", "[/]", "[red]", "[link=x]", "\\", ":", ",", '"', "'", "=", "<", ">", "&", "&amp;", "<script>",
    "</h1>", "<b>", "javascript:", "$"])
NAMES = st.lists(st.one_of(st.characters(exclude_categories=("Cs",)), SPECIAL_CHARACTERS),
                 min_size=1, max_size=12).map("".join)


def record_invented(path, forecasts: list[dict], actuals: list[dict], attributes=None) -> Path:
    """A ledger at ``path`` holding the invented rows (one back-fill, the actuals, optional attributes)."""
    import pandas as pd

    with Ledger.open(path) as book:
        book.snapshot(pd.DataFrame(forecasts), name="invented-forecasts.csv")
        book.record_actuals(pd.DataFrame(actuals), name="invented-actuals.csv")
        if attributes is not None:
            book.record_attributes(attributes, name="invented-attributes.csv")
    return path
