"""Every error Backsight raises on purpose derives from :class:`LedgerError`.

The command line catches ``LedgerError`` in one place, prints ``Error: <message>`` on stderr and
exits with code 1. Library code never prints and never exits.
"""

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


class ReviewRefused(LedgerError):
    """A file of a review's inbox is bad: the review wrote nothing; the message lists every problem."""
