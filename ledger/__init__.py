"""Backsight's ledger: the record of forecast runs and actuals, and the numbers computed from it.

Nothing in this package renders HTML; the ``reports`` package builds on it, never the reverse.
"""

from .api import Ledger
from .errors import LedgerError
from .version import __version__

__all__ = ["__version__", "Ledger", "LedgerError"]
