"""View-models of the monthly cycle's report parts: the changes since the last review (a block
for the first screen), the events (methods page, series pages), forecast stability (a column
chart per model; a chart per series of how its last targets' forecasts evolved run by run).

Read through :class:`ledger.Ledger` only, at the report's as-of; built apart from the templates
(``_cycle_*.html``), which any page can include.
"""

from __future__ import annotations

import dataclasses
import datetime as dt
import math

import numpy as np
import pandas as pd

from ledger import Ledger
from ledger.errors import UnknownName
from ledger.periods import period_index
from ledger.wording import label, num

from . import cycle_charts
from .charts import Chart

__all__ = ["ChangeRow", "MaseMove", "ChangesBlock", "EventRow", "SeriesCycle", "SeriesCycleView", "CycleData",
           "load_cycle", "build_series_cycle", "FIRST_SCREEN_CHANGES", "PATH_TARGETS"]

PATH_TARGETS = 4          # target periods drawn per series in the run-by-run chart
_CHANGE_ROWS = 20         # rows of the changes section (the changes command lists them all)
FIRST_SCREEN_CHANGES = 4  # findings that changed, on the first screen (new, resolved, then a changed severity)


@dataclasses.dataclass(frozen=True)
class ChangeRow:
    status: str
    kind: str
    model: str
    series: str
    level: str
    severity_then: str
    severity_now: str
    figure_then: float
    figure_now: float
    evidence: str


@dataclasses.dataclass(frozen=True)
class MaseMove:
    model: str
    then: float
    now: float
    change: float
    n_then: int
    n_now: int


@dataclasses.dataclass(frozen=True)
class ChangesBlock:
    review: int
    since_review: int | None
    counts: dict[str, int]        # new, resolved, persisting
    rows: list[ChangeRow]         # new and resolved first, at most _CHANGE_ROWS
    first_screen: list[ChangeRow]  # the few the review's first screen names
    total: int
    moves: list[MaseMove]
    mase_change: float


@dataclasses.dataclass(frozen=True)
class EventRow:
    series: str
    first: str
    last: str
    label: str
    excluded: bool


@dataclasses.dataclass(frozen=True)
class SeriesCycle:
    """One series' events (first index, last index, label, exclude) and forecast paths (plain arrays)."""

    events: list[tuple[int, int, str, bool]]
    model: str
    paths: dict[str, np.ndarray]   # period_index, origin_index, point, actual


@dataclasses.dataclass(frozen=True)
class SeriesCycleView:
    events: list[EventRow]
    model: str
    chart: Chart | None


@dataclasses.dataclass(frozen=True)
class CycleData:
    changes: ChangesBlock | None
    events: list[EventRow]
    stability: dict[str, Chart]
    series: dict[str, SeriesCycle]


def _text(v) -> str:
    return "" if v is None or (isinstance(v, float) and math.isnan(v)) else str(v)


def _changes(book: Ledger, as_of: dt.datetime) -> ChangesBlock | None:
    try:
        diff = book.changes(as_of=as_of)
    except UnknownName:   # no review stored yet
        return None
    rows = [ChangeRow(r["status"], r["kind"], _text(r["model"]), _text(r["series"]),
                      f"{r['level']:g}%" if pd.notna(r["level"]) else "", _text(r["severity_then"]),
                      _text(r["severity_now"]), float(r["figure_then"]) if pd.notna(r["figure_then"]) else math.nan,
                      float(r["figure_now"]) if pd.notna(r["figure_now"]) else math.nan, _text(r["evidence"]))
            for r in diff.findings.to_dict("records")]
    shown = [r for r in rows if r.status != "persisting"] + [r for r in rows if r.status == "persisting"]
    moved = diff.models[diff.models["moved"]]
    moves = [MaseMove(m["model"], float(m["mase_then"]), float(m["mase_now"]), float(m["change"]),
                      int(m["n_then"]), int(m["n_now"])) for m in moved.to_dict("records")]
    return ChangesBlock(diff.now, diff.then, {s: diff.count(s) for s in ("new", "resolved", "persisting")},
                        shown[:_CHANGE_ROWS], _first_screen(rows), len(rows), moves, diff.mase_change)


def _first_screen(rows: list[ChangeRow]) -> list[ChangeRow]:
    """The first few findings that changed: one new, one resolved, one persisting with a changed
    severity, in turn (each in the diff's order), so that no status hides the others."""
    queues = [[r for r in rows if r.status == "new"], [r for r in rows if r.status == "resolved"],
              [r for r in rows if r.status == "persisting" and r.severity_then != r.severity_now]]
    out: list[ChangeRow] = []
    while len(out) < FIRST_SCREEN_CHANGES and any(queues):
        for queue in queues:
            if queue and len(out) < FIRST_SCREEN_CHANGES:
                out.append(queue.pop(0))
    return out


def _event_rows(events: pd.DataFrame) -> list[EventRow]:
    return [EventRow(r["series"], r["first"], r["last"], r["label"], bool(r["exclude"]))
            for r in events.to_dict("records")]


def _covered(event: dict, keys: list[str], attrs: pd.DataFrame) -> list[str]:
    target = event["series"]
    if target == "*":
        return keys
    name, sep, value = target.partition("=")
    if sep and name in attrs.columns:
        return attrs.loc[attrs[name] == value, "series"].tolist()
    return [target] if target in keys else []


def _series_events(book: Ledger, as_of, events: pd.DataFrame, series: pd.DataFrame) -> dict[str, list]:
    freq = dict(zip(series["series"], series["frequency"]))
    attrs = book.attributes(as_of=as_of)
    out: dict[str, list] = {}
    for e in events.to_dict("records"):
        first, end = pd.Timestamp(e["first_day"]).date(), pd.Timestamp(e["end_day"]).date()
        for key in _covered(e, list(freq), attrs):
            span = (period_index(first, freq[key]), period_index(end - dt.timedelta(days=1), freq[key]))
            out.setdefault(key, []).append((*span, str(e["label"]), bool(e["exclude"])))
    return out


def _stability_charts(book: Ledger, as_of, models: list[str], styles: dict) -> dict[str, Chart]:
    frame = book.stability(by=["model", "horizon"], as_of=as_of, models=models)
    out = {}
    for model, part in frame.groupby("model", sort=True):
        n = int(part["n_revisions"].sum())
        small = " A small sample: read it with care." if n < 30 else ""
        summary = (f"Mean absolute revision between consecutive runs of the same target, divided by the MASE "
                   f"scale, by the later run's horizon ({n:,} revisions): "
                   + ", ".join(f"h{h} {num(v)}" for h, v in zip(part["horizon"], part["revision"])) + "." + small)
        out[model] = cycle_charts.revision_columns_chart(
            "c-revisions", f"{model}: revision size by horizon", summary, part["horizon"].tolist(),
            part["revision"].tolist(), styles[model]["color"])
    return out


def _paths(book: Ledger, as_of, models: list[str], prefer: list[str]) -> dict[str, tuple[str, dict]]:
    frame = book.forecast_paths(last=PATH_TARGETS, as_of=as_of, models=models)
    out = {}
    rank = {m: i for i, m in enumerate(prefer + [m for m in models if m not in prefer])}
    for key, part in frame.groupby("series", sort=False):
        model = min(part["model"].unique(), key=lambda m: rank.get(m, len(rank)))
        mine = part[part["model"] == model]
        out[key] = (model, {c: mine[c].to_numpy(dtype=float) for c in ("period_index", "origin_index", "point",
                                                                        "actual")})
    return out


def load_cycle(book: Ledger, as_of: dt.datetime, models: list[str], series: pd.DataFrame, styles: dict,
               prefer: list[str]) -> CycleData:
    """Everything the cycle's report parts show, at the report's as-of."""
    events = book.events(as_of=as_of)
    per_series = _series_events(book, as_of, events, series) if len(events) else {}
    paths = _paths(book, as_of, models, prefer)
    empty = {c: np.zeros(0) for c in ("period_index", "origin_index", "point", "actual")}
    keys = set(per_series) | set(paths)
    return CycleData(
        changes=_changes(book, as_of), events=_event_rows(events),
        stability=_stability_charts(book, as_of, models, styles),
        series={k: SeriesCycle(per_series.get(k, []), paths.get(k, ("", empty))[0], paths.get(k, ("", empty))[1])
                for k in keys})


def build_series_cycle(cycle: SeriesCycle | None, frequency: str, color_of: dict) -> SeriesCycleView | None:
    """A series page's events and its run-by-run chart (built where the series page is built)."""
    if cycle is None:
        return None
    events = [EventRow("", label(a, frequency), label(b, frequency), text, excl) for a, b, text, excl in cycle.events]
    p = cycle.paths
    chart = None
    if len(p["point"]):
        origins = sorted(set(p["origin_index"].astype(int).tolist()))
        pos = {o: i for i, o in enumerate(origins)}
        targets = []
        for t in sorted(set(p["period_index"].astype(int).tolist())):
            m = p["period_index"] == t
            actual = p["actual"][m]
            targets.append((label(t, frequency), [pos[int(o)] for o in p["origin_index"][m]], p["point"][m].tolist(),
                            float(actual[0]) if len(actual) and np.isfinite(actual[0]) else math.nan))
        moves = ", ".join(f"{name} from {num(pts[0])} to {num(pts[-1])} over {len(pts):,} runs"
                          for name, _, pts, _ in targets)
        summary = (f"The forecasts of {cycle.model} for the last {len(targets):,} target periods with two runs or more, "
                   f"run by run: {moves}. Dashed levels: the actual, where it has arrived.")
        chart = cycle_charts.paths_chart("c-paths", f"{cycle.model}: forecasts of the last targets, run by run",
                                         summary, [label(o, frequency) for o in origins], targets,
                                         color_of.get(cycle.model, {}).get("color", "#0072B2"))
    return SeriesCycleView(events, cycle.model, chart)
