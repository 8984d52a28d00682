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

from .lazy import pandas as pd

from .findings.base import KINDS, check_models
from .scoring.attributes import AttributesResult, parse_where, series_attributes, write_attributes
from .intake.ingest import read_actuals, read_forecasts
from .integrity import Problem, verify
from .periods import period_label
from .intake.record import ActualsResult, SnapshotResult, write_actuals, write_runs
from .scoring.events import EventsResult, events_in_force, write_events
from .overrides import OverridesResult, overrides_in_force, record_overrides
from .methods.recorded import run_backtest
from .scoring import reads
from .scoring.cells import Selection, interval_cells, score_cells
from .scoring.grouped import scores
from .scoring.selection import check_selection
from .findings.summary import keep_findings, standings_summary
from .store import Store, parse_as_of
from .scoring.totals import totals
from .transfer import ExportFormat, export_ledger, import_ledger
from .scoring.weighted import weighted_scores

__all__ = ["Ledger", "DEFAULT_PATH"]


def _flags():
    # Imported on first use: the findings pull in scipy.stats, which would slow every command's start.
    from .findings import flags
    return flags


def _standings():
    from .findings import standings
    return standings

DEFAULT_PATH = "backsight.duckdb"


class Ledger:
    """An open ledger file; every write is one transaction."""

    def __init__(self, store: Store):
        self.store = store

    @classmethod
    def open(cls, path: str | os.PathLike = DEFAULT_PATH, *, create: bool = True,
             read_only: bool = False, wait: float | None = None) -> "Ledger":
        """Open the ledger at ``path``, creating it when ``create`` (the default).

        While another process holds the file, waits up to ``wait`` seconds (default 10, or the
        environment variable BACKSIGHT_WAIT) and then raises :class:`ledger.errors.LedgerBusy`.
        """
        return cls(Store.open(path, create=create, read_only=read_only, wait=wait))

    @property
    def path(self):
        return self.store.path

    def close(self) -> None:
        self.store.close()

    def __enter__(self) -> "Ledger":
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    def snapshot(self, data, *, model: str | None = None, origin: str | None = None,
                 freq: str | None = None, note: str | None = None, supersede: bool = False,
                 name: str | None = None, progress=None) -> SnapshotResult:
        """Record the forecast run(s) in a file or DataFrame (see README, Input files).

        ``progress(done, total)`` is called as the input is read (bytes of a CSV file, rows otherwise).
        """
        with read_forecasts(self.store, data, model=model, origin=origin, freq=freq, name=name,
                            progress=progress) as frame:
            return write_runs(self.store, frame, note=note, supersede=supersede)

    def record_actuals(self, data, *, freq: str | None = None, name: str | None = None,
                       progress=None) -> ActualsResult:
        """Record actuals; a changed value becomes a new revision, an unchanged one is skipped.

        ``progress(done, total)`` as for :meth:`snapshot`.
        """
        with read_actuals(self.store, data, freq=freq, name=name, progress=progress) as frame:
            return write_actuals(self.store, frame)

    def backtest(self, data, *, methods: Sequence[str], horizon: int | None = None,
                 holdout: int | None = None, origins: str | None = None,
                 levels: Sequence[float] = (80, 95), quantiles: Sequence[float] = (),
                 freq: str | None = None, jobs: int | None = None,
                 fill: str | None = None, progress=None, name: str | None = None,
                 supersede: bool = False):
        """Record a history file as actuals and snapshot reference backtests as ``ref-<method>`` runs.

        Exactly one of ``holdout=K`` or ``origins="FIRST:LAST[:STEP]"``; see
        :func:`ledger.methods.recorded.run_backtest` for every option. Returns a
        :class:`ledger.methods.recorded.BacktestResult`.
        """
        return run_backtest(self.store, data, methods=methods, horizon=horizon, holdout=holdout, origins=origins,
                            levels=levels, quantiles=quantiles, freq=freq, jobs=jobs, fill=fill, progress=progress,
                            name=name, supersede=supersede)

    def selection(self, *, as_of=None, models: Sequence[str] = (), series: Sequence[str] = (),
                  horizons: Sequence[int] = (), since: str | None = None,
                  until: str | None = None, where: Sequence = (), include_excluded: bool = False) -> Selection:
        """The one definition of the filters every reading command takes, checked against the ledger.

        ``where``: "ATTR=VALUE" strings (or (attribute, value) pairs) that a cell's series must
        match. An unknown model, series, attribute (value) or horizon raises UnknownName with
        the nearest known names (:mod:`ledger.scoring.selection`). ``include_excluded`` puts back
        the cells that excluding events leave out (:mod:`ledger.scoring.events`).
        """
        pairs = tuple(w if isinstance(w, tuple) else parse_where([w])[0] for w in where)
        sel = Selection(parse_as_of(as_of), tuple(models), tuple(series), tuple(int(h) for h in horizons),
                        since, until, pairs, include_excluded)
        sel.params()  # a bad --since / --until is reported before any name
        return check_selection(self.store, sel)

    def scores(self, *, by: Sequence[str] = ("model", "horizon"), as_of=None,
               models: Sequence[str] = (), series: Sequence[str] = (), horizons: Sequence[int] = (),
               since: str | None = None, until: str | None = None, where: Sequence[str] = (),
               weight: str | None = None, quantile_detail: bool = False,
               include_excluded: bool = False) -> pd.DataFrame:
        """Accuracy metrics per group of cells (columns as in the README's Definitions).

        ``by`` takes series, model, horizon, origin, period and any attribute name; ``where``
        takes "ATTR=VALUE" filters; ``weight`` ("volume" or a numeric attribute) adds the
        weighted columns of :mod:`ledger.scoring.weighted`; ``quantile_detail`` adds below_qNN
        and pinball_qNN per quantile level. Cells of excluding events are left out (counted in
        ``n_excluded``) unless ``include_excluded``.
        """
        sel = self.selection(as_of=as_of, models=models, series=series, horizons=horizons,
                             since=since, until=until, where=where,
                             include_excluded=include_excluded)
        if weight is not None:
            return weighted_scores(self.store, sel, by, weight=weight, quantile_detail=quantile_detail)
        return scores(self.store, sel, by, quantile_detail=quantile_detail)

    def totals(self, attribute: str, *, by: Sequence[str] = ("model",), as_of=None, models: Sequence[str] = (),
               horizons: Sequence[int] = (), since: str | None = None, until: str | None = None,
               where: Sequence = ()) -> pd.DataFrame:
        """Accuracy of each group's total (sum of members, and any direct total forecast); point metrics.

        ``by``: the keys to group the totals by besides the attribute (model, horizon, origin,
        period, other attributes); ``series`` is refused, since a total has no series.
        """
        sel = self.selection(as_of=as_of, models=models, horizons=horizons, since=since, until=until, where=where)
        return totals(self.store, sel, attribute, by=by)

    def record_attributes(self, data, *, name: str | None = None, total_of: str | None = None) -> AttributesResult:
        """Record series attributes (a changed value becomes a new version); see :mod:`ledger.scoring.attributes`."""
        return write_attributes(self.store, data, name=name, total_of=total_of)

    def record_events(self, data, *, name: str | None = None) -> EventsResult:
        """Record events (series, first, last, label, exclude); see :mod:`ledger.scoring.events`."""
        return write_events(self.store, data, name=name)

    def events(self, *, as_of=None) -> pd.DataFrame:
        """The events in force at the as-of, one row per event."""
        return events_in_force(self.store, parse_as_of(as_of))

    def record_overrides(self, pairs, *, source: str | None = None) -> OverridesResult:
        """Record which model adjusts which ({override: base}; base None withdraws); see :mod:`ledger.overrides`."""
        return record_overrides(self.store, pairs, source=source)

    def overrides(self, *, as_of=None) -> dict[str, str]:
        """{override: base} recorded in the ledger and in force at the as-of."""
        return overrides_in_force(self.store, parse_as_of(as_of))

    def attributes(self, *, as_of=None) -> pd.DataFrame:
        """One row per series with the attributes in force at the as-of."""
        return series_attributes(self.store, parse_as_of(as_of))

    def cells(self, **selection) -> pd.DataFrame:
        """Every scored cell with actual, error and scale (one row per cell)."""
        return score_cells(self.store, self.selection(**selection))

    def interval_cells(self, **selection) -> pd.DataFrame:
        """Every scored cell and interval level, with bounds and whether the actual fell outside."""
        return interval_cells(self.store, self.selection(**selection))

    # Reads for reports (ledger.scoring.reads): each at one as-of, in the shape a report draws.

    def scored_models(self, **selection) -> list[str]:
        """The models with at least one scored cell in the selection, sorted."""
        return reads.scored_models(self.store, self.selection(**selection))

    def series_table(self, *, as_of=None) -> pd.DataFrame:
        """Series known at the as-of: series, frequency, season_length."""
        return reads.series_table(self.store, parse_as_of(as_of))

    def main_frequency(self, *, as_of=None) -> str | None:
        """The frequency of most series at the as-of (None for an empty ledger)."""
        return reads.main_frequency(self.store, parse_as_of(as_of))

    def live_runs(self, *, as_of=None) -> pd.DataFrame:
        """Runs in force at the as-of: run_id, model, frequency, origin, origin_index, n_cells."""
        return reads.live_runs(self.store, parse_as_of(as_of))

    def actual_history(self, *, as_of=None) -> pd.DataFrame:
        """The newest revision of every actual at the as-of: series, period_index, value."""
        return reads.actual_history(self.store, parse_as_of(as_of))

    def latest_forecasts(self, *, as_of=None) -> pd.DataFrame:
        """Each model's newest live run per series: forecasts with bounds as lower_L/upper_L."""
        return reads.latest_forecasts(self.store, parse_as_of(as_of))

    def pending_cells(self, **selection) -> int:
        """Live forecast cells in the selection still waiting for their actual."""
        return reads.pending_cells(self.store, self.selection(**selection))

    def interval_counts(self, head: Selection | None = None, **selection) -> pd.DataFrame:
        """Cells with bounds and misses per model, horizon, level (see ``reads.interval_counts``)."""
        return reads.interval_counts(self.store, self.selection(**selection), head)

    def report_state_hash(self, *, as_of=None) -> str:
        """SHA-256 of all a report reads at the as-of: runs, actuals, series, attributes, settings."""
        return reads.report_state_hash(self.store, parse_as_of(as_of))

    def quantile_cells(self, **selection) -> pd.DataFrame:
        """Every scored cell and quantile level: value, actual and whether the actual fell below."""
        from .scoring.quantile_reads import quantile_cells
        return quantile_cells(self.store, self.selection(**selection))

    def wis_by_horizon(self, **selection) -> pd.DataFrame:
        """Per model and horizon: cells with a WIS and the means of WIS and its three parts."""
        from .scoring.quantile_reads import wis_by_horizon
        return wis_by_horizon(self.store, self.selection(**selection))

    def verify(self, *, progress=None) -> list[Problem]:
        """Integrity problems of the ledger file (empty when sound)."""
        return verify(self.store, progress=progress)

    def export(self, out_dir, *, fmt: ExportFormat = "parquet") -> list:
        """Write every table to ``out_dir`` as Parquet or CSV; return the files written."""
        return export_ledger(self.store, out_dir, fmt=fmt)

    def export_lake(self, out_dir):
        """Export into a partitioned Parquet lake at ``out_dir``, writing only what is new since the
        last export there; returns a :class:`ledger.lake.LakeExport`."""
        from .lake import export_lake

        return export_lake(self.store, out_dir)

    @staticmethod
    def verify_export(folder) -> list[Problem]:
        """Problems of an export folder with a manifest (checksums, row counts, the ledger checks)."""
        from .lake import verify_lake

        return verify_lake(folder)

    def import_export(self, in_dir) -> dict[str, int]:
        """Load a folder written by :meth:`export` into this (empty) ledger; rows per table."""
        return import_ledger(self.store, in_dir)

    def runs(self, *, models: Sequence[str] = ()) -> pd.DataFrame:
        """One row per run (of ``models``, all when empty): id, model, origin, recorded at, cells, hash, superseded by."""
        self.selection(models=models)
        frame = self.store.con.execute(
            "SELECT run_id, model, frequency, origin, recorded_at, n_cells AS cells, "
            "content_hash, superseded_by, source, note FROM runs "
            "WHERE len($models) = 0 OR list_contains($models, model) ORDER BY recorded_at, model, origin",
            {"models": list(models)}).df()
        frame["origin"] = [period_label(pd.Timestamp(d).date(), f)
                           for d, f in zip(frame["origin"], frame["frequency"])]
        return frame

    def flags(self, *, kinds: Sequence[str] = KINDS, severities: Sequence[str] = (), models: Sequence[str] = (),
              series: Sequence[str] = (), horizons: Sequence[int] = (), since: str | None = None,
              until: str | None = None, where: Sequence = (), as_of=None, include_excluded: bool = False,
              **thresholds) -> pd.DataFrame:
        """Drift, calibration, value-added and data-quality findings, one row per finding.

        Columns: kind, series, model, horizon, level, since, figure, evidence, check, severity,
        zone, horizons, raised, measure, p_value, n, impact, action, action_figure, action_measure,
        series_list, key; ranked by severity (act, watch, note) then impact. The filters are those of :meth:`selection`
        (findings are computed on the selected cells; a series filter keeps model-level findings,
        which are then about the selected series); ``severities`` keeps act, watch or note.
        ``thresholds``: the fields of :class:`ledger.findings.base.FlagOptions` (e.g.
        ``drift_h=5.5``, ``fdr=0.05``, ``benchmark="ref-snaive"``), each with its stated default.
        """
        sel = self.selection(as_of=as_of, models=models, series=series, horizons=horizons, since=since,
                             until=until, where=where, include_excluded=include_excluded)
        frame = _flags().flags(self.store, sel, kinds=kinds, **thresholds)
        return keep_findings(self.store, sel, frame, severities)

    def flag_counts(self, attribute: str, *, kinds: Sequence[str] = KINDS, as_of=None, **filters) -> pd.DataFrame:
        """Findings per value of a series attribute and kind (``flags --by ATTR``); filters as :meth:`flags`."""
        frame = self.flags(kinds=kinds, as_of=as_of, **filters)
        return _flags().count_by_group(self.store, frame, attribute, parse_as_of(as_of))

    def compare(self, a: str, b: str, *, horizons: Sequence[int] = (), series: Sequence[str] = (),
                since: str | None = None, until: str | None = None, where: Sequence = (), as_of=None,
                alpha: float = 0.05) -> pd.DataFrame:
        """a (incumbent) against b (challenger) per horizon on common cells; verdict in ``.attrs["verdict"]``."""
        sel = self.selection(as_of=as_of, series=series, horizons=horizons, since=since, until=until, where=where)
        return _standings().compare(self.store, sel, a, b, horizons=horizons, alpha=alpha)

    def standings(self, *, horizons: Sequence[int] = (), models: Sequence[str] = (), series: Sequence[str] = (),
                  since: str | None = None, until: str | None = None, where: Sequence = (),
                  as_of=None) -> pd.DataFrame:
        """Per evaluation period, each model's MASE, rank and share of series won, on common cells."""
        sel = self.selection(as_of=as_of, models=models, horizons=horizons, series=series, since=since,
                             until=until, where=where)
        return _standings().standings(self.store, sel)

    def standings_summary(self, *, recent: int = 12, **filters) -> pd.DataFrame:
        """Per model: periods ranked first, median rank, MASE over the last ``recent`` periods; filters as :meth:`standings`."""
        return standings_summary(self.standings(**filters), recent=recent)

    def advise(self, incumbent: str | None = None, *, challengers: Sequence[str] = (), window: int = 12,
               horizons: Sequence[int] = (), series: Sequence[str] = (), since: str | None = None,
               until: str | None = None, where: Sequence = (), alpha: float = 0.05, as_of=None) -> pd.DataFrame:
        """Replace the incumbent (None: the stored setting) with a challenger, or not, and why."""
        sel = self.selection(as_of=as_of, series=series, horizons=horizons, since=since, until=until, where=where)
        return _standings().advise(self.store, sel, incumbent, challengers=challengers,
                                   window=window, horizons=horizons, alpha=alpha)

    def review(self, inbox, *, include_excluded: bool = False, **thresholds):
        """Record an inbox's new files, run the findings and store the review (one transaction).

        Returns a :class:`ledger.cycle.review.ReviewResult`; a bad file raises ReviewRefused
        listing every problem, with nothing written. ``thresholds`` as for :meth:`flags`.
        """
        from .cycle.review import review

        return review(self.store, inbox, include_excluded=include_excluded, **thresholds)

    def reviews(self) -> pd.DataFrame:
        """Every stored review: number, as-of, state hash, inbox, files, runs and actuals recorded, findings."""
        from .cycle.changes import review_list

        return review_list(self.store)

    def changes(self, *, since_review: int | None = None, mase_change: float | None = None, as_of=None):
        """The latest review against review ``since_review`` (default the one before): a
        :class:`ledger.cycle.changes.Changes` with findings new/resolved/persisting and models' MASE moves."""
        from .cycle.changes import DEFAULT_MASE_CHANGE, changes

        return changes(self.store, since_review=since_review,
                       mase_change=DEFAULT_MASE_CHANGE if mase_change is None else mase_change,
                       as_of=None if as_of is None else parse_as_of(as_of))

    def stability(self, *, by: Sequence[str] = ("series", "model"), as_of=None, models: Sequence[str] = (),
                  series: Sequence[str] = (), since: str | None = None, until: str | None = None,
                  include_excluded: bool = False) -> pd.DataFrame:
        """Forecast stability per group: scaled revision, share toward the actual, nervousness
        (definitions in :mod:`ledger.scoring.stability`); ``by`` takes series, model, horizon, attributes.
        Target periods that excluding events cover are left out (``n_excluded``) unless ``include_excluded``."""
        from .scoring.stability import stability

        sel = self.selection(as_of=as_of, models=models, series=series, since=since, until=until,
                             include_excluded=include_excluded)
        return stability(self.store, sel, by)

    def forecast_paths(self, *, last: int = 4, as_of=None, models: Sequence[str] = (),
                       series: Sequence[str] = ()) -> pd.DataFrame:
        """The successive forecasts of each series × model's ``last`` newest target periods with two runs or more."""
        from .scoring.stability import forecast_paths

        return forecast_paths(self.store, self.selection(as_of=as_of, models=models, series=series), last=last)

    def set_incumbent(self, model: str) -> None:
        """Store ``model`` as the incumbent (ledger setting "incumbent"), used by :meth:`advise`."""
        check_models(self.store, [model])
        self.store.set_setting(_standings().INCUMBENT_KEY, model)

    @property
    def incumbent(self) -> str | None:
        """The stored incumbent model, or None."""
        return self.store.get_setting(_standings().INCUMBENT_KEY)
