"""Reference backtests through the ledger: history in, ordinary ``ref-<method>`` runs out.

:func:`run_backtest` is what ``backsight backtest`` and :meth:`ledger.api.Ledger.backtest` call:

1. read and validate HISTORY (the actuals format: series, period, actual) and the options;
   nothing is written when either is bad;
2. record HISTORY as actuals (one transaction; unchanged values are skipped, changed ones become
   revisions);
3. take the ledger's newest revision of every actual of those series as the backtest input, with
   each series' season length from the ``series`` table;
4. forecast with :func:`ledger.methods.rolling.backtest` (each origin sees only actuals up to itself);
5. snapshot the forecasts as one back-fill of runs (one transaction), through the normal path:
   re-running the same backtest is a no-op, a different result at a recorded model and origin
   is refused unless ``supersede``.

A run's source is ``backtest:<file name>``; its note records the fill method when one is used
(``fill=linear``). Steps 2 and 5 are separate transactions: when step 5 is refused, the actuals
stay recorded, and re-running finds them unchanged.
"""

from __future__ import annotations

import dataclasses
import re
from collections.abc import Callable, Sequence

from ..lazy import pandas as pd

from ..errors import UnknownName
from ..intake.ingest import MAX_HORIZON, read_actuals, read_forecasts
from ..periods import SEASON_LENGTHS, parse_period, period_index
from ..intake.record import ActualsResult, RunResult, write_actuals, write_runs
from ..store import Store
from ..wording import label, labels
from .names import check_fill, check_levels, check_methods
from .quantile_output import check_quantiles

__all__ = ["BacktestResult", "check_options", "run_backtest"]

_SCHEDULE_HINT = "holdout (--holdout K) or origins (--origins FIRST:LAST[:STEP])"


@dataclasses.dataclass(frozen=True)
class BacktestResult:
    """What a backtest wrote: the actuals it recorded, the runs, and the data-quality notes."""

    source: str
    frequency: str
    horizon: int
    actuals: ActualsResult
    runs: list[RunResult]
    notes: list[str]
    warnings: list[str]

    @property
    def recorded(self) -> list[RunResult]:
        """Runs written by this call (new or superseding)."""
        return [r for r in self.runs if r.status != "unchanged"]

    @property
    def unchanged(self) -> list[RunResult]:
        """Runs already in the ledger with identical content (nothing written)."""
        return [r for r in self.runs if r.status == "unchanged"]

    @property
    def cells(self) -> int:
        """Forecast cells written by this call."""
        return sum(r.cells for r in self.recorded)


# ---------------------------------------------------------------------------------------------
# options


def check_options(*, methods: Sequence[str], horizon: int | None, holdout: int | None,
                  origins: str | None, levels: Sequence[float], jobs: int | None,
                  fill: str | None, quantiles: Sequence[float] = ()) -> None:
    """Refuse bad backtest options before anything is read or written (UnknownName)."""
    check_methods(methods)
    if (holdout is None) == (origins is None):
        got = "both" if holdout is not None else "neither"
        raise UnknownName(f"backtest: give exactly one of {_SCHEDULE_HINT}; got {got}")
    _check_count("horizon", horizon, high=MAX_HORIZON)
    _check_count("holdout", holdout)
    _check_count("jobs", jobs)
    if origins is not None:
        _split_origins(origins)
    check_levels(levels, command="backtest")
    check_quantiles(quantiles)
    check_fill(fill)


def _check_count(name: str, value: int | None, *, high: int | None = None) -> None:
    if value is None:
        return
    if isinstance(value, bool) or int(value) != value or value < 1:
        raise UnknownName(f"backtest: {name} {value!r} must be a whole number >= 1")
    if high is not None and value > high:
        raise UnknownName(f"backtest: {name} {value} is above {high}, the longest horizon Backsight accepts")


def _split_origins(text: str) -> tuple[str, str, int]:
    parts = [p.strip() for p in str(text).split(":")]
    step = parts[2] if len(parts) == 3 else "1"
    if len(parts) not in (2, 3) or not parts[0] or not parts[1] or not step.isdigit() or int(step) < 1:
        raise UnknownName(f"backtest: origins {text!r} must be FIRST:LAST or FIRST:LAST:STEP "
                          "with period labels and a step >= 1, e.g. 2024-01:2024-12:3")
    return parts[0], parts[1], int(step)


def _origin_indices(text: str, freq: str) -> tuple[int, int, int]:
    """'2024-01:2024-12:3' in the file's frequency -> (first index, last index, step)."""
    first, last, step = _split_origins(text)
    out = []
    for label in (first, last):
        try:
            out.append(period_index(parse_period(label, freq), freq))
        except ValueError as exc:
            raise UnknownName(f"backtest: origins {text!r}: {exc}; give {freq} period labels") from None
    if out[0] > out[1]:
        raise UnknownName(f"backtest: origins {text!r}: the first origin {first} is after the last {last}")
    return out[0], out[1], step


# ---------------------------------------------------------------------------------------------
# ledger reads


def _latest_history(store: Store, keys: Sequence[str]) -> tuple[pd.DataFrame, dict[str, int]]:
    """Newest revision of every actual of these series (series, t, actual) and their season lengths."""
    store.con.register("_bt_keys", pd.DataFrame({"series": pd.unique(pd.Series(keys, dtype=object))}))
    try:
        history = store.con.execute("""
            SELECT series, period_index AS t, value AS actual FROM (
                SELECT a.*, row_number() OVER (PARTITION BY a.series, a.period_index
                                               ORDER BY a.revision DESC) AS rn
                FROM actuals a JOIN _bt_keys k ON k.series = a.series) latest
            WHERE rn = 1 ORDER BY series, t""").df()
        seasons = dict(store.con.execute(
            "SELECT s.series, s.season_length FROM series s JOIN _bt_keys k ON k.series = s.series").fetchall())
    finally:
        store.con.unregister("_bt_keys")
    history["series"] = history["series"].astype(object)
    return history.astype({"t": "int64", "actual": "float64"}), {k: int(v) for k, v in seasons.items()}


# ---------------------------------------------------------------------------------------------
# indices back to period labels


def _run_frame(forecasts: pd.DataFrame, freq: str) -> pd.DataFrame:
    """backtest() output -> a back-fill forecast frame with model, origin and period labels."""
    frame = forecasts.drop(columns=["horizon", "t"]).assign(
        origin=labels(forecasts["origin"], freq), period=labels(forecasts["t"], freq))
    first = ["model", "origin", "series", "period", "forecast"]
    return frame[first + [c for c in frame.columns if c not in first]]


_SERIES_PREFIX = re.compile(r"""^Series (?:'(?:[^'\\]|\\.)*'|"(?:[^"\\]|\\.)*")""")
_INDEX_RUN = re.compile(r"\b(origins?|t =) (\d+(?:(?:, |-)\d+)*)")


def _relabel(note: str, freq: str) -> str:
    """Write the period indices in a backtest() note as period labels ('origin 24300' -> '2025-01').

    Only the text after the leading ``Series '<name>'`` is rewritten, so a series name is never
    touched. ``origins 5-9`` becomes ``origins 2025-01 to 2025-05``; ``t = 5, 6`` becomes the
    labels alone.
    """
    head = _SERIES_PREFIX.match(note)
    cut = head.end() if head else 0

    def as_labels(match: re.Match) -> str:
        parts = re.split(r"(, |-)", match.group(2))
        words = [label(int(p), freq) if p.isdigit() else
                 (" to " if p == "-" else p) for p in parts]
        lead = "" if match.group(1) == "t =" else match.group(1) + " "
        return lead + "".join(words)

    return note[:cut] + _INDEX_RUN.sub(as_labels, note[cut:])


# ---------------------------------------------------------------------------------------------
# the whole backtest


def run_backtest(
    store: Store,
    history,
    *,
    methods: Sequence[str],
    horizon: int | None = None,
    holdout: int | None = None,
    origins: str | None = None,
    levels: Sequence[float] = (80, 95),
    quantiles: Sequence[float] = (),
    freq: str | None = None,
    jobs: int | None = None,
    fill: str | None = None,
    progress: Callable[[int, int], None] | None = None,
    name: str | None = None,
    supersede: bool = False,
) -> BacktestResult:
    """Record HISTORY as actuals, backtest the reference methods on it, snapshot ``ref-<method>`` runs.

    ``history``: a CSV/Parquet path or DataFrame with series, period, actual. ``methods``: names
    from :data:`ledger.methods.names.METHODS`. Schedule, exactly one of: ``holdout=K`` (one origin
    per series, K periods before its last actual) or ``origins="FIRST:LAST[:STEP]"`` (period
    labels in the file's frequency; every origin in the range for every series). ``horizon``:
    periods ahead (default one season of the file's frequency, at least 1). ``fill``: None
    (a series-origin whose history has a gap is skipped with a note), "linear" or "previous".
    ``jobs``: worker processes (default all cores). ``progress(done, total)``: series finished.
    ``quantiles``: levels tau in (0, 1) recorded as q<NN> columns from each method's predictive
    distribution (:mod:`ledger.methods.quantile_output`).

    Notes name periods by their labels. Raises :class:`ledger.errors.UnknownName` for bad options,
    :class:`~ledger.errors.InputError` / :class:`~ledger.errors.FrequencyError` for a bad file
    (nothing written), :class:`~ledger.errors.RunConflict` when a recorded run differs and
    ``supersede`` is false.
    """
    from .rolling import backtest  # statsmodels is imported only when a backtest runs

    methods = list(methods)
    check_options(methods=methods, horizon=horizon, holdout=holdout, origins=origins, levels=levels,
                  jobs=jobs, fill=fill, quantiles=quantiles)
    with read_actuals(store, history, freq=freq, name=name) as actuals:
        span = None if origins is None else _origin_indices(origins, actuals.frequency)
        steps = int(horizon) if horizon is not None else SEASON_LENGTHS[actuals.frequency]
        written = write_actuals(store, actuals)
        keys = actuals.stage.series()
    frame, seasons = _latest_history(store, keys)
    forecasts, notes = backtest(frame, methods=methods, horizon=steps, m=seasons, levels=levels,
                                quantiles=quantiles, holdout=holdout, origins=span, jobs=jobs, fill=fill, progress=progress)
    notes = [_relabel(n, actuals.frequency) for n in notes]
    runs, warnings = _snapshot(store, forecasts, actuals.frequency, actuals.source, fill, supersede)
    return BacktestResult(actuals.source, actuals.frequency, steps, written, runs, notes,
                          list(actuals.warnings) + warnings)


def _snapshot(store: Store, forecasts: pd.DataFrame, freq: str, source: str, fill: str | None,
              supersede: bool) -> tuple[list[RunResult], list[str]]:
    if forecasts.empty:
        return [], []
    note = None if fill is None else f"fill={fill}"
    with read_forecasts(store, _run_frame(forecasts, freq), freq=freq, name=f"backtest:{source}") as frame:
        result = write_runs(store, frame, note=note, supersede=supersede)
    return result.runs, list(result.warnings)
