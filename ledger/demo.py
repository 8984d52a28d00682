"""Replaying the invented demo scenario (``demo_history/``) into a fresh ledger.

The scenario's ``manifest.csv`` lists every file in the order it arrived: monthly actuals files
and forecast runs (one file per run, or a back-fill with model and origin columns). :func:`replay`
records each one with :meth:`Ledger.record_actuals` or :meth:`Ledger.snapshot`, exactly as a user
would from the command line, and stamps each write with the file's arrival time from the
manifest, so that ``--as-of`` questions ("what did the ledger say at the end of June 2025?") have
the answers they would have had. A demo ledger is marked with the setting ``demo``; only such a
file is ever replaced.
"""

from __future__ import annotations

import contextlib
import dataclasses
import datetime as dt
import itertools
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import Literal, get_args

from .lazy import pandas as pd

from .api import Ledger
from .store import utc_now
from .errors import LedgerError, NotALedger, SchemaTooNew, SchemaTooOld

__all__ = [
    "DEMO_INCUMBENT",
    "DEMO_KEY",
    "DEMO_OVERRIDES",
    "ReplaySummary",
    "Step",
    "StepKind",
    "find_history",
    "read_manifest",
    "replay",
]

#: Ledger setting that marks a file as a demo ledger; its value names the scenario.
DEMO_KEY = "demo"
#: The scenario's incumbent model, stored as the ledger's incumbent after the replay.
DEMO_INCUMBENT = "incumbent-hw"
#: The scenario's override relation ({override: base}), recorded with the override's first run,
#: as a planner would with ``backsight adjusts planner-override=incumbent-hw``.
DEMO_OVERRIDES = {"planner-override": "incumbent-hw"}
_SCENARIO = "Fernhollow Garden Supply (invented)"

StepKind = Literal["actuals", "snapshot"]
_KINDS: tuple[str, ...] = get_args(StepKind)
_COLUMNS = ("step", "arrived", "kind", "file", "model", "origin", "supersede", "note")

Progress = Callable[[int, int, "Step"], None]


@dataclasses.dataclass(frozen=True)
class Step:
    """One row of the manifest: a file that arrived at ``arrived`` (UTC)."""

    number: int
    arrived: dt.datetime
    kind: StepKind
    file: str
    model: str | None
    origin: str | None
    supersede: bool
    note: str | None


@dataclasses.dataclass(frozen=True)
class ReplaySummary:
    """What a replay wrote. ``actual_values`` counts (series, period) values, ``revisions`` the
    values that changed after first publication; ``superseded`` the runs replaced by a newer one."""

    scenario: str
    ledger_path: Path
    steps: int
    runs: int
    cells: int
    actual_values: int
    revisions: int
    superseded: int
    first_arrival: dt.datetime
    last_arrival: dt.datetime
    warnings: tuple[str, ...]


def find_history() -> Path:
    """The ``demo_history`` folder next to the ``ledger`` package (a source checkout)."""
    folder = Path(__file__).resolve().parents[1] / "demo_history"
    if not (folder / "manifest.csv").is_file():
        raise LedgerError(
            f"demo history not found: {folder / 'manifest.csv'} does not exist; the demo needs a "
            "source checkout of Backsight (pip install -e .), or pass the folder explicitly")
    return folder


def read_manifest(history_dir: Path) -> list[Step]:
    """The replay steps of ``history_dir/manifest.csv``, checked, in step order."""
    path = Path(history_dir) / "manifest.csv"
    if not path.is_file():
        raise LedgerError(f"{path}: no such file; a demo history folder holds manifest.csv")
    frame = pd.read_csv(path, dtype=str, keep_default_na=False)
    missing = [c for c in _COLUMNS if c not in frame.columns]
    if missing:
        raise LedgerError(f"{path.name}: missing column {', '.join(missing)}; expected {', '.join(_COLUMNS)}")
    steps = sorted((_step(path.name, i + 1, row) for i, row in enumerate(frame.to_dict("records"))),
                   key=lambda s: s.number)
    for before, after in itertools.pairwise(steps):
        if after.arrived <= before.arrived:
            raise LedgerError(f"{path.name} step {after.number}: arrived {after.arrived.isoformat()} is not "
                              f"after step {before.number} ({before.arrived.isoformat()}); order the steps by arrival")
    return steps


def _step(source: str, row_number: int, row: dict) -> Step:
    if row["kind"] not in _KINDS:
        raise LedgerError(f"{source} row {row_number} column kind: {row['kind']!r} is not one of {', '.join(_KINDS)}")
    if row["supersede"] not in ("true", "false"):
        raise LedgerError(f"{source} row {row_number} column supersede: {row['supersede']!r}; use true or false")
    try:
        arrived = dt.datetime.fromisoformat(row["arrived"])
        number = int(row["step"])
    except ValueError as exc:
        raise LedgerError(f"{source} row {row_number}: {exc}; arrived is an ISO time, step an integer") from None
    return Step(number, arrived, row["kind"], row["file"], row["model"] or None, row["origin"] or None,
                row["supersede"] == "true", row["note"] or None)


def _prepare(ledger_path: Path) -> None:
    """Remove an earlier demo ledger at ``ledger_path``; refuse any other file."""
    if not ledger_path.exists():
        return
    if not ledger_path.is_file():
        raise LedgerError(f"{ledger_path} is not a file; give --ledger a file path for the demo ledger")
    marked = _demo_mark(ledger_path)
    if marked is None:
        raise LedgerError(
            f"refusing to overwrite {ledger_path}: it is not a demo ledger (it has no 'demo' setting); choose another path "
            "with --ledger (the demo writes only to a new file or to an earlier demo ledger)")
    ledger_path.unlink()
    with contextlib.suppress(FileNotFoundError):
        Path(f"{ledger_path}.wal").unlink()


def _demo_mark(path: Path) -> str | None:
    """The ``demo`` setting of the ledger at ``path``; None when unset or not a ledger at all."""
    try:
        with Ledger.open(path, create=False, read_only=True) as book:
            return book.store.get_setting(DEMO_KEY)
    except (NotALedger, SchemaTooNew, SchemaTooOld):
        return None


@contextlib.contextmanager
def _clock(book: Ledger, stamp: dt.datetime) -> Iterator[None]:
    """Stamp the writes of one step with the file's arrival time instead of now.

    The store takes write times from its ``clock``; it is set on this one Store object only,
    for the duration of the step. :func:`read_manifest` has checked that arrival times strictly
    increase, and ``next_timestamp`` keeps the ledger's as-of order strict.
    """
    store = book.store
    store.clock = lambda: stamp
    try:
        yield
    finally:
        store.clock = utc_now


def _apply(book: Ledger, history_dir: Path, step: Step):
    path = history_dir / step.file
    if step.kind == "actuals":
        return book.record_actuals(path, name=step.file)
    return book.snapshot(path, model=step.model, origin=step.origin, supersede=step.supersede,
                         note=step.note, name=step.file)


def replay(history_dir: Path, ledger_path: Path, *, progress: Progress | None = None,
           backdate: bool = True) -> ReplaySummary:
    """Build a fresh demo ledger at ``ledger_path`` from the files in ``history_dir``.

    Follows ``manifest.csv`` step by step. ``progress(done, total, step)`` is called before each
    step. With ``backdate`` (the default) every write is recorded at the file's arrival time;
    otherwise at the time of the replay. An existing file at ``ledger_path`` is replaced only if
    it is a demo ledger; anything else raises :class:`LedgerError`.
    """
    history_dir, ledger_path = Path(history_dir), Path(ledger_path)
    steps = read_manifest(history_dir)
    if not steps:
        raise LedgerError(f"{history_dir / 'manifest.csv'} lists no steps; regenerate the demo history")
    _prepare(ledger_path)
    tally, declared = _Tally(), set()
    with Ledger.open(ledger_path) as book:
        book.store.set_setting(DEMO_KEY, _SCENARIO)
        for i, step in enumerate(steps):
            if progress is not None:
                progress(i, len(steps), step)
            with _clock(book, step.arrived) if backdate else contextlib.nullcontext():
                tally.add(_apply(book, history_dir, step))
                if step.model in DEMO_OVERRIDES and step.model not in declared:
                    book.record_overrides({step.model: DEMO_OVERRIDES[step.model]}, source=step.file)
                    declared.add(step.model)
        book.set_incumbent(DEMO_INCUMBENT)
    return tally.summary(ledger_path, steps)


@dataclasses.dataclass
class _Tally:
    runs: int = 0
    cells: int = 0
    values: int = 0
    revisions: int = 0
    superseded: int = 0
    warnings: list[str] = dataclasses.field(default_factory=list)

    def add(self, result) -> None:
        self.warnings += result.warnings
        if hasattr(result, "runs"):
            fresh = [r for r in result.runs if r.status != "unchanged"]
            self.runs += len(fresh)
            self.cells += sum(r.cells for r in fresh)
            self.superseded += sum(r.status.startswith("superseded") for r in fresh)
        else:
            self.values += result.new
            self.revisions += result.revised

    def summary(self, path: Path, steps: list[Step]) -> ReplaySummary:
        return ReplaySummary(_SCENARIO, path, len(steps), self.runs, self.cells, self.values,
                             self.revisions, self.superseded, steps[0].arrived, steps[-1].arrived,
                             tuple(self.warnings))
