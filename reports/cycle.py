"""``review`` with its report: the ledger records and stores the review, then the site is rendered
at the review's as-of (so the report states the same as-of and state hash as the stored review)."""

from __future__ import annotations

import dataclasses

from ledger import Ledger
from ledger.cycle.review import ReviewResult

from .site import ReportResult, render_report

__all__ = ["ReviewReport", "review_and_report"]


@dataclasses.dataclass(frozen=True)
class ReviewReport:
    review: ReviewResult
    report: ReportResult


def review_and_report(ledger_path, inbox, out_dir, *, wait: float | None = None, include_excluded: bool = False,
                      incumbent: str | None = None, benchmark: str | None = None, title: str | None = None,
                      progress=None) -> ReviewReport:
    """Review ``inbox`` into the ledger at ``ledger_path`` (see :meth:`ledger.Ledger.review`), then write the
    report; ``include_excluded`` reaches both, so the report scores what the stored review scored."""
    thresholds = {"benchmark": benchmark} if benchmark else {}
    with Ledger.open(ledger_path, wait=wait) as book:
        result = book.review(inbox, include_excluded=include_excluded, **thresholds)
    report = render_report(ledger_path, out_dir, as_of=result.as_of, incumbent=incumbent, benchmark=benchmark,
                           title=title, progress=progress, include_excluded=include_excluded)
    return ReviewReport(result, report)
