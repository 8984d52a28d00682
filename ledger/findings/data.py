"""Data-quality findings: what is wrong with the actuals and the runs, reported, never repaired.

Checks (all on what the ledger held at the as-of):

* gap: a period missing between two recorded actuals of a series (one finding per run of
  missing periods; nothing is filled in);
* zero actuals: cells with a zero actual are left out of MAPE (counted per series);
* intermittent demand: average demand interval ADI >= 1.32 (Syntetos, Boylan & Croston 2005)
  over a series' actuals, when it has at least ``min_cells`` of them;
* short history: forecasts made at an origin with fewer than ``seasons`` (3) seasons of
  recorded actuals up to and including the origin (three seasons before trusting a seasonal
  estimate: common practice, no source);
* no actuals: a series that is forecast, with targets already due, but never got an actual;
* overdue: a run whose targets came due (at or before the newest actual period of their
  frequency) after its series' last actual, with no actual recorded for them.
  Targets missing *inside* a series' recorded range are gaps and are not repeated here.
"""

from __future__ import annotations

from ..lazy import pandas as pd

from ..stats.demand import demand_interval_stats, gaps
from .base import Finding, FlagOptions
from ..wording import label, list_names
from ..scoring.cells import Selection
from ..store import Store, latest_actuals_sql, live_runs_sql

__all__ = ["data_findings", "series_models"]

_ACTUALS = f"""
    SELECT a.series, a.period_index, a.value, s.frequency, s.season_length
    FROM ({latest_actuals_sql()}) a JOIN series s ON s.series = a.series
    ORDER BY a.series, a.period_index"""

_COMMON = f"""
    WITH act AS ({latest_actuals_sql()}),
    live AS ({live_runs_sql()}),
    fc AS (SELECT f.series, l.run_id, l.model, l.frequency, l.origin_index, f.period_index
           FROM forecasts f JOIN live l ON f.run_id = l.run_id),
    newest AS (SELECT s.frequency, max(a.period_index) AS newest
               FROM act a JOIN series s ON s.series = a.series GROUP BY s.frequency),
    last_actual AS (SELECT series, max(period_index) AS last FROM act GROUP BY series)"""

_SHORT = _COMMON + """,
    orig AS (SELECT DISTINCT series, origin_index FROM fc),
    hist AS (SELECT o.series, o.origin_index, count(a.period_index) AS history
             FROM orig o LEFT JOIN act a ON a.series = o.series AND a.period_index <= o.origin_index
             GROUP BY o.series, o.origin_index)
    SELECT h.series, h.origin_index, h.history, s.frequency, s.season_length
    FROM hist h JOIN series s ON s.series = h.series
    JOIN last_actual la ON la.series = h.series
    WHERE h.history < $seasons * s.season_length
    ORDER BY h.series, h.origin_index"""

_NO_ACTUALS = _COMMON + """
    SELECT fc.series, fc.model, fc.frequency, count(*) AS due, count(DISTINCT fc.run_id) AS runs,
           min(fc.period_index) AS first_due, max(fc.period_index) AS last_due
    FROM fc JOIN newest n ON n.frequency = fc.frequency
    LEFT JOIN last_actual la ON la.series = fc.series
    WHERE fc.period_index <= n.newest AND la.series IS NULL
    GROUP BY fc.series, fc.model, fc.frequency
    ORDER BY fc.series, fc.model"""

_OVERDUE = _COMMON + """
    SELECT fc.run_id, fc.model, fc.frequency, fc.origin_index, fc.series, count(*) AS missing,
           min(fc.period_index) AS first_due, max(fc.period_index) AS last_due
    FROM fc JOIN newest n ON n.frequency = fc.frequency
    JOIN last_actual la ON la.series = fc.series
    WHERE fc.period_index > la.last AND fc.period_index <= n.newest
    GROUP BY fc.run_id, fc.model, fc.frequency, fc.origin_index, fc.series
    ORDER BY fc.model, fc.origin_index, fc.series"""

_SERIES_MODELS = f"""
    SELECT DISTINCT f.series, l.model FROM forecasts f JOIN ({live_runs_sql()}) l ON f.run_id = l.run_id"""


def series_models(store: Store, sel: Selection) -> pd.DataFrame:
    """Which models forecast which series (live runs at the as-of): columns series, model."""
    return store.con.execute(_SERIES_MODELS, {"as_of": sel.as_of}).df()


def data_findings(store: Store, sel: Selection, options: FlagOptions) -> list[Finding]:
    """Every data-quality finding (see the module docstring), series-level ones with model ''."""
    params = {"as_of": sel.as_of}
    actuals = store.con.execute(_ACTUALS, params).df()
    out: list[Finding] = []
    for series, g in actuals.groupby("series", sort=True):
        out += _gap_findings(str(series), g) + _zero_findings(str(series), g) + _demand_findings(str(series), g, options)
    out += _short_findings(store.con.execute(_SHORT, params | {"seasons": options.seasons}).df(), options)
    out += _no_actual_findings(store.con.execute(_NO_ACTUALS, params).df())
    out += _overdue_findings(store.con.execute(_OVERDUE, params).df())
    return out


def _data(series: str, model: str, since: str, figure: float, text: str, check: str, measure: str, n: int) -> Finding:
    return Finding(kind="data", series=series, model=model, horizon=None, level=None, since=since,
                   figure=float(figure), evidence=text, check=check, measure=measure, n=int(n),
                   severity="note")


def _gap_findings(series: str, g: pd.DataFrame) -> list[Finding]:
    freq = str(g["frequency"].iloc[0])
    out = []
    for start, length in gaps(g["period_index"].to_numpy()):
        span = label(start, freq) + (f" to {label(start + length - 1, freq)}" if length > 1 else "")
        plural = "s" if length > 1 else ""
        text = f"no actual for {span} ({length:,} period{plural}) between recorded ones; reported, not filled in"
        out.append(_data(series, "", label(start, freq), length, text, "gap", "missing periods", len(g)))
    return out


def _zero_findings(series: str, g: pd.DataFrame) -> list[Finding]:
    zeros = g[g["value"] == 0]
    if zeros.empty:
        return []
    first = label(int(zeros["period_index"].iloc[0]), str(g["frequency"].iloc[0]))
    text = f"{len(zeros):,} of {len(g):,} actuals are zero (first {first}); MAPE leaves those cells out"
    return [_data(series, "", first, len(zeros), text, "zero actuals", "zero actuals", len(g))]


def _demand_findings(series: str, g: pd.DataFrame, options: FlagOptions) -> list[Finding]:
    if len(g) < options.min_cells:
        return []
    got = demand_interval_stats(g["value"].to_numpy(dtype=float), adi_cut=options.adi)
    if not got.adi >= options.adi:
        return []
    kind = "lumpy" if got.classification == "lumpy" else "intermittent"
    first = label(int(g["period_index"].iloc[0]), str(g["frequency"].iloc[0]))
    text = (f"{kind} demand: {got.nonzero:,} of {got.n:,} actuals are non-zero, average demand interval "
            f"{got.adi:.2f} periods ({options.adi:g} or more is intermittent: Syntetos, Boylan & Croston 2005); "
            "percentage errors mislead here")
    return [_data(series, "", first, got.adi, text, f"{kind} demand", "average demand interval", got.n)]


def _short_findings(rows: pd.DataFrame, options: FlagOptions) -> list[Finding]:
    out = []
    for series, g in rows.groupby("series", sort=True):
        freq, m = str(g["frequency"].iloc[0]), int(g["season_length"].iloc[0])
        first, last = label(int(g["origin_index"].iloc[0]), freq), label(int(g["origin_index"].iloc[-1]), freq)
        span = first if first == last else f"{first} to {last}"
        plural = "s" if len(g) > 1 else ""
        text = (f"forecasts from {len(g):,} origin{plural} ({span}) had fewer than {options.seasons * m:,} actuals "
                f"of history ({options.seasons} seasons of {m}); the shortest had {int(g['history'].min()):,}")
        out.append(_data(str(series), "", first, g["history"].min(), text, "short history",
                         "shortest history (actuals)", len(g)))
    return out


def _no_actual_findings(rows: pd.DataFrame) -> list[Finding]:
    out = []
    for r in rows.itertuples(index=False):
        first, last = label(r.first_due, r.frequency), label(r.last_due, r.frequency)
        plural = "s" if r.runs > 1 else ""
        text = (f"forecast in {r.runs:,} run{plural} with {r.due:,} targets now due ({first} to {last}), "
                "but no actual has ever been recorded for this series")
        out.append(_data(str(r.series), str(r.model), first, r.due, text, "no actuals", "targets due", r.due))
    return out


def _overdue_findings(rows: pd.DataFrame) -> list[Finding]:
    out = []
    for (run_id, model, freq, origin), g in rows.groupby(["run_id", "model", "frequency", "origin_index"], sort=False):
        missing, upto = int(g["missing"].sum()), label(int(g["last_due"].max()), freq)
        names = list_names(sorted(g["series"].astype(str)))
        text = (f"run {run_id} ({model} at {label(origin, freq)}): {missing:,} forecasts for periods up to {upto} "
                f"came due after their series' last actual and have none (series {names})")
        out.append(_data("", str(model), label(int(g["first_due"].min()), freq), missing, text,
                         "overdue actuals", "forecasts due without actuals", missing))
    return out
