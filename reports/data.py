"""Everything a report needs, read from a ledger once: scores, cells, actuals, latest runs, findings.

Every frame comes from the public :class:`ledger.Ledger` API: scores and cells, and the read
methods for reports (``ledger.scoring.reads``: series, live runs, the actuals history, the latest
run's forecasts and bounds, pending cells, interval miss counts). No module here runs SQL.

Findings come from the ledger's findings API (``flags``, ``compare``, ``standings``,
``advise``); those use every scored period up to the as-of (no --since/--until).
"""

from __future__ import annotations

import dataclasses
import datetime as dt
import itertools

import pandas as pd

from ledger import Ledger
from ledger.errors import UnknownName
from ledger.periods import SEASON_LENGTHS
from ledger.findings import standings
from ledger.findings.flags import flags as _flag_cells
from ledger.overrides import overrides_for
from ledger.scoring.cells import Selection, score_cells

from .value_added import check_overrides, default_benchmark, fva_steps

__all__ = [
    "check_roles",
    "default_horizon",
    "Findings",
    "LedgerData",
    "Window",
    "findings_job",
    "load",
    "quiet",
    "report_models",
    "series_count",
]

@dataclasses.dataclass
class Findings:
    """What the findings API said: flags, pairwise comparisons, standings and advice."""

    flags: pd.DataFrame
    comparisons: dict[tuple[str, str], pd.DataFrame]
    standings: pd.DataFrame
    advice: pd.DataFrame | None
    value_added: pd.DataFrame     # forecast value added sums per step and horizon (reports.value_added)


@dataclasses.dataclass
class LedgerData:
    """The frames one report is built from (all at one as-of)."""

    as_of: dt.datetime
    state_hash: str
    since: str | None
    until: str | None
    horizon: int
    include_excluded: bool        # cells of excluding events scored too (--include-excluded)
    incumbent: str | None
    benchmark: str | None
    models: list[str]
    overrides: dict[str, str]     # override model -> the model it adjusts
    series: pd.DataFrame          # series, frequency, season_length
    runs: pd.DataFrame            # live runs at the as-of
    by_model_h: pd.DataFrame      # scores by model, horizon
    by_model_period: pd.DataFrame  # scores by model, period at the chosen horizon
    by_series_model: pd.DataFrame  # scores by series, model
    window: Window
    headline: pd.DataFrame        # scores by model at the chosen horizon over the window
    intervals: pd.DataFrame       # model, horizon, level, n, misses (all selected cells)
    headline_intervals: pd.DataFrame  # model, level, n, misses (window, chosen horizon)
    cells: pd.DataFrame           # cells at the chosen horizon
    actuals: pd.DataFrame         # series, period_index, value
    latest: pd.DataFrame          # latest run per model and series: forecasts and bounds (wide)
    pending: int
    findings: Findings | None     # None only while the findings jobs are still running


@dataclasses.dataclass(frozen=True)
class Window:
    """The recent window of the headline: the last ``length`` evaluation periods."""

    length: int
    unit: str
    first: str | None
    last: str | None


def load(book: Ledger, *, as_of: dt.datetime, since: str | None, until: str | None, horizon: int | None,
         incumbent: str | None, benchmark: str | None, with_findings: bool = True,
         models: list[str] | None = None, overrides: dict[str, str] | None = None,
         include_excluded: bool = False) -> LedgerData:
    """Read every frame the report needs, at ``as_of`` (findings only ``with_findings``).

    ``models``: what :func:`report_models` returned for the same as-of and periods, if the
    caller has it (finding them reads every scored cell once more). ``horizon`` None: the
    ledger's first horizon (:func:`default_horizon`). ``include_excluded``: cells of excluding
    events are scored too, as ``scores --include-excluded`` scores them.
    """
    horizon = default_horizon(book, as_of) if horizon is None else horizon
    sel = book.selection(as_of=as_of, since=since, until=until, include_excluded=include_excluded)
    models = _models(book, sel) if models is None else models
    incumbent = incumbent or book.incumbent
    check_roles(models, incumbent, benchmark, as_of)
    overrides = overrides_for(book.store, as_of, overrides)     # None: as recorded in the ledger
    check_overrides(overrides, models)
    q = dict(as_of=as_of, since=since, until=until, include_excluded=include_excluded)
    runs = book.live_runs(as_of=as_of)
    # a ledger with no forecast yet has no horizon to select (the selection check would refuse
    # --horizon); every frame is empty then either way
    hs = [horizon] if len(runs) else []
    by_model_period = book.scores(by=["model", "period"], horizons=hs, **q)
    window = _window(by_model_period, book.main_frequency(as_of=as_of) or "monthly")
    head_q = dict(q, since=window.first or since)
    return LedgerData(
        as_of=as_of, state_hash=book.report_state_hash(as_of=as_of), since=since, until=until,
        horizon=horizon, include_excluded=include_excluded, incumbent=incumbent, benchmark=benchmark, models=models, overrides=overrides,
        series=book.series_table(as_of=as_of), runs=runs,
        by_model_h=book.scores(by=["model", "horizon"], **q),
        by_model_period=by_model_period,
        by_series_model=book.scores(by=["series", "model"], **q),
        window=window,
        headline=book.scores(by=["model"], horizons=hs, **head_q),
        **_interval_counts(book, sel, book.selection(horizons=hs, **head_q) if hs else None),
        cells=book.cells(horizons=hs, **q),
        actuals=book.actual_history(as_of=as_of), latest=book.latest_forecasts(as_of=as_of),
        pending=book.pending_cells(**q),
        findings=(_findings(book, models, as_of, horizon, incumbent, benchmark, overrides, include_excluded)
                  if with_findings else None),
    )


def check_roles(models: list[str], incumbent: str | None, benchmark: str | None, as_of: dt.datetime) -> None:
    """Raise :class:`UnknownName` when the incumbent or benchmark has no scored run among ``models``."""
    for name, role in ((incumbent, "--incumbent"), (benchmark, "--benchmark")):
        if name is not None and name not in models:
            raise UnknownName(f"{role} {name!r} has no scored run in the ledger at {as_of:%Y-%m-%d %H:%M}; "
                              f"models: {', '.join(models) or 'none'}")


def report_models(book: Ledger, as_of: dt.datetime, since: str | None, until: str | None,
                  include_excluded: bool = False) -> list[str]:
    """The models with a scored cell in the report's selection (those ``load`` reports on)."""
    return _models(book, book.selection(as_of=as_of, since=since, until=until, include_excluded=include_excluded))


def default_horizon(book: Ledger, as_of: dt.datetime) -> int:
    """The headline horizon when none is asked for: the smallest horizon of the newest live runs
    (1 for most ledgers; 3 for one whose forecasts start three periods out), 1 with no run."""
    latest = book.latest_forecasts(as_of=as_of)
    return int(latest["horizon"].min()) if len(latest) else 1


def _models(book: Ledger, sel: Selection) -> list[str]:
    return book.scored_models(as_of=sel.as_of, since=sel.since, until=sel.until, include_excluded=sel.include_excluded)


_UNITS = {"yearly": "years", "quarterly": "quarters", "monthly": "months", "weekly": "weeks", "daily": "days"}


def _window(by_period: pd.DataFrame, freq: str) -> Window:
    """The last max(m, 4) evaluation periods (m = season length): one season, at least four."""
    length = max(SEASON_LENGTHS.get(freq, 12), 4)
    periods = sorted(by_period["period"].unique()) if len(by_period) else []
    if not periods:
        return Window(length, _UNITS.get(freq, "periods"), None, None)
    chosen = periods[-length:]
    return Window(len(chosen), _UNITS.get(freq, "periods"), str(chosen[0]), str(chosen[-1]))


def _interval_counts(book: Ledger, sel: Selection, head: Selection | None) -> dict[str, pd.DataFrame]:
    """n cells with bounds and misses (actual outside): per model, horizon and level over ``sel``
    (``intervals``), and per model and level over ``head`` (``headline_intervals``: one horizon
    from the window's first period on, a subset of ``sel``), from one read of the cells."""
    frame = book.interval_counts(head, as_of=sel.as_of, since=sel.since, until=sel.until,
                                 include_excluded=sel.include_excluded)
    totals = frame.groupby(["model", "horizon", "level"], as_index=False, sort=True)[["n", "misses"]].sum()
    heads = frame[frame["in_head"]].groupby(["model", "level"], as_index=False, sort=True)[["n", "misses"]].sum()
    return {"intervals": totals, "headline_intervals": heads}


def series_count(book: Ledger, as_of: dt.datetime) -> int:
    return len(book.series_table(as_of=as_of))


def _findings(book: Ledger, models: list[str], as_of, horizon: int, incumbent, benchmark,
              overrides: dict[str, str], include_excluded: bool = False) -> Findings:
    """The same frames as ``Ledger.flags``, ``compare``, ``standings`` and ``advise`` at ``as_of``
    (no model, horizon or period filter; excluded cells left out unless ``include_excluded``),
    from one read of the scored cells shared by all."""
    store, sel = book.store, book.selection(as_of=as_of, include_excluded=include_excluded)
    cells = score_cells(store, sel)
    # the value findings judge the same override steps as the value-added section
    adjusts = ",".join(f"{o}={b}" for o, b in overrides.items())
    found = _flag_cells(store, sel, cells=cells, adjusts=adjusts, **({"benchmark": benchmark} if benchmark else {}))
    comparisons = {(a, b): standings.compare(store, sel, a, b, cells=cells)
                   for a, b in itertools.combinations(models, 2)}
    ranks = standings.standings(store, dataclasses.replace(sel, horizons=(horizon,)), cells=cells)
    advice = (standings.advise(store, sel, incumbent, cells=cells)
              if incumbent and len(models) > 1 else None)
    fva = fva_steps(cells, models, default_benchmark(models, benchmark), overrides)
    return Findings(found, comparisons, ranks, advice, fva)


# Jobs for worker processes: each opens the ledger read-only (DuckDB allows many readers).

def _open(path: str) -> Ledger:
    return Ledger.open(path, create=False, read_only=True)


def findings_job(path: str, as_of: dt.datetime, models: list[str], horizon: int, incumbent: str | None,
                 benchmark: str | None, overrides: dict[str, str], include_excluded: bool = False) -> Findings:
    """All findings of a report in one worker, sharing one read of the scored cells."""
    with _open(path) as book:
        return _findings(book, models, as_of, horizon, incumbent, benchmark, overrides, include_excluded)
