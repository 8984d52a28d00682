"""``review``: record what is new in an inbox, run the findings and store the review, in one transaction.

Every inbox file is read and validated (staged) before anything is written; any bad file
refuses the whole review with every problem listed (:class:`ledger.errors.ReviewRefused`), and
the ledger is left as it was. Then actuals are recorded, then runs (an identical run already in
the ledger is skipped; a different run under the same model and origin is a problem: use
``backsight snapshot --supersede`` for that), the findings are computed at the review's as-of,
and the review (as-of, ledger state hash, findings with their identity, each model's recent
MASE) is stored — all in the one transaction.

A review that finds nothing new (no run or actual recorded, and the same ledger state as the
last stored review) stores nothing: re-running a review is a no-op, and its result is the last
review's.
"""

from __future__ import annotations

import contextlib
import dataclasses
import datetime as dt
from pathlib import Path

from ..lazy import pandas as pd

from ..errors import LedgerError, ReviewRefused
from ..findings.base import FlagOptions
from ..intake.ingest import read_actuals, read_forecasts
from ..intake.record import write_actuals, write_runs
from ..scoring.cells import Selection
from ..scoring.reads import report_state_hash
from ..store import Store
from .changes import recent_mase
from .identity import with_keys
from .inbox import InboxFile, scan_inbox

__all__ = ["ReviewResult", "REVIEW_FINDING_COLUMNS", "review"]

#: The columns of a review's findings, stored and returned alike (stable keys for --format json).
REVIEW_FINDING_COLUMNS = ("key", "kind", "model", "series", "level", "severity", "since", "figure", "evidence")


@dataclasses.dataclass(frozen=True)
class ReviewResult:
    """``stored`` is False when the review found nothing new (then ``review_id`` is the last review's)."""

    review_id: int
    stored: bool
    as_of: dt.datetime
    state_hash: str
    files: list[str]
    runs_new: int
    actuals_new: int
    findings: pd.DataFrame   # REVIEW_FINDING_COLUMNS; notes included
    warnings: list[str]


def _refuse(inbox: Path, problems: list[str]) -> ReviewRefused:
    lines = "\n".join(f"  {p}" for p in problems)
    return ReviewRefused(f"review of {inbox} refused, nothing written; {len(problems):,} problem(s):\n{lines}")


def _stage(store: Store, stack: contextlib.ExitStack, file: InboxFile):
    if file.role == "actuals":
        return stack.enter_context(read_actuals(store, file.path, name=file.name))
    return stack.enter_context(read_forecasts(store, file.path, model=file.model, origin=file.origin,
                                              name=file.name))


def _record(store: Store, staged: list[tuple[InboxFile, object]], problems: list[str]) -> tuple[int, int, list[str]]:
    runs_new = actuals_new = 0
    warnings: list[str] = []
    for file, frame in sorted(staged, key=lambda p: p[0].role != "actuals"):
        try:
            if file.role == "actuals":
                result = write_actuals(store, frame)
                actuals_new += result.new + result.revised
            else:
                result = write_runs(store, frame)
                runs_new += sum(1 for r in result.runs if r.status != "unchanged")
            warnings += result.warnings
        except LedgerError as exc:
            problems.append(str(exc))
    return runs_new, actuals_new, warnings


def _last_review(store: Store) -> tuple[int, str, dt.datetime] | None:
    rows = store.con.execute(
        "SELECT review_id, state_hash, as_of FROM reviews ORDER BY review_id DESC LIMIT 1").fetchall()
    return rows[0] if rows else None


def _stored_findings(store: Store, review_id: int) -> pd.DataFrame:
    return store.con.execute(
        f"SELECT {', '.join(REVIEW_FINDING_COLUMNS).replace('key', 'finding_key AS key', 1)} "
        "FROM review_findings WHERE review_id = ? ORDER BY position", [review_id]).df()


def _store(store: Store, inbox: Path, as_of, state: str, files: int, runs_new: int, actuals_new: int,
           found: pd.DataFrame, models: pd.DataFrame) -> int:
    con = store.con
    review_id = con.execute("SELECT coalesce(max(review_id), 0) + 1 FROM reviews").fetchone()[0]
    con.execute("INSERT INTO reviews VALUES (?, ?, ?, ?, ?, ?, ?)",
                [review_id, as_of, state, str(inbox), files, runs_new, actuals_new])
    rows = found.assign(review_id=review_id, position=range(len(found)))[
        ["review_id", "position", *REVIEW_FINDING_COLUMNS]]
    con.register("_review_rows", rows)
    con.register("_review_models", models.assign(review_id=review_id)[["review_id", "model", "mase", "n", "periods"]])
    try:
        con.execute("INSERT INTO review_findings SELECT * FROM _review_rows")
        con.execute("INSERT INTO review_models SELECT * FROM _review_models")
    finally:
        con.unregister("_review_rows")
        con.unregister("_review_models")
    return int(review_id)


def review(store: Store, inbox, *, include_excluded: bool = False, **thresholds) -> ReviewResult:
    """Record the inbox's new actuals and runs, run every finding, store the review; one transaction.

    ``thresholds``: the fields of :class:`ledger.findings.base.FlagOptions`.
    """
    from ..findings.flags import flags   # scipy on first use, as in Ledger.flags

    inbox = Path(inbox)
    options = FlagOptions.from_keywords(**thresholds)
    files, problems = scan_inbox(inbox)
    with contextlib.ExitStack() as stack:
        staged = []
        for file in files:
            try:
                staged.append((file, _stage(store, stack, file)))
            except LedgerError as exc:
                problems.append(str(exc))
        if problems:
            raise _refuse(inbox, problems)
        with store.transaction():
            runs_new, actuals_new, warnings = _record(store, staged, problems)
            if problems:
                raise _refuse(inbox, problems)
            as_of = store.next_timestamp()
            state = report_state_hash(store, as_of)   # the hash the review's report states
            last = _last_review(store)
            if last is not None and last[1] == state and runs_new == actuals_new == 0:
                return ReviewResult(last[0], False, last[2], state, [f.name for f in files], 0, 0,
                                    _stored_findings(store, last[0]), warnings)
            sel = Selection(as_of, include_excluded=include_excluded)
            found = with_keys(flags(store, sel, **thresholds))[list(REVIEW_FINDING_COLUMNS)]
            models = recent_mase(store, sel, options.recent)
            review_id = _store(store, inbox, as_of, state, len(files), runs_new, actuals_new, found, models)
            stored = _stored_findings(store, review_id)   # read back: the same frame a re-run returns
    return ReviewResult(review_id, True, as_of, state, [f.name for f in files], runs_new, actuals_new,
                        stored, warnings)
