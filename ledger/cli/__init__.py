"""The ``backsight`` command line: each command parses options, calls one public function, prints.

Commands live in small modules by concern; importing them registers them on the one ``app``
(see :mod:`ledger.cli.common` for the shared options and the error translation). The order of
the imports is the order of ``backsight --help``.
"""

from .common import app
from . import records, admin, backtest, demo, findings, report, cycle  # noqa: E402,F401  (registers their commands)

__all__ = ["app", "main"]


def main() -> None:
    """Console-script entry point."""
    app()
