"""Everything a report needs, read from a ledger once: scores, cells, actuals, latest runs, findings.

Most figures come from the public :class:`ledger.Ledger` API. Three reads have no API method
yet and are done here with the ledger's own as-of views (``ledger.store.live_runs_sql``,
``latest_actuals_sql``) and cell query (``ledger.scoring.cells.cells_sql``): the actuals history of
every series, the latest run's forecasts and bounds (which need no actual), and interval miss
counts per model, horizon and level (for the binomial tolerance of calibration charts).

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
from ledger.scoring.cells import Selection, cells_sql, score_cells
from ledger.store import latest_actuals_sql, live_runs_sql
from ledger.wording import format_level

__all__ = [
    "check_roles",
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


@dataclasses.dataclass
class LedgerData:
    """The frames one report is built from (all at one as-of)."""

    as_of: dt.datetime
    state_hash: str
    since: str | None
    until: str | None
    horizon: int
    incumbent: str | None
    benchmark: str | None
    models: list[str]
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


def load(book: Ledger, *, as_of: dt.datetime, since: str | None, until: str | None, horizon: int,
         incumbent: str | None, benchmark: str | None, with_findings: bool = True,
         models: list[str] | None = None) -> LedgerData:
    """Read every frame the report needs, at ``as_of`` (findings only ``with_findings``).

    ``models``: what :func:`report_models` returned for the same as-of and periods, if the
    caller has it (finding them reads every scored cell once more).
    """
    sel = book.selection(as_of=as_of, since=since, until=until)
    models = _models(book, sel) if models is None else models
    incumbent = incumbent or book.incumbent
    check_roles(models, incumbent, benchmark, as_of)
    q = dict(as_of=as_of, since=since, until=until)
    by_model_period = book.scores(by=["model", "period"], horizons=[horizon], **q)
    window = _window(by_model_period, _main_frequency(book, sel))
    head_q = dict(q, since=window.first or since)
    return LedgerData(
        as_of=as_of, state_hash=book.store.state_hash(as_of), since=since, until=until,
        horizon=horizon, incumbent=incumbent, benchmark=benchmark, models=models,
        series=_series(book, as_of), runs=_live_runs(book, sel),
        by_model_h=book.scores(by=["model", "horizon"], **q),
        by_model_period=by_model_period,
        by_series_model=book.scores(by=["series", "model"], **q),
        window=window,
        headline=book.scores(by=["model"], horizons=[horizon], **head_q),
        **_interval_counts(book, sel, book.selection(horizons=[horizon], **head_q)),
        cells=book.cells(horizons=[horizon], **q),
        actuals=_actuals(book, sel), latest=_latest(book, sel, models), pending=_pending(book, sel),
        findings=_findings(book, models, as_of, horizon, incumbent, benchmark) if with_findings else None,
    )


def check_roles(models: list[str], incumbent: str | None, benchmark: str | None, as_of: dt.datetime) -> None:
    """Raise :class:`UnknownName` when the incumbent or benchmark has no scored run among ``models``."""
    for name, role in ((incumbent, "--incumbent"), (benchmark, "--benchmark")):
        if name is not None and name not in models:
            raise UnknownName(f"{role} {name!r} has no scored run in the ledger at {as_of:%Y-%m-%d %H:%M}; "
                              f"models: {', '.join(models) or 'none'}")


def report_models(book: Ledger, as_of: dt.datetime, since: str | None, until: str | None) -> list[str]:
    """The models with a scored cell in the report's selection (those ``load`` reports on)."""
    return _models(book, book.selection(as_of=as_of, since=since, until=until))


def _models(book: Ledger, sel: Selection) -> list[str]:
    sql, params = cells_sql(sel)
    rows = book.store.con.execute(f"SELECT DISTINCT model FROM ({sql}) ORDER BY model", params).fetchall()
    return [r[0] for r in rows]


def _main_frequency(book: Ledger, sel: Selection) -> str:
    row = book.store.con.execute(
        "SELECT frequency FROM series WHERE first_seen <= $as_of GROUP BY frequency "
        "ORDER BY count(*) DESC, frequency LIMIT 1", {"as_of": sel.as_of}).fetchall()
    return row[0][0] if row else "monthly"


_UNITS = {"yearly": "years", "quarterly": "quarters", "monthly": "months", "weekly": "weeks", "daily": "days"}


def _window(by_period: pd.DataFrame, freq: str) -> Window:
    """The last max(m, 4) evaluation periods (m = season length): one season, at least four."""
    length = max(SEASON_LENGTHS.get(freq, 12), 4)
    periods = sorted(by_period["period"].unique()) if len(by_period) else []
    if not periods:
        return Window(length, _UNITS.get(freq, "periods"), None, None)
    chosen = periods[-length:]
    return Window(len(chosen), _UNITS.get(freq, "periods"), str(chosen[0]), str(chosen[-1]))


def _series(book: Ledger, as_of: dt.datetime) -> pd.DataFrame:
    return book.store.con.execute(
        "SELECT series, frequency, season_length FROM series WHERE first_seen <= $as_of ORDER BY series",
        {"as_of": as_of}).df()


def _live_runs(book: Ledger, sel: Selection) -> pd.DataFrame:
    return book.store.con.execute(
        f"SELECT l.run_id, l.model, l.frequency, l.origin, l.origin_index, r.n_cells "
        f"FROM ({live_runs_sql()}) l JOIN runs r USING (run_id) ORDER BY l.model, l.origin_index",
        {"as_of": sel.as_of}).df()


def _interval_counts(book: Ledger, sel: Selection, head: Selection) -> dict[str, pd.DataFrame]:
    """n cells with bounds and misses (actual outside): per model, horizon and level over ``sel``
    (``intervals``), and per model and level over ``head`` (``headline_intervals``: one horizon
    from the window's first period on, a subset of ``sel``), from one read of the cells."""
    sql, params = cells_sql(sel)
    (horizon,) = head.horizons
    since = head.params().get("since")
    params.update(head_h=int(horizon), **({"head_since": since} if since is not None else {}))
    in_head = "c.horizon = $head_h" + (" AND c.period >= $head_since" if since is not None else "")
    frame = book.store.con.execute(f"""
        SELECT c.model, c.horizon, b.level, ({in_head}) AS in_head, count(*) AS n,
               sum(CASE WHEN c.actual < b.lower OR c.actual > b.upper THEN 1 ELSE 0 END) AS misses
        FROM ({sql}) c
        JOIN bounds b ON b.run_id = c.run_id AND b.series = c.series AND b.period_index = c.period_index
        GROUP BY ALL ORDER BY c.model, c.horizon, b.level""", params).df()
    frame = frame.astype({"n": "int64", "misses": "int64"})
    totals = frame.groupby(["model", "horizon", "level"], as_index=False, sort=True)[["n", "misses"]].sum()
    heads = frame[frame["in_head"]].groupby(["model", "level"], as_index=False, sort=True)[["n", "misses"]].sum()
    return {"intervals": totals, "headline_intervals": heads}


def _actuals(book: Ledger, sel: Selection) -> pd.DataFrame:
    return book.store.con.execute(
        f"SELECT series, period_index, value FROM ({latest_actuals_sql()}) a ORDER BY series, period_index",
        {"as_of": sel.as_of}).df()


def _latest(book: Ledger, sel: Selection, models: list[str]) -> pd.DataFrame:
    """The newest live run of each model for each series: forecasts, with bounds as lower_L/upper_L.

    Only the report's models (those with a scored cell): a model whose runs have not come due
    yet (a new model in a monthly review) has no place in the series charts' legends.
    """
    con = book.store.con
    con.execute(f"""
        CREATE OR REPLACE TEMP TABLE _latest AS
        SELECT * FROM (
            SELECT l.model, l.origin_index, f.run_id, f.series, f.period_index, f.horizon, f.point,
                   dense_rank() OVER (PARTITION BY l.model, f.series ORDER BY l.origin_index DESC) AS r
            FROM forecasts f JOIN ({live_runs_sql()}) l ON f.run_id = l.run_id) t
        WHERE r = 1""", {"as_of": sel.as_of})
    try:
        points = con.execute("SELECT model, series, origin_index, period_index, horizon, point "
                             "FROM _latest ORDER BY series, model, period_index").df()
        bounds = con.execute(
            "SELECT x.model, x.series, x.period_index, b.level, b.lower, b.upper FROM _latest x "
            "JOIN bounds b ON b.run_id = x.run_id AND b.series = x.series AND b.period_index = x.period_index").df()
    finally:
        con.execute("DROP TABLE IF EXISTS _latest")
    points = points[points["model"].isin(models)].reset_index(drop=True)
    return _widen_bounds(points, bounds)


def _widen_bounds(points: pd.DataFrame, bounds: pd.DataFrame) -> pd.DataFrame:
    keys = ["model", "series", "period_index"]
    for level, part in bounds.groupby("level", sort=True):
        tag = format_level(level)
        part = part.drop(columns="level").rename(columns={"lower": f"lower_{tag}", "upper": f"upper_{tag}"})
        points = points.merge(part, on=keys, how="left")
    return points


def _pending(book: Ledger, sel: Selection) -> int:
    """Forecast cells of live runs (in the target-period selection) whose actual has not arrived."""
    params = sel.params()
    where = (" AND f.period >= $since" if sel.since else "") + (" AND f.period < $until" if sel.until else "")
    row = book.store.con.execute(f"""
        SELECT count(*) FROM forecasts f JOIN ({live_runs_sql()}) l ON f.run_id = l.run_id
        LEFT JOIN ({latest_actuals_sql()}) a ON a.series = f.series AND a.period_index = f.period_index
        WHERE a.series IS NULL {where}""", params).fetchall()
    return int(row[0][0])


def series_count(book: Ledger, as_of: dt.datetime) -> int:
    return int(book.store.con.execute("SELECT count(*) FROM series WHERE first_seen <= $as_of",
                                      {"as_of": as_of}).fetchall()[0][0])


def _findings(book: Ledger, models: list[str], as_of, horizon: int, incumbent, benchmark) -> Findings:
    """The same frames as ``Ledger.flags``, ``compare``, ``standings`` and ``advise`` at ``as_of``
    (no model, horizon or period filter), from one read of the scored cells shared by all."""
    store, sel = book.store, book.selection(as_of=as_of)
    cells = score_cells(store, sel)
    found = _flag_cells(store, sel, cells=cells, **({"benchmark": benchmark} if benchmark else {}))
    comparisons = {(a, b): standings.compare(store, sel, a, b, cells=cells)
                   for a, b in itertools.combinations(models, 2)}
    ranks = standings.standings(store, dataclasses.replace(sel, horizons=(horizon,)), cells=cells)
    advice = (standings.advise(store, sel, incumbent, cells=cells)
              if incumbent and len(models) > 1 else None)
    return Findings(found, comparisons, ranks, advice)


# Jobs for worker processes: each opens the ledger read-only (DuckDB allows many readers).

def _open(path: str) -> Ledger:
    return quiet(Ledger.open(path, create=False, read_only=True))


def quiet(book: Ledger) -> Ledger:
    """No DuckDB progress bar: it would write to stdout, which the CLI keeps for the index path."""
    book.store.con.execute("SET enable_progress_bar = false")
    return book


def findings_job(path: str, as_of: dt.datetime, models: list[str], horizon: int, incumbent: str | None,
                 benchmark: str | None) -> Findings:
    """All findings of a report in one worker, sharing one read of the scored cells."""
    with _open(path) as book:
        return _findings(book, models, as_of, horizon, incumbent, benchmark)
