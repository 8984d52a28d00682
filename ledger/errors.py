"""Every error Backsight raises on purpose derives from :class:`LedgerError`.

The command line catches ``LedgerError`` in one place, prints ``Error: <message>`` on stderr and
exits with code 1. Library code never prints and never exits. Errors of the operating system
(no space, permission, not a directory, …), raised by Python or by DuckDB, are turned into such
a sentence by :func:`describe_os_error`, the one place that words them.
"""

import contextlib
import errno
import os
import re
from pathlib import Path

__all__ = [
    "LedgerError",
    "NotALedger",
    "SchemaTooNew",
    "SchemaTooOld",
    "InputError",
    "FrequencyError",
    "RunConflict",
    "UnknownName",
    "NotEnoughData",
    "LedgerBusy",
    "GapInHistory",
    "MethodNotApplicable",
    "ReviewRefused",
    "PeriodOutOfRange",
    "describe_os_error",
    "naming_file",
]


class LedgerError(Exception):
    """Base class of every error Backsight raises on purpose."""


class NotALedger(LedgerError):
    """The file exists but is not a Backsight ledger."""


class SchemaTooNew(LedgerError):
    """The ledger was written by a newer Backsight than this one."""


class SchemaTooOld(LedgerError):
    """The ledger was written by an older Backsight and must be migrated first."""


class InputError(LedgerError):
    """An input file or frame is malformed; the message names file, row and column."""

    def __init__(self, source: str, message: str, row: int | None = None, column: str | None = None):
        where = source
        if row is not None:
            where += f" row {row}"
        if column is not None:
            where += f" column {column}"
        super().__init__(f"{where}: {message}")
        self.source, self.row, self.column, self.detail = source, row, column, message

    def shifted(self, rows: int) -> "InputError":
        """The same error with its row moved down by ``rows`` (for a check run on a chunk)."""
        if self.row is None or not rows:
            return self
        return type(self)(self.source, self.detail, row=self.row + rows, column=self.column)


class FrequencyError(LedgerError):
    """A period's frequency is ambiguous or contradicts what the ledger recorded."""


class RunConflict(LedgerError):
    """A run differs from one already recorded under the same model and origin."""


class UnknownName(LedgerError):
    """A model, series, grouping key or option value that the ledger does not know."""


class NotEnoughData(LedgerError):
    """There is too little data (scored cells, or history for a method) to compute what was asked."""


class LedgerBusy(LedgerError):
    """Another process holds the ledger file."""


class GapInHistory(LedgerError, ValueError):
    """The history given to a reference method contains a missing value (NaN)."""


class MethodNotApplicable(LedgerError, ValueError):
    """A reference method cannot be applied to this history (season length or sign of the data)."""


class PeriodOutOfRange(LedgerError, ValueError):
    """A period computed from others (a horizon ahead, a lag back) falls outside the years 1 to 9999."""


_FIXES = {
    errno.ENOSPC: "no space is left on the device holding {path}; free some space, or use a folder on "
                  "another disk, and try again (the ledger is unchanged)",
    errno.EDQUOT: "the disk quota is used up for {path}; free some space and try again (the ledger is unchanged)",
    errno.EFBIG: "{path} would grow beyond the largest file allowed here; use another disk and try again",
    errno.EPERM: "the operation is not permitted on {path}; use another folder",
    errno.EROFS: "{path} is on a read-only file system; use a writable folder",
    errno.ENOTDIR: "a part of {path} is a file, not a folder; give a path whose folders are folders",
    errno.EISDIR: "{path} is a folder; give a file",
    errno.EEXIST: "{path} already exists and is not a folder; give a new or empty folder",
    errno.ENOENT: "{path} does not exist (or its folder does not); check the path",
    errno.ENAMETOOLONG: "the path {path} is too long; use a shorter one",
}
# DuckDB reports OS errors in its own text; the strerror words find the errno
_WORDS = {"No space left on device": errno.ENOSPC, "Disk quota exceeded": errno.EDQUOT,
          "Permission denied": errno.EACCES, "Read-only file system": errno.EROFS,
          "Not a directory": errno.ENOTDIR, "Is a directory": errno.EISDIR, "File too large": errno.EFBIG}
_QUOTED = re.compile(r'\\?"([^"\\]*/[^"\\]*)\\?"')   # a quoted path, perhaps with escaped quotes


def describe_os_error(exc: BaseException) -> str | None:
    """One line naming the path and what to do, for an OS error (or DuckDB's report of one).

    None when ``exc`` is not about the file system, so that a real bug still shows as one.
    """
    if isinstance(exc, OSError) and exc.errno is not None:
        code, path = exc.errno, exc.filename
    else:
        text = str(exc)
        code = next((c for words, c in _WORDS.items() if words in text), None)
        if code is None:
            return None
        found = _QUOTED.search(text)
        path = found[1] if found else None
    where = str(path) if path is not None else "a file it needed"
    if code == errno.EACCES:
        return _denied(where, path)
    fix = _FIXES.get(code)
    if fix is None:
        return f"{where}: {os.strerror(code)}"
    return fix.format(path=where)


def _denied(where: str, path) -> str:
    """Permission denied, with the folder to make writable: the refused path's own when it is a
    folder, else the one it is (or would be) in; a ledger's .wal or .tmp names the ledger's folder."""
    if path is None:
        return f"permission denied for {where}; make its folder writable, or use another folder"
    p = Path(path)
    if p.suffix in (".wal", ".tmp"):
        return (f"permission denied for {where}; a ledger writes its {p.suffix} file beside itself: make the "
                f"folder {p.parent} writable, or move the ledger to a writable folder")
    folder = p if p.is_dir() else p.parent
    return f"permission denied for {where}; make the folder {folder} writable, or use another folder"


@contextlib.contextmanager
def naming_file(path):
    """Give ``path`` to an OS error raised inside that names no file.

    A failed write or close on an open file (no space, quota) carries no file name, so
    :func:`describe_os_error` could only say "a file it needed"; wrapping the write names it.
    """
    try:
        yield
    except OSError as exc:
        if exc.errno is None or exc.filename is not None:
            raise
        raise type(exc)(exc.errno, exc.strerror, str(path)) from exc


class ReviewRefused(LedgerError):
    """A file of a review's inbox is bad: the review wrote nothing; the message lists every problem."""
