"""What an inbox folder holds: which files are actuals and which are forecast runs.

The rule (the README repeats it): every ``.csv`` and ``.parquet`` file under the inbox, at any
depth, in path order; names starting with a dot are skipped. A file with an ``actual`` column is
an actuals file. A file with a ``forecast`` column is a forecast file: its model and origin come
from its ``model`` and ``origin`` columns where it has them, otherwise from its place,
``INBOX/MODEL/ORIGIN.csv`` (a folder per model, a file per origin, e.g. ``incumbent-hw/2026-10.csv``).
Anything else is a problem that refuses the review.
"""

from __future__ import annotations

import dataclasses
from pathlib import Path
from typing import Literal

from ..errors import LedgerError
from ..intake.sources import open_table

__all__ = ["InboxFile", "scan_inbox", "SUFFIXES"]

SUFFIXES = (".csv", ".parquet")
Role = Literal["actuals", "forecasts"]


@dataclasses.dataclass(frozen=True)
class InboxFile:
    """One input file of a review; ``name`` is its path inside the inbox (used in messages)."""

    path: Path
    name: str
    role: Role
    model: str | None = None   # from the folder, when the file has no model column
    origin: str | None = None  # from the file name, when the file has no origin column


def _candidates(inbox: Path) -> list[Path]:
    found = []
    for path in sorted(inbox.rglob("*")):
        rel = path.relative_to(inbox)
        if any(part.startswith(".") for part in rel.parts) or not path.is_file():
            continue
        if path.suffix.lower() in SUFFIXES:
            found.append(path)
    return found


def _header(path: Path, name: str) -> list[str]:
    table = open_table(path, name=name)
    try:
        return table.columns
    finally:
        close = getattr(table.chunks, "close", None)
        if close:
            close()


def _classify(path: Path, rel: Path, columns: list[str]) -> InboxFile:
    name = rel.as_posix()
    has_actual, has_forecast = "actual" in columns, "forecast" in columns
    if has_actual and has_forecast:
        raise LedgerError(f"{name}: has both an actual and a forecast column; an inbox file is one or the other")
    if has_actual:
        return InboxFile(path, name, "actuals")
    if not has_forecast:
        raise LedgerError(f"{name}: neither an actuals file (series, period, actual) nor a forecast file "
                          f"(series, period, forecast); found {', '.join(columns[:8])}")
    model = None if "model" in columns else (rel.parts[0] if len(rel.parts) == 2 else None)
    origin = None if "origin" in columns else (path.stem if len(rel.parts) == 2 else None)
    missing = [w for w, v in (("model", model), ("origin", origin)) if v is None and w not in columns]
    if missing:
        raise LedgerError(f"{name}: a forecast file outside MODEL/ORIGIN.csv needs {' and '.join(missing)} "
                          "column(s); move it to a folder named after its model, named after its origin")
    return InboxFile(path, name, "forecasts", model, origin)


def scan_inbox(inbox: Path) -> tuple[list[InboxFile], list[str]]:
    """The inbox's input files, classified, and one problem line per file that cannot be."""
    inbox = Path(inbox)
    if not inbox.is_dir():
        raise LedgerError(f"inbox {inbox} is not a folder")
    files, problems = [], []
    for path in _candidates(inbox):
        rel = path.relative_to(inbox)
        try:
            files.append(_classify(path, rel, _header(path, rel.as_posix())))
        except LedgerError as exc:
            problems.append(str(exc))
    return files, problems
