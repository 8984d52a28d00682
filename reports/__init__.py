"""Static HTML reports rendered from a Backsight ledger (imports ``ledger``; never the reverse).

>>> from reports import render_report                        # doctest: +SKIP
>>> result = render_report("backsight.duckdb", "out", incumbent="incumbent-hw")  # doctest: +SKIP
>>> result.index                                             # doctest: +SKIP
PosixPath('.../out/index.html')
"""

from .site import ReportResult, render_report

__all__ = ["ReportResult", "render_report"]
