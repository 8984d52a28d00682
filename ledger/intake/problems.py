"""Every problem of a refused file in one pass, instead of one per attempt.

Checks add what they find to a :class:`Problems` collector (each bad row, not only the first);
at the end of reading, one problem is raised as the :class:`ledger.errors.InputError` it is, and
several as one :class:`InputErrors`: a first line saying how many, then one ``FILE row N column
C: …`` line per problem in file order (header problems first), at most :data:`SHOWN` of them,
and "and K more" beyond. Nothing is written either way.
"""

from __future__ import annotations

import contextlib

import numpy as np

from ..errors import InputError, LedgerError

__all__ = ["SHOWN", "InputErrors", "Problems", "raise_found", "refuse"]

SHOWN = 20


class InputErrors(InputError):
    """Several problems of one input; the message lists them one per line."""

    def __init__(self, source: str, problems: list[InputError], total: int):
        head = f"{source}: {total:,} problems; nothing was written"
        lines = [head, *(str(p) for p in problems)]
        if total > len(problems):
            lines.append(f"and {total - len(problems):,} more")
        LedgerError.__init__(self, "\n".join(lines))   # the lines are the message; InputError's one-line form is not
        self.source, self.row, self.column, self.detail = source, None, None, head
        self.problems, self.total = problems, total

    def shifted(self, rows: int) -> "InputErrors":
        return self


class Problems:
    """The problems found so far in one input (keeps the first SHOWN by file order, counts all)."""

    def __init__(self, source: str):
        self.source = source
        self.found: list[InputError] = []
        self.total = 0

    def add(self, problem: InputError) -> None:
        if problem.row is None and any(p.row is None and str(p) == str(problem) for p in self.found):
            return      # a header's problem found again in a later chunk is still one problem
        self.total += 1
        self.found.append(problem)
        if len(self.found) > 4 * SHOWN:   # keep memory flat on a file with millions of bad rows
            self.found = sorted(self.found, key=_order)[:SHOWN]

    def extend(self, found: list[InputError], total: int) -> None:
        """Add ``total`` problems of which ``found`` are the first (a whole-file check's rows)."""
        for p in found:
            self.add(p)
        self.total += total - len(found)

    def __bool__(self) -> bool:
        return self.total > 0

    @contextlib.contextmanager
    def guard(self, offset: int = 0):
        """Collect an InputError raised inside the block (its row moved down by ``offset``)."""
        try:
            yield
        except InputErrors as exc:
            self.extend([p.shifted(offset) for p in exc.problems], exc.total)
        except InputError as exc:
            self.add(exc.shifted(offset))

    def name_option(self, column: str, option: str) -> None:
        """Problems of a column that an option filled in (``--origin``) become the option's, once each."""
        seen, kept = set(), []
        for p in self.found:
            if p.column == column:
                if p.detail in seen:
                    self.total -= 1
                    continue
                seen.add(p.detail)
                p = InputError(p.source, f"{option}: {p.detail}")
            kept.append(p)
        self.found = kept

    def raise_if_any(self) -> None:
        if not self.total:
            return
        shown = sorted(self.found, key=_order)[:SHOWN]
        if self.total == 1:
            raise shown[0]
        raise InputErrors(self.source, shown, self.total)


def _order(p: InputError) -> tuple[int, int]:
    return (0, 0) if p.row is None else (1, p.row)


def refuse(source: str, bad: np.ndarray, column: str, what) -> None:
    """Raise the problems of the rows marked ``bad`` (``what(i)`` is row i's message) at once."""
    rows = np.flatnonzero(bad)
    if not len(rows):
        return
    raise_found(source, [InputError(source, what(int(i)), row=int(i) + 1, column=column) for i in rows[:SHOWN]],
                len(rows))


def raise_found(source: str, found: list[InputError], total: int) -> None:
    """Raise ``total`` problems of which ``found`` are the first (nothing when there are none)."""
    if total == 1:
        raise found[0]
    if total:
        raise InputErrors(source, found, total)
