"""Backsight's ledger: the record of forecast runs and actuals, and the numbers computed from it.

Nothing in this package renders HTML; the ``reports`` package builds on it, never the reverse.
"""

__version__ = "0.1.0"

from .api import Ledger  # noqa: E402  (needs __version__ above)
from .errors import LedgerError  # noqa: E402

__all__ = ["__version__", "Ledger", "LedgerError"]
