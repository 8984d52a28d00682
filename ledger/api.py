"""The Python API: :class:`Ledger`, one method per CLI command.

>>> from ledger import Ledger                                 # doctest: +SKIP
>>> with Ledger.open("backsight.duckdb") as book:             # doctest: +SKIP
...     book.snapshot("run.csv", model="incumbent-hw", origin="2026-10")
...     book.record_actuals("actuals-2026-11.csv")
...     book.scores(by=["model", "horizon"])
"""

from __future__ import annotations

import os
from collections.abc import Sequence

import pandas as pd

from .ingest import read_actuals, read_forecasts
from .periods import period_label
from .record import ActualsResult, SnapshotResult, write_actuals, write_runs
from .scoring import Selection, interval_cells, score_cells, scores
from .store import Store, parse_as_of

__all__ = ["Ledger", "DEFAULT_PATH"]

DEFAULT_PATH = "backsight.duckdb"


class Ledger:
    """An open ledger file; every write is one transaction."""

    def __init__(self, store: Store):
        self.store = store

    @classmethod
    def open(cls, path: str | os.PathLike = DEFAULT_PATH, *, create: bool = True,
             read_only: bool = False) -> "Ledger":
        """Open the ledger at ``path``, creating it when ``create`` (the default)."""
        return cls(Store.open(path, create=create, read_only=read_only))

    @property
    def path(self):
        return self.store.path

    def close(self) -> None:
        self.store.close()

    def __enter__(self) -> "Ledger":
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    def _recorded_frequencies(self) -> dict[str, str]:
        return dict(self.store.con.execute("SELECT series, frequency FROM series").fetchall())

    def snapshot(self, data, *, model: str | None = None, origin: str | None = None,
                 freq: str | None = None, note: str | None = None, supersede: bool = False,
                 name: str | None = None) -> SnapshotResult:
        """Record the forecast run(s) in a file or DataFrame (see README, Input files)."""
        frame = read_forecasts(data, model=model, origin=origin, freq=freq,
                               recorded=self._recorded_frequencies(), name=name)
        return write_runs(self.store, frame, note=note, supersede=supersede)

    def record_actuals(self, data, *, freq: str | None = None, name: str | None = None) -> ActualsResult:
        """Record actuals; a changed value becomes a new revision, an unchanged one is skipped."""
        frame = read_actuals(data, freq=freq, recorded=self._recorded_frequencies(), name=name)
        return write_actuals(self.store, frame)

    def selection(self, *, as_of=None, models: Sequence[str] = (), series: Sequence[str] = (),
                  horizons: Sequence[int] = (), since: str | None = None,
                  until: str | None = None) -> Selection:
        return Selection(parse_as_of(as_of), tuple(models), tuple(series), tuple(horizons), since, until)

    def scores(self, *, by: Sequence[str] = ("model", "horizon"), as_of=None,
               models: Sequence[str] = (), series: Sequence[str] = (), horizons: Sequence[int] = (),
               since: str | None = None, until: str | None = None) -> pd.DataFrame:
        """Accuracy metrics per group of cells (columns as in the README's Definitions)."""
        sel = self.selection(as_of=as_of, models=models, series=series, horizons=horizons,
                             since=since, until=until)
        return scores(self.store, sel, by)

    def cells(self, **selection) -> pd.DataFrame:
        """Every scored cell with actual, error and scale (one row per cell)."""
        return score_cells(self.store, self.selection(**selection))

    def interval_cells(self, **selection) -> pd.DataFrame:
        """Every scored cell and interval level, with bounds and whether the actual fell outside."""
        return interval_cells(self.store, self.selection(**selection))

    def runs(self) -> pd.DataFrame:
        """One row per run: id, model, origin, recorded at, cells, hash, superseded by."""
        frame = self.store.con.execute(
            "SELECT run_id, model, frequency, origin, recorded_at, n_cells AS cells, "
            "content_hash, superseded_by, source, note FROM runs ORDER BY recorded_at, model, origin"
        ).df()
        frame["origin"] = [period_label(pd.Timestamp(d).date(), f)
                           for d, f in zip(frame["origin"], frame["frequency"])]
        return frame
