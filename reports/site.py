"""Render a ledger into a static, self-contained HTML site: :func:`render_report`.

Pages: ``index.html`` (overview), ``findings.html``, ``series.html`` (index of series),
``methods.html``, one ``m-….html`` per model and one ``s-….html`` per series (names from
:mod:`reports.names`), and with ``group_by`` a ``groups.html`` (:mod:`reports.group_views`),
linked from every page's navigation. The ledger is read once (:func:`reports.data.load`); series pages are
built from one pass over those frames and, for large ledgers, rendered in worker processes,
because their charts are the expensive part. The findings, the longest single job, run in a
worker meanwhile; each series page leaves a slot for its findings table, filled in here.
"""

from __future__ import annotations

import concurrent.futures as cf
import dataclasses
import multiprocessing
import os
from collections.abc import Callable, Mapping
from pathlib import Path

import numpy as np
import pandas as pd
from markupsafe import Markup

from ledger import Ledger, __version__
from ledger.findings.base import FlagOptions
from ledger.overrides import overrides_for
from ledger.store import parse_as_of, utc_now
from ledger.wording import format_level

from . import charts
from .cycle_views import CycleData, SeriesCycle, build_series_cycle, load_cycle
from .data import LedgerData, check_roles, default_horizon, findings_job, load, report_models, series_count
from .trends import ROLLING
from .value_added import SEASONAL_NAIVE_NAMES, check_overrides
from .group_views import GROUPS_PAGE, GroupData, build_groups, check_group_by, count_findings, load_groups
from .names import claim_folder, page_names
from .review import rank_flags
from .tables import write_page
from .render import findings_table, render_page
from .series_views import Columns, SeriesInput, build_series, metrics_for
from .quantile_views import QuantileData, build_quantile_view, load_quantile_data
from .views import (
    Context,
    Footer,
    Link,
    build_model,
    build_overview,
    build_series_index,
    finding_rows,
    levels_of,
)

__all__ = [
    "FINDINGS_SLOT",
    "FIXED_PAGES",
    "SERIES_PAGES",
    "Progress",
    "ReportResult",
    "build_context",
    "render_report",
    "series_inputs",
    "series_pages_chunk",
]

#: progress(done, total, what): called after each page (or chunk of series pages) is written.
Progress = Callable[[int, int, str], None]
FIXED_PAGES = ("index.html", "findings.html", "series.html", "methods.html")
_CHUNK = 25
#: Series pages drawn by default (``series_pages``): every series of a ledger up to this many;
#: beyond it, this many with the largest total scaled error plus every series an act or watch finding names.
#: The series index lists every series with its figures either way.
SERIES_PAGES = 250
_POOL_FROM = 200   # series; below this, the start-up of worker processes costs more than it saves


@dataclasses.dataclass(frozen=True)
class ReportResult:
    """What :func:`render_report` wrote."""

    out_dir: Path
    index: Path
    pages: int
    model_pages: int
    series_pages: int
    findings: int
    cells_scored: int
    index_bytes: int
    state_hash: str
    as_of: str
    advice: str          # the review's advice sentence (first screen of index.html)


def render_report(ledger_path, out_dir, *, as_of=None, since: str | None = None, until: str | None = None,
                  title: str | None = None, incumbent: str | None = None, benchmark: str | None = None,
                  horizon: int | None = None, progress: Progress | None = None, workers: int | None = None,
                  group_by: str | None = None, overrides: Mapping[str, str] | None = None,
                  include_excluded: bool = False, series_pages: int | None = SERIES_PAGES) -> ReportResult:
    """Write the report site for the ledger at ``ledger_path`` into ``out_dir``; return what was written.

    ``as_of`` (default now) fixes what the ledger held; the same ledger and as-of give the same
    numbers. ``since``/``until`` bound the target periods of the accuracy tables and charts.
    ``incumbent`` (default: the ledger's stored incumbent) enables replacement advice;
    ``benchmark`` names the value-added reference. ``horizon`` is the horizon of the headline
    sentences, standings and series charts (default: the smallest horizon of the ledger's
    newest runs, so that a ledger whose forecasts start at horizon 3 renders as it is;
    a horizon no run has raises :class:`ledger.errors.UnknownName`). ``workers`` (default: up to four CPUs when there
    are many series; 0 = all in this process) runs the findings and the series charts in
    worker processes, each with its own read-only connection to the ledger.
    ``progress(done, total, what)`` is called after each page or chunk of series pages.
    ``group_by`` (a series attribute, e.g. "region") adds ``groups.html``: accuracy, totals and
    findings per value of the attribute; an attribute not recorded at the as-of raises
    :class:`ledger.errors.UnknownName`. ``overrides`` ({override: base}, e.g.
    {"planner-override": "incumbent-hw"}) declares models that adjust another; the value each
    such step adds is shown beside each model's value over the benchmark. None (the default)
    takes the relation recorded in the ledger (``backsight adjusts``); {} shows none.
    ``include_excluded`` scores the cells of excluding events too, as ``scores
    --include-excluded`` does; by default they are left out and counted on the first screen.
    ``series_pages`` (default :data:`SERIES_PAGES`; None = every series) caps the series pages:
    the series with the largest total scaled error (MASE × cells over all models) and, whatever
    the cap, every series an act or watch finding names; the series index says how many were drawn.
    """
    stamp = parse_as_of(as_of)
    out = Path(out_dir)
    claim_folder(out)
    path = str(Path(ledger_path).resolve())
    with Ledger.open(ledger_path, create=False, read_only=True) as book, \
            _executor(_worker_count(series_count(book, stamp), workers)) as pool:
        group_by = check_group_by(book, group_by, stamp) if group_by is not None else None
        # Started first, on the models and incumbent load() will find, so that the findings
        # (the longest single job) run while this process reads the report's frames.
        if horizon is None:
            horizon = default_horizon(book, stamp)
        elif len(book.live_runs(as_of=stamp)):
            book.selection(as_of=stamp, horizons=[horizon])   # a horizon no run has: one plain error
        models, chosen = report_models(book, stamp, since, until, include_excluded), incumbent or book.incumbent
        check_roles(models, chosen, benchmark, stamp)
        overrides = overrides_for(book.store, stamp, overrides)     # None: as recorded in the ledger
        check_overrides(overrides, models)
        found = pool.submit(findings_job, path, stamp, models, horizon, chosen, benchmark, overrides, include_excluded)
        core = load(book, as_of=stamp, since=since, until=until, horizon=horizon, incumbent=incumbent,
                    benchmark=benchmark, with_findings=False, models=models, overrides=overrides,
                    include_excluded=include_excluded)
        groups = (load_groups(book, group_by, as_of=stamp, since=since, until=until, include_excluded=include_excluded)
                  if group_by else None)
        quantiles = load_quantile_data(book, as_of=stamp, since=since, until=until, include_excluded=include_excluded)
        ctx = build_context(core, title or "Forecast accuracy report")
        cycle = load_cycle(book, stamp, core.models, core.series, ctx.styles, _fan_preference(core))
        inputs, rest = _first_pages(core, series_inputs(core, ctx, cycle=cycle.series), series_pages)
        nav = {"groups_page": GROUPS_PAGE if groups is not None else None}
        pages = _submit_pages(pool, inputs, ctx, nav)
        extra = 1 if groups is not None else 0
        tick = _ticker(progress, 4 + extra + len(core.models) + len(inputs))
        tick("computing findings", 0)
        data = dataclasses.replace(core, findings=found.result())
        flags = data.findings.flags
        named = set(flags.loc[flags["severity"] != "note", "series"]) if len(flags) else set()
        more = [i for i in rest if i.key in named]       # every series an act or watch finding names gets its page
        pages += _submit_pages(pool, more, ctx, nav)
        tick.total += len(more)
        inputs = inputs + more
        note = _pages_note(len(inputs), len(core.series), series_pages) if rest else None
        drawn = {i.key for i in inputs}
        ctx = dataclasses.replace(ctx, series_href={k: v for k, v in ctx.series_href.items() if k in drawn})
        overview, rows = _write_fixed(data, ctx, out, tick, nav, cycle, quantiles, series_note=note)
        if groups is not None:
            _write_groups(count_findings(book, groups, data.findings.flags, stamp), ctx, out, tick)
        _write_series(pages, data, ctx, out, tick)
    return ReportResult(out_dir=out.resolve(), index=out.resolve() / "index.html",
                        pages=len(FIXED_PAGES) + extra + len(data.models) + len(inputs), model_pages=len(data.models),
                        series_pages=len(inputs), findings=len(rows), cells_scored=overview.counts["cells_scored"],
                        index_bytes=(out / "index.html").stat().st_size, state_hash=data.state_hash, as_of=ctx.footer.as_of,
                        advice=overview.review.advice)


def _first_pages(data: LedgerData, inputs: list[SeriesInput], limit: int | None) -> tuple[list, list]:
    """(series drawn at once, the others): all when ``limit`` is None or not reached; else the
    ``limit`` series with the largest total scaled error, Σ MASE × scaled cells over the models."""
    if limit is None or len(inputs) <= limit:
        return inputs, []
    per = data.by_series_model
    weight = (per["mase"].fillna(0) * (per["n"] - per["n_unscaled"])).groupby(per["series"]).sum() if len(per) else {}
    ranked = sorted(range(len(inputs)), key=lambda i: (-float(weight.get(inputs[i].key, 0.0)), i))
    chosen = set(ranked[:max(0, int(limit))])
    return [x for i, x in enumerate(inputs) if i in chosen], [x for i, x in enumerate(inputs) if i not in chosen]


def _submit_pages(pool, inputs: list[SeriesInput], ctx: Context, nav: dict) -> list[cf.Future]:
    return [pool.submit(series_pages_chunk, inputs[i:i + _CHUNK], ctx, nav) for i in range(0, len(inputs), _CHUNK)]


def _pages_note(drawn: int, total: int, limit: int | None) -> str:
    return (f"Pages are drawn for {drawn:,} of these {total:,} series: the {limit:,} with the largest total scaled "
            "error (MASE × cells, all models) and every series an act or watch finding names; the others have their figures "
            "here (backsight report --series-pages all draws every series).")


def _write_fixed(data: LedgerData, ctx: Context, out: Path, tick, nav: dict, cycle: CycleData,
                 quantiles: QuantileData | None = None, series_note: str | None = None):
    """Overview, findings, series index, methods and model pages (``nav``: optional navigation links;
    ``cycle``: the changes block, events and stability charts of :mod:`reports.cycle_views`;
    ``quantiles``: the frames of the model pages' quantile sections)."""
    overview = build_overview(data, ctx)
    write_page(out, "index.html", render_page("index.html", v=overview, ctx=ctx, page="index",
                                              changes=cycle.changes, **nav))
    tick("overview")
    rows = finding_rows(rank_flags(data.findings.flags), ctx)
    write_page(out, "findings.html", render_page("findings.html", rows=rows, ctx=ctx, page="findings", **nav))
    tick("findings")
    write_page(out, "series.html", render_page("series_index.html", rows=build_series_index(data, ctx),
                                               ctx=ctx, page="series-index", note=series_note, **nav))
    tick("series index")
    write_page(out, "methods.html", render_page("methods.html", ctx=ctx, page="methods", **method_constants(), events=cycle.events, **nav))
    tick("methods")
    for model in data.models:
        view = build_model(data, ctx, model)
        write_page(out, view.href, render_page("model.html", v=view, ctx=ctx, page=view.href,
                                               quantiles=build_quantile_view(quantiles, model),
                                               stability=cycle.stability.get(model), **nav))
        tick(f"model {model}")
    return overview, rows


def method_constants() -> dict:
    """The figures the methods page states, read from the code that uses them."""
    return {"opts": FlagOptions(), "rolling": ROLLING,
            "naive_names": " or ".join(SEASONAL_NAIVE_NAMES)}


def _write_groups(groups: GroupData, ctx: Context, out: Path, tick) -> None:
    view = build_groups(groups, ctx)
    write_page(out, GROUPS_PAGE, render_page("groups.html", v=view, ctx=ctx, page="groups", groups_page=GROUPS_PAGE))
    tick(f"groups by {groups.attribute}")


class _ticker:
    """tick(what, n): n more pages done of ``total`` (which may grow), reported to ``progress``."""

    def __init__(self, progress: Progress | None, total: int):
        self.progress, self.total, self.done = progress, total, 0

    def __call__(self, what: str, n: int = 1) -> None:
        self.done += n
        if self.progress is not None:
            self.progress(self.done, self.total, what)


def build_context(data: LedgerData, title: str) -> Context:
    """What every page shares: footer, navigation, page names, chart styles, interval levels."""
    models = page_names("m", data.models)
    series = page_names("s", list(data.series["series"]))
    selection = ", ".join(p for p in (f"target periods from {data.since}" if data.since else "",
                                      f"up to {data.until}" if data.until else "") if p) or "all target periods"
    footer = Footer(as_of=f"{data.as_of:%Y-%m-%d %H:%M:%S} UTC", state_hash=data.state_hash,
                    version=__version__, generated_at=f"{utc_now():%Y-%m-%d %H:%M:%S} UTC", selection=selection)
    return Context(title=title, footer=footer, models=[Link(m, models[m]) for m in data.models],
                   model_href=models, series_href=series, styles=charts.model_styles(_drawn_models(data)),
                   levels=levels_of(data.by_model_h), horizon=data.horizon,
                   findings_note=_scope_note(data))


def _drawn_models(data: LedgerData) -> list[str]:
    """The scored models, then any live model with no scored cell yet (its latest run is still drawn)."""
    return data.models + sorted(set(data.runs["model"]) - set(data.models))


def _scope_note(data: LedgerData) -> str | None:
    if not (data.since or data.until):
        return None
    return ("Findings, comparisons, standings and advice use every scored period up to the as-of; "
            "--since/--until narrow the accuracy tables and charts only.")


_CELL_COLUMNS = ["model", "period_index", "point", "e"]


def _by_series(frame: pd.DataFrame, columns: list[str]) -> tuple[dict[str, Columns], Columns]:
    """NumPy columns of ``frame`` per series, rows in frame order (one stable sort), and an empty slice."""
    arrays = {c: frame[c].to_numpy(dtype=object if c == "model" else None) for c in columns}
    empty = {c: v[:0] for c, v in arrays.items()}
    if not len(frame):
        return {}, empty
    keys = frame["series"].to_numpy(dtype=object)
    order = np.argsort(keys, kind="stable")
    keys = keys[order]
    arrays = {c: v[order] for c, v in arrays.items()}
    starts = np.flatnonzero(np.r_[True, keys[1:] != keys[:-1]])
    ends = np.r_[starts[1:], len(keys)]
    return {keys[a]: {c: v[a:b] for c, v in arrays.items()} for a, b in zip(starts, ends)}, empty


def series_inputs(data: LedgerData, ctx: Context, *, with_chart: bool = True,
                  cycle: dict[str, SeriesCycle] | None = None) -> list[SeriesInput]:
    """One :class:`SeriesInput` per series, from one pass over each frame (``cycle``: each series'
    events and forecast paths, :func:`reports.cycle_views.load_cycle`)."""
    acts, _ = _by_series(data.actuals, ["period_index", "value"])
    cells, empty_cells = _by_series(data.cells, _CELL_COLUMNS)
    latest, empty_latest = _by_series(data.latest, [c for c in data.latest.columns if c != "series"])
    levels = [format_level(lv) for lv in ctx.levels]
    metrics: dict[str, list] = {}
    for key, row in zip(data.by_series_model["series"].tolist(), metrics_for(data.by_series_model, ctx.model_href, levels)):
        metrics.setdefault(key, []).append(row)
    flags: dict[str, list] = {}
    if data.findings is not None:
        for f in finding_rows(data.findings.flags[data.findings.flags["series"] != ""], ctx):
            flags.setdefault(f.series, []).append(f)
    prefer = _fan_preference(data)
    drawn = _drawn_models(data)
    out = []
    for key, freq, season in zip(data.series["series"].tolist(), data.series["frequency"].tolist(),
                                 data.series["season_length"].tolist()):
        a = acts.get(key)
        out.append(SeriesInput(
            key=key, href=ctx.series_href[key], frequency=freq, season_length=int(season),
            horizon=data.horizon, models=drawn, styles=ctx.styles, model_href=ctx.model_href,
            fan_preference=prefer,
            actual_index=a["period_index"].astype("int64") if a is not None else _EMPTY_I,
            actual_value=a["value"].astype(float) if a is not None else _EMPTY_F,
            cells=cells.get(key, empty_cells), latest=latest.get(key, empty_latest),
            metrics=metrics.get(key, []), findings=flags.get(key, []), with_chart=with_chart,
            cycle=(cycle or {}).get(key)))
    return out


_EMPTY_I = np.zeros(0, dtype="int64")
_EMPTY_F = np.zeros(0, dtype=float)


def _fan_preference(data: LedgerData) -> list[str]:
    """Incumbent first, else the model with the lowest MASE at the chosen horizon."""
    if data.incumbent:
        return [data.incumbent]
    part = data.by_model_h[(data.by_model_h["horizon"] == data.horizon) & data.by_model_h["mase"].notna()]
    return list(part.sort_values(["mase", "model"])["model"][:1])


#: Where a series page's findings table goes. Pages are rendered in the workers, before the
#: findings are known; this process fills the slot in. No page text can contain it: every
#: value a template prints is escaped, so a "<" in the page comes from the templates.
FINDINGS_SLOT = "<!-- findings table -->"


def series_pages_chunk(inputs: list[SeriesInput], ctx: Context, nav: dict) -> list[tuple[str, str, str]]:
    """(key, file name, HTML with :data:`FINDINGS_SLOT`) of each series page of a chunk, chart
    included (runs in a worker for large sites, so that only the findings table is left to this process)."""
    out = []
    for inp in inputs:
        view = build_series(inp)
        extra = build_series_cycle(inp.cycle, inp.frequency, inp.styles) if inp.with_chart else None
        out.append((view.key, view.href, render_page("series.html", v=view, ctx=ctx, page=view.href,
                                                     findings_slot=Markup(FINDINGS_SLOT), cycle=extra, **nav)))
    return out


def _worker_count(n_series: int, workers: int | None) -> int:
    if workers is not None:
        return max(0, int(workers))
    if n_series < _POOL_FROM:
        return 0
    cpus = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else (os.cpu_count() or 1)
    return min(4, cpus) if cpus > 1 else 0


class _Inline:
    """An executor that runs each job at once in this process (small reports; workers=0)."""

    def submit(self, fn, *args) -> cf.Future:
        future: cf.Future = cf.Future()
        future.set_result(fn(*args))
        return future

    def __enter__(self) -> _Inline:
        return self

    def __exit__(self, *exc) -> None:
        return None


def _executor(n: int):
    # spawn, not fork: the parent holds DuckDB threads, and fork with threads can deadlock.
    return _Inline() if n == 0 else cf.ProcessPoolExecutor(n, mp_context=multiprocessing.get_context("spawn"))


def _write_series(futures: list[cf.Future], data: LedgerData, ctx: Context, out: Path, tick) -> None:
    """Series pages, each with its findings table, in the order their chunks finish."""
    flags: dict[str, list] = {}
    for f in finding_rows(data.findings.flags[data.findings.flags["series"] != ""], ctx):
        flags.setdefault(f.series, []).append(f)
    for fut in cf.as_completed(futures):
        pages = fut.result()
        for key, name, html in pages:
            table = findings_table(flags.get(key, []), f"Findings for {key}")
            write_page(out, name, html.replace(FINDINGS_SLOT, table, 1))
        tick(f"series {pages[-1][0]}", len(pages))
