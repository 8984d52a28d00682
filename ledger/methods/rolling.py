"""Rolling-origin backtests of the reference methods over many series.

A backtest forecasts from each origin o using only the actuals with t <= o (no look-ahead), for
every requested method, and returns the forecasts in long format with data-quality notes.
Scoring them against actuals is the ledger's job, not this module's.

Periods are integer indices: consecutive integers are consecutive periods, and an index missing
between a series' first actual and an origin (or an actual that is NaN) is a gap. Gaps are never
filled silently: the series-origin is skipped with a note unless ``fill`` names a method, which
the note then records.

Fill methods (applied per origin to the history t <= o only, so they cannot look ahead):

- ``"linear"``: straight line between the nearest actuals before and after the gap; a gap that
  reaches the origin itself has no later actual and is held at the last actual, as ``previous``.
- ``"previous"``: the last actual before the gap is carried forward.
"""

from __future__ import annotations

import math
import os
from collections.abc import Callable, Iterable, Sequence
from concurrent.futures import ProcessPoolExecutor, as_completed
from dataclasses import dataclass, field

import numpy as np
from ..lazy import pandas as pd

from .forecasters import LEVEL_DIGITS, forecast, min_history, season_length_note, short_history_note
from .names import FillMethod, check_fill, check_levels, check_methods
from ..errors import InputError, LedgerError, UnknownName
from ..wording import format_level, quantile_name
from .quantile_output import check_quantiles

__all__ = ["backtest"]

Progress = Callable[[int, int], None]


@dataclass(frozen=True)
class _Task:
    """One series: its dense history from the first actual (NaN = gap) and its origins."""

    series: object
    t0: int
    values: np.ndarray
    m: int
    origins: tuple[int, ...]


@dataclass
class _Chunk:
    """What a worker hands back: column arrays and notes, in task order."""

    columns: dict[str, list[np.ndarray]] = field(default_factory=dict)
    notes: list[str] = field(default_factory=list)

    def add(self, name: str, values: np.ndarray) -> None:
        self.columns.setdefault(name, []).append(values)


# ---------------------------------------------------------------------------------------------
# argument checks


def _check_history(history: pd.DataFrame) -> pd.DataFrame:
    frame = history.rename(columns=lambda c: str(c).lower())
    missing = [c for c in ("series", "t", "actual") if c not in frame.columns]
    if missing:
        raise InputError("history", f"missing column(s) {', '.join(missing)}; need series, t, actual")
    if not pd.api.types.is_integer_dtype(frame["t"]):
        got = frame["t"].dtype
        raise InputError("history", f"period index must be integers, got dtype {got}", column="t")
    frame = frame[["series", "t", "actual"]].astype({"actual": "float64", "t": "int64"})
    dup = frame.duplicated(["series", "t"])
    if dup.any():
        first = frame[dup].iloc[0]
        raise InputError(
            "history", f"series {first['series']!r} has t = {first['t']} more than once; keep one row",
            row=int(np.flatnonzero(dup.to_numpy())[0]) + 1, column="t",
        )
    return frame.dropna(subset=["actual"])


def _season(m: int | dict, series: object) -> int:
    value = m.get(series) if isinstance(m, dict) else m
    if value is None:
        raise UnknownName(f"series {series!r} has no season length in m; add it or pass one int for all")
    if int(value) != value or value < 1:
        raise UnknownName(f"series {series!r}: season length m={value!r} must be an integer >= 1")
    return int(value)


def _origins_for(t: np.ndarray, holdout: int | None, origins: tuple | None) -> tuple[int, ...]:
    if holdout is not None:
        return (int(t.max()) - int(holdout),)
    first, last, step = origins  # type: ignore[misc]
    return tuple(range(int(first), int(last) + 1, int(step)))


def _check_schedule(holdout: int | None, origins: tuple[int, int, int] | None) -> None:
    if (holdout is None) == (origins is None):
        raise UnknownName(
            "backtest: give either holdout=K or origins=(first, last, step), not both or neither"
        )
    if holdout is not None and (int(holdout) != holdout or holdout < 1):
        raise UnknownName(f"backtest: holdout={holdout!r} must be an integer >= 1")
    if origins is not None:
        if len(origins) != 3 or origins[2] < 1 or origins[0] > origins[1]:
            raise UnknownName(
                f"backtest: origins={origins!r} must be (first, last, step) with first <= last, step >= 1"
            )


def _tasks(frame: pd.DataFrame, m: int | dict, holdout, origins) -> list[_Task]:
    tasks = []
    for series, part in frame.groupby("series", sort=True, observed=True):
        t = part["t"].to_numpy()
        t0 = int(t.min())
        dense = np.full(int(t.max()) - t0 + 1, np.nan)
        dense[t - t0] = part["actual"].to_numpy()
        tasks.append(_Task(series, t0, dense, _season(m, series), _origins_for(t, holdout, origins)))
    return tasks


# ---------------------------------------------------------------------------------------------
# notes


def _span(origins: Sequence[int]) -> str:
    """'origin 7', 'origins 7-12 (6 origins)' or 'origins 3, 9, 15 and 4 more'."""
    if len(origins) == 1:
        return f"origin {origins[0]}"
    steps = set(np.diff(origins).tolist())
    if len(steps) == 1:
        return f"origins {origins[0]}-{origins[-1]} ({len(origins):,} origins)"
    shown = ", ".join(str(o) for o in origins[:5])
    return f"origins {shown}" + (f" and {len(origins) - 5} more" if len(origins) > 5 else "")


def _gap_text(missing: Sequence[int]) -> str:
    shown = ", ".join(str(t) for t in missing[:8])
    more = f" and {len(missing) - 8} more" if len(missing) > 8 else ""
    return f"{len(missing):,} missing period(s) (t = {shown}{more})"


class _Notes:
    """Collects per-origin findings and words them once per series and reason."""

    def __init__(self, series: object) -> None:
        self.series = series
        self.by_reason: dict[str, list[int]] = {}
        self.plain: list[str] = []

    def at(self, origin: int, reason: str) -> None:
        self.by_reason.setdefault(reason, []).append(origin)

    def sentences(self) -> list[str]:
        worded = [f"Series {self.series!r}, {_span(o)}: {why}." for why, o in self.by_reason.items()]
        return worded + [f"Series {self.series!r}: {text}." for text in self.plain]


# ---------------------------------------------------------------------------------------------
# one series


def _fill(values: np.ndarray, how: str) -> np.ndarray:
    known = ~np.isnan(values)
    x = np.arange(values.size)
    if how == "linear":
        return np.interp(x, x[known], values[known])  # held flat past the last actual
    last = np.maximum.accumulate(np.where(known, x, 0))
    return values[last]


def _history(task: _Task, origin: int, fill: str | None, notes: _Notes) -> np.ndarray | None:
    """History up to and including the origin, or None (with a note) when it cannot be used."""
    last_actual = task.t0 + task.values.size - 1
    if origin < task.t0:
        notes.at(origin, "no actual at or before the origin; skipped")
        return None
    if origin > last_actual:
        notes.at(origin, f"after the series' last actual (t = {last_actual}); skipped")
        return None
    hist = task.values[: origin - task.t0 + 1]
    gaps = np.flatnonzero(np.isnan(hist))
    if gaps.size == 0:
        return hist
    gap_text = _gap_text((gaps + task.t0).tolist())
    if fill is None:
        notes.at(origin, f"history has {gap_text}; skipped (fill it explicitly with --fill linear or --fill previous)")
        return None
    notes.at(origin, f"history has {gap_text}, filled by {fill!r}")
    return _fill(hist, fill)


def _run_task(task: _Task, methods, horizon: int, levels, fill, chunk: _Chunk, quantiles=()) -> None:
    notes = _Notes(task.series)
    hist = None
    for origin in task.origins:
        origin_hist = _history(task, origin, fill, notes)
        if origin_hist is None:
            continue
        hist = origin_hist
        if short_history_note(hist.size, task.m) is not None:
            notes.at(origin, f"history is shorter than three seasons ({3 * task.m} values for m = {task.m})")
        for method in methods:
            _run_method(task, origin, hist, method, horizon, levels, notes, chunk, quantiles)
    if hist is not None and short_history_note(hist.size, task.m) is None:
        # Checked once per series, on the history up to its last usable origin.
        period = season_length_note(hist, task.m)
        if period is not None:
            notes.plain.append(f"{period} (checked on the history up to t = {task.t0 + hist.size - 1})")
    chunk.notes.extend(notes.sentences())


def _run_method(task, origin, hist, method, horizon, levels, notes: _Notes, chunk: _Chunk, quantiles=()) -> None:
    need = min_history(method, task.m)
    if hist.size < need:
        notes.at(origin, f"ref-{method} skipped: it needs at least {need} history values (m = {task.m})")
        return
    try:
        out = forecast(hist, method=method, h=horizon, m=task.m, levels=levels, quantiles=quantiles)
    except LedgerError as exc:
        notes.at(origin, f"ref-{method} skipped: {exc}")
        return
    steps = np.arange(1, horizon + 1, dtype=np.int64)
    chunk.add("model", np.full(horizon, f"ref-{method}", dtype=object))
    chunk.add("series", np.full(horizon, task.series, dtype=object))
    chunk.add("origin", np.full(horizon, origin, dtype=np.int64))
    chunk.add("t", origin + steps)
    chunk.add("horizon", steps)
    for key, values in out.items():
        chunk.add(key, values)


def _run_chunk(tasks: list[_Task], methods, horizon, levels, fill, quantiles=()) -> _Chunk:
    chunk = _Chunk()
    for task in tasks:
        _run_task(task, methods, horizon, levels, fill, chunk, quantiles)
    return chunk


# ---------------------------------------------------------------------------------------------
# driver


def _one_blas_thread() -> None:
    """Worker initialiser: one BLAS thread per process.

    statsmodels' many tiny matrix operations slow down about fivefold when every worker's
    OpenBLAS spins its own thread pool on the same cores (measured on M3 Theta: 61 s against
    12 s on 2 cores). threadpoolctl is optional; without it the workers run unlimited.
    """
    try:
        from threadpoolctl import threadpool_limits
    except ImportError:
        return
    # Kept alive for the worker's lifetime: the limit lasts as long as the object.
    _one_blas_thread.limit = threadpool_limits(limits=1)  # type: ignore[attr-defined]


def _execute(tasks, args, jobs: int, progress: Progress | None) -> list[_Chunk]:
    size = max(1, math.ceil(len(tasks) / (jobs * 8)))
    pieces = [tasks[i : i + size] for i in range(0, len(tasks), size)]
    results: list[_Chunk | None] = [None] * len(pieces)
    done = 0
    if jobs == 1:
        for i, piece in enumerate(pieces):
            results[i] = _run_chunk(piece, *args)
            done += len(piece)
            if progress is not None:
                progress(done, len(tasks))
        return results  # type: ignore[return-value]
    with ProcessPoolExecutor(max_workers=jobs, initializer=_one_blas_thread) as pool:
        futures = {pool.submit(_run_chunk, piece, *args): i for i, piece in enumerate(pieces)}
        for future in as_completed(futures):
            results[futures[future]] = future.result()
            done += len(pieces[futures[future]])
            if progress is not None:
                progress(done, len(tasks))
    return results  # type: ignore[return-value]


def _assemble(chunks: list[_Chunk], levels: Sequence[float], quantiles: Sequence[float] = ()) -> pd.DataFrame:
    names = ["model", "series", "origin", "t", "horizon", "forecast"]
    for level in levels:
        names += [f"lower_{format_level(level, LEVEL_DIGITS)}", f"upper_{format_level(level, LEVEL_DIGITS)}"]
    names += [quantile_name(t) for t in quantiles]
    data = {}
    for name in names:
        parts = [a for c in chunks for a in c.columns.get(name, [])]
        data[name] = np.concatenate(parts) if parts else np.array([], dtype=float)
    frame = pd.DataFrame(data)
    frame["model"] = frame["model"].astype("string")
    for name in ("origin", "t", "horizon"):
        frame[name] = frame[name].astype("int64")
    frame = frame.sort_values(["model", "series", "origin", "horizon"], kind="stable")
    return frame.reset_index(drop=True)


def backtest(
    history: pd.DataFrame,
    *,
    methods: Iterable[str],
    horizon: int,
    m: int | dict,
    levels: Sequence[float] = (80, 95),
    quantiles: Sequence[float] = (),
    holdout: int | None = None,
    origins: tuple[int, int, int] | None = None,
    jobs: int | None = None,
    fill: FillMethod | None = None,
    progress: Progress | None = None,
) -> tuple[pd.DataFrame, list[str]]:
    """Forecast every series from each origin with each reference method, using t <= origin only.

    ``history``: columns ``series``, ``t`` (integer period index), ``actual``. ``m``: one season
    length for all series or a dict series -> m. Schedule: ``holdout=K`` gives one origin per
    series, K periods before its last actual; ``origins=(first, last, step)`` gives
    range(first, last + 1, step) for every series. ``jobs``: worker processes (default
    ``os.cpu_count()``; 1 runs in this process). ``progress(done, total)`` is called in this
    process as series finish. ``fill``: None (skip gapped origins) or a :data:`FillMethod`.

    Returns the forecasts (columns ``model`` = "ref-<method>", ``series``, ``origin``, ``t``,
    ``horizon`` = t - origin, ``forecast``, ``lower_<L>``, ``upper_<L>``, ``q<NN>`` per level of
    ``quantiles``), sorted by model,
    series, origin and horizon, and a list of data-quality notes (plain sentences naming the
    series and origins: gaps, too short, season length disagreement, skipped methods).
    """
    frame = _check_history(history)
    chosen = check_methods(methods)
    _check_schedule(holdout, origins)
    if int(horizon) != horizon or horizon < 1:
        raise UnknownName(f"backtest: horizon={horizon!r} must be an integer >= 1")
    check_fill(fill)
    levels = check_levels(levels, command="backtest")
    quantiles = check_quantiles(quantiles)
    tasks = _tasks(frame, m, holdout, origins)
    workers = max(1, min(int(jobs or os.cpu_count() or 1), max(1, len(tasks))))
    chunks = _execute(tasks, (chosen, int(horizon), levels, fill, quantiles), workers, progress)
    notes = [note for chunk in chunks for note in chunk.notes]
    return _assemble(chunks, levels, quantiles), notes
