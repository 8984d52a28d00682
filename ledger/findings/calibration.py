"""Calibration findings: do L% prediction intervals miss about (100 - L)% of the actuals?

Groups tested (a *miss* is an actual outside [lower, upper]; nominal miss rate p = 1 - L/100):

* every model × frequency × level × horizon bucket. Buckets are given by their lower edges,
  default (1, 2, 4, 7, 13): horizons 1, 2-3, 4-6, 7-12 and 13+ (intervals widen with the
  horizon, so a model can be honest early and overconfident late; the edges are common
  practice, no source);
* every series × model × level at horizon 1, where it has at least ``min_cells`` cells
  (option ``series_calibration``). Only horizon 1: cells of one target period at several
  horizons share the actual, so pooling horizons would count one miss up to H times and make
  the per-series test far too liberal on real data.

Each group gets: misses x of n, coverage, the tolerance zone of x by its cumulative binomial
probability (Basel Committee 1996 rule under Backsight's names: within tolerance / watch / out
of tolerance, too narrow and too wide both), Kupiec's (1995) POF LR and p-value, and its exact
two-sided binomial p-value. Horizon-1 cells also get Christoffersen's (1998) independence test,
on transition counts pooled over the series' own sequences (misses of h-step forecasts from
consecutive origins overlap for h > 1 and are dependent even when intervals are honest, so
independence is tested at horizon 1 only) and the conditional-coverage LR.

False findings: every binomial and independence p-value of one ``flags`` call forms one family,
adjusted by Benjamini-Hochberg (default; ``correction="holm"`` for Holm's family-wise control).
A bucket counts when its adjusted p-value is <= ``fdr`` (0.05) *and* its zone is watch or out of
tolerance; clustering counts when its adjusted p-value is <= ``fdr`` and a miss is more likely
after a miss. Groups with fewer than ``min_cells`` cells are not tested and say "not enough
data to judge".

One problem, one finding: one finding per model × level gathers the buckets that count (the
worst one, by adjusted p-value, speaks; the others and the series that miss most are its
evidence; clustering joins its evidence). Severity ``act`` when a bucket is out of tolerance,
``watch`` otherwise. A series gets its own finding only where it departs from its model's own
calibration: its horizon-1 misses, by an exact two-sided binomial test against the model's
pooled horizon-1 miss rate at that level; these tests form a second family under the same
correction.

Action (:mod:`ledger.stats.recalibration`): the half-width factor that reaches the
stated level over the recent window, and the coverage a factor fitted on the earlier cells
gives on the recent window, out of sample. Impact: the scaled distance by which recent misses
beyond the nominal rate fell outside their intervals (too-wide intervals cost no accuracy:
impact 0).

Two steps: :func:`level_tests` computes every test and action figure of whole model × level
groups (on a ledger file all of them in one call; on a Spark lake one group per grouped pandas
UDF), and :func:`calibration_findings` adjusts the p-values across all groups and writes the
findings from those rows alone.
"""

from __future__ import annotations

import dataclasses
import functools
import math

import numpy as np
from ..lazy import pandas as pd
from scipy import stats

from ..stats import intervals
from ..stats.intervals import benjamini_hochberg, holm
from .base import Finding, FlagOptions, about
from ..stats.recalibration import excess_miss_cost, recalibration
from .drift_actions import share
from ..wording import format_level, label, pval

__all__ = ["calibration_findings", "level_tests", "TEST_FIELDS", "bucket_labels"]

# The tests are pure functions of a few integers and levels, and thousands of per-series groups
# share the same counts (n cells, x misses), so each distinct call is computed once; the
# results are frozen dataclasses, safe to share.
coverage_zone = functools.lru_cache(maxsize=65536)(intervals.coverage_zone)
kupiec_pof = functools.lru_cache(maxsize=65536)(intervals.kupiec_pof)
independence_from_counts = functools.lru_cache(maxsize=65536)(intervals.independence_from_counts)


def bucket_labels(horizons, edges) -> np.ndarray:
    """Bucket label of each horizon: edges (1, 2, 4, 7, 13) give '1', '2-3', '4-6', '7-12', '13+'."""
    edges = np.asarray(sorted(edges), dtype=int)
    names = [str(lo) if hi == lo + 1 else f"{lo}-{hi - 1}" for lo, hi in zip(edges[:-1], edges[1:])]
    names.append(f"{edges[-1]}+")
    at = np.searchsorted(edges, np.asarray(horizons, dtype=int), side="right") - 1
    return np.asarray(names, dtype=object)[at]


@dataclasses.dataclass
class _Test:
    """One row of :func:`level_tests`: a test before adjustment, a group too small to test, or a
    model × level's totals and action figures. Flat, so that a row crosses Spark as it is; the
    fields a row's ``test`` does not use keep their defaults."""

    test: str  # coverage, independence, departure, small (bucket not tested), unjudged (series), level
    model: str
    series: str = ""  # departure: the series; unjudged: the first series of the model × level
    level: float = math.nan
    bucket: str = ""
    freq: str = ""
    since: int = 0
    n: int = 0
    misses: int = 0
    below: int = 0
    above: int = 0
    p: float = math.nan
    kupiec_p: float = math.nan
    rate: float = math.nan  # departure: the model's pooled horizon-1 miss rate at that level
    zone: str = ""
    direction: str = ""
    cumulative: float = math.nan
    expected: float = math.nan
    nominal: float = math.nan
    n00: int = 0
    n01: int = 0
    n10: int = 0
    n11: int = 0
    statistic: float = math.nan
    cc_statistic: float = math.nan
    cc_p: float = math.nan
    unjudged: int = 0
    worst: str = ""  # level: the series missing most at horizon 1, as evidence text
    start: int = 0  # action figures (level and departure rows): first period of the recent window
    factor: float = math.nan
    before: float = math.nan
    cover: float = math.nan
    n_recent: int = 0
    cost: float = math.nan


#: (name, Python type) of each column of :func:`level_tests`.
TEST_FIELDS = tuple((f.name, f.type) for f in dataclasses.fields(_Test))
_DTYPES = {"str": object, "float": "float64", "int": "int64"}
_CASTS = {"str": str, "float": float, "int": int}


def level_tests(icells: pd.DataFrame, freqs: dict[str, str], options: FlagOptions,
                recent_from: dict[str, int]) -> pd.DataFrame:
    """Every calibration test of the rows of ``interval_misses``, before adjustment (see the module doc).

    ``icells`` (any order) must hold whole model × level groups: every test, the pooled rate a
    series departs from, and the action figures belong to one model × level, so a group's rows
    depend on its cells alone and are the same bit for bit whether all cells come at once (a
    ledger file) or one group at a time (Spark's grouped pandas UDFs,
    :meth:`ledger.scoring.spark.SparkLake.apply_in_groups`). ``recent_from``: first period
    index of the recent window per frequency. Columns: the names of :data:`TEST_FIELDS`, one row
    per test, untested group and model × level; :func:`calibration_findings` orders them.
    """
    if icells.empty:
        return _frame([])
    data = icells.assign(freq=icells["series"].map(freqs).astype(object),
                         bucket=bucket_labels(icells["horizon"], options.buckets),
                         miss=icells["below"] | icells["above"])
    data = data.sort_values(["model", "level", "series", "horizon", "period_index"], kind="stable")
    data = data.reset_index(drop=True)
    # The previous cell's miss in the same series x model x level x horizon sequence, for the
    # transition counts of the independence test (NaN at the start of each sequence).
    data["prev"] = data.groupby(["model", "level", "series", "horizon"])["miss"].shift(1).astype("float64")
    data["recent"] = data["period_index"].to_numpy() >= data["freq"].map(recent_from).to_numpy(dtype=float)
    cols = {c: data[c].to_numpy() for c in ("miss", "below", "above", "period_index", "horizon", "prev")}
    cols.update(freq=data["freq"].to_numpy(dtype=object), series=data["series"].to_numpy(dtype=object),
                recent=data["recent"].to_numpy(dtype=bool), ratio=data["ratio"].to_numpy(dtype=float, na_value=np.nan),
                dist=data["dist"].to_numpy(dtype=float, na_value=np.nan))
    rows = _bucket_tests(data, cols, options)
    if options.series_calibration:
        rows += _series_tests(data, cols, options, recent_from)
    rows += _level_rows(data, cols, recent_from)
    return _frame(rows)


def _frame(rows: list[_Test]) -> pd.DataFrame:
    return pd.DataFrame({name: pd.Series([getattr(t, name) for t in rows], dtype=_DTYPES[kind])
                         for name, kind in TEST_FIELDS})


def _record(row: dict) -> _Test:
    """A row of :func:`level_tests` as it came back (from Spark: numpy and Arrow scalars) as a _Test."""
    return _Test(**{name: _CASTS[kind](row[name]) for name, kind in TEST_FIELDS})


def calibration_findings(tested: pd.DataFrame, options: FlagOptions, *, total: float = math.nan) -> list[Finding]:
    """Calibration findings and notes from the rows of :func:`level_tests` (in any order, from
    one call or many): the false-finding control across all of them, and one finding per problem.
    ``total``: the denominator of impact (:mod:`ledger.findings.base`)."""
    if tested.empty:
        return []
    rows = [_record(r) for r in tested.to_dict("records")]
    # The order of a single in-process pass over the sorted cells, whatever order the groups came in.
    buckets = sorted((t for t in rows if t.test in ("coverage", "independence", "small")),
                     key=lambda t: (t.model, t.freq, t.level, t.bucket, t.test == "independence"))
    departures = sorted((t for t in rows if t.test == "departure"), key=lambda t: (t.model, t.series, t.level))
    unjudged = sorted((t for t in rows if t.test == "unjudged"), key=lambda t: (t.model, t.series, t.level))
    tests = [t for t in buckets if t.test != "small"] + departures
    notes = ([_small_note(t, options) for t in buckets if t.test == "small"]
             + [_skipped_note(t, options) for t in unjudged if t.unjudged])
    if not tests:
        return notes
    counted = []
    # Departures form their own family: many tiny bucket p-values would otherwise lower the
    # Benjamini-Hochberg bar for them and let chance departures through.
    for family in ([t for t in tests if t.test != "departure"], [t for t in tests if t.test == "departure"]):
        if not family:
            continue
        raw = np.array([t.p for t in family])
        adjusted = benjamini_hochberg(raw) if options.correction == "bh" else holm(raw)
        counted += [(t, adj) for t, adj in zip(family, adjusted) if _counts(t, adj, options)]
    levels = {(t.model, t.level): t for t in rows if t.test == "level"}
    return _assemble(counted, levels, total) + notes


def _counts(t: _Test, adj: float, options: FlagOptions) -> bool:
    if not adj <= options.fdr:
        return False
    if t.test == "coverage":
        return t.direction != "as stated"
    if t.test == "departure":
        return True
    after_miss = t.n10 + t.n11
    rate_after = t.n11 / after_miss if after_miss else math.nan
    rate_after_hit = t.n01 / (t.n00 + t.n01) if t.n00 + t.n01 else math.nan
    return rate_after > rate_after_hit


def _bucket_tests(data: pd.DataFrame, cols: dict, options: FlagOptions) -> list[_Test]:
    rows = []
    for (model, freq, level, bucket), idx in data.groupby(["model", "freq", "level", "bucket"], sort=True).indices.items():
        where = dict(model=str(model), level=float(level), bucket=str(bucket), freq=str(freq),
                     since=int(cols["period_index"][idx].min()))
        if idx.size < options.min_cells:
            rows.append(_Test("small", **where, n=int(idx.size)))
            continue
        rows.append(_coverage_test(where, cols, idx, options))
        rows += _independence_test(where, cols, idx, options)
    return rows


def _series_tests(data: pd.DataFrame, cols: dict, options: FlagOptions, recent_from: dict) -> list[_Test]:
    """Per series × model × level at horizon 1: do its misses depart from the model's own rate?

    Horizon 1 only: an actual appears at every horizon, so pooling horizons counts it up to H
    times and makes the per-series test far too liberal on real data.
    """
    rows, skipped = [], {}
    first = data[data["horizon"] == 1]
    pooled = first.groupby(["model", "level"])["miss"].mean()
    series_rows = data.groupby(["model", "level", "series"]).indices
    for (model, series, level), labels in first.groupby(["model", "series", "level"], sort=True).groups.items():
        idx = labels.to_numpy()
        count = skipped.setdefault((str(model), float(level)), _Test("unjudged", str(model), series=str(series),
                                                                      level=float(level)))
        count.n += 1
        if idx.size < options.min_cells:
            count.unjudged += 1
            continue
        rate = float(pooled[(model, level)])
        n, x = int(idx.size), int(cols["miss"][idx].sum())
        # All horizons of the series, for its action figures (the test itself is horizon 1 only).
        figures = _figures(cols, series_rows[(model, level, series)], float(level), recent_from)
        rows.append(_Test("departure", str(model), series=str(series), level=float(level), bucket="1",
                          freq=str(cols["freq"][idx[0]]), since=int(cols["period_index"][idx].min()), n=n, misses=x,
                          p=_binomial_p(x, n, round(rate, 9)), rate=rate,
                          below=int(cols["below"][idx].sum()), above=int(cols["above"][idx].sum()), **figures))
    return rows + list(skipped.values())


def _level_rows(data: pd.DataFrame, cols: dict, recent_from: dict) -> list[_Test]:
    """Per model × level: its misses of all cells, the series missing most, its action figures."""
    rows = []
    for (model, level), idx in data.groupby(["model", "level"], sort=True).indices.items():
        rows.append(_Test("level", str(model), level=float(level), freq=str(cols["freq"][idx[0]]), n=int(idx.size),
                          misses=int(cols["miss"][idx].sum()), worst=_worst_series(cols, idx),
                          **_figures(cols, idx, float(level), recent_from)))
    return rows


@functools.lru_cache(maxsize=65536)
def _binomial_p(x: int, n: int, rate: float) -> float:
    """Exact two-sided binomial p-value of x of n against ``rate`` (scipy.stats.binomtest)."""
    if rate <= 0 or rate >= 1:
        return 1.0 if (x == 0 and rate <= 0) or (x == n and rate >= 1) else 0.0
    return float(stats.binomtest(x, n, rate).pvalue)


def _coverage_test(where: dict, cols: dict, idx: np.ndarray, options: FlagOptions) -> _Test:
    p = 1 - where["level"] / 100
    n, x = int(idx.size), int(cols["miss"][idx].sum())
    zone = coverage_zone(x, n, p=p, watch=options.zone_watch, out=options.zone_out)
    return _Test("coverage", **where, n=n, misses=zone.misses, p=zone.p_value, zone=zone.zone,
                 direction=zone.direction, cumulative=zone.cumulative, expected=zone.expected, nominal=zone.p,
                 kupiec_p=kupiec_pof(x, n, p=p).p_value,
                 below=int(cols["below"][idx].sum()), above=int(cols["above"][idx].sum()))


def _independence_test(where: dict, cols: dict, idx: np.ndarray, options: FlagOptions) -> list[_Test]:
    one = idx[cols["horizon"][idx] == 1]
    if one.size < options.min_cells:
        return []
    prev = cols["prev"][one]
    valid = ~np.isnan(prev)
    before, now = prev[valid].astype(bool), cols["miss"][one][valid].astype(bool)
    counts = (int(np.sum(~before & ~now)), int(np.sum(~before & now)),
              int(np.sum(before & ~now)), int(np.sum(before & now)))
    ind = independence_from_counts(*counts)
    if not math.isfinite(ind.p_value):
        return []
    pof = kupiec_pof(int(cols["miss"][one].sum()), int(one.size), p=1 - where["level"] / 100)
    cc = pof.statistic + ind.statistic
    return [_Test("independence", **{**where, "since": int(cols["period_index"][one].min())}, n=int(one.size),
                  p=ind.p_value, n00=ind.n00, n01=ind.n01, n10=ind.n10, n11=ind.n11, statistic=ind.statistic,
                  cc_statistic=cc, cc_p=float(stats.chi2.sf(cc, 2)))]


def _where(t: _Test) -> str:
    if not t.bucket:
        return "all horizons"
    return f"horizon {t.bucket}" if t.bucket.isdigit() else f"horizons {t.bucket.replace('-', '–')}"


def _assemble(counted: list[tuple[_Test, float]], levels: dict[tuple[str, float], _Test], total: float) -> list[Finding]:
    """One finding per model × level from its counted buckets (and clustering), plus departing series."""
    per_level: dict[tuple[str, float], dict[str, list]] = {}
    for t, adj in counted:
        slot = per_level.setdefault((t.model, t.level), {"coverage": [], "independence": [], "departure": []})
        slot[t.test].append((t, adj))
    out = []
    for key, slot in per_level.items():
        if slot["coverage"]:
            out.append(_model_finding(slot["coverage"], slot["independence"], levels[key], total))
        elif slot["independence"]:
            out.append(_clustered_finding(slot["independence"], levels[key], total))
        for t, adj in slot["departure"]:
            out.append(_series_finding(t, adj, total))
    return out


def _figures(cols: dict, idx: np.ndarray, level: float, recent_from: dict) -> dict:
    """The action figures of the cells ``idx`` of one model × level (or one series): the _Test
    fields start, factor, before, cover, n_recent and cost (the impact numerator)."""
    freq = str(cols["freq"][idx[0]])
    periods = cols["period_index"][idx]
    start = int(recent_from.get(freq, periods.min()))
    factor, before, cover, n = recalibration(cols["ratio"][idx], periods, level, start)
    recent = cols["recent"][idx]
    cost = excess_miss_cost(cols["dist"][idx][recent], cols["miss"][idx][recent].astype(bool), level)
    return dict(start=start, factor=factor, before=before, cover=cover, n_recent=n, cost=cost)


def _action(t: _Test) -> str:
    """The sentence of the action figures of a level or departure row."""
    lv = format_level(t.level)
    if not math.isfinite(t.factor):
        return f"widen or narrow the {lv}% intervals; no recent cell to fit a factor on"
    text = f"scale the {lv}% half-widths by {t.factor:.2f} to reach {lv}% over the {t.n_recent:,} recent cells"
    if math.isfinite(t.cover):
        text += (f"; a factor fitted on the cells before {label(t.start, t.freq)} ({t.before:.2f}) would have "
                 f"covered {t.cover:.0%} of those {t.n_recent:,} cells, out of sample")
    return text


def _model_finding(coverage: list, clustered: list, totals: _Test, total: float) -> Finding:
    worst, adj = min(coverage, key=lambda ta: (ta[1], -abs(ta[0].misses / ta[0].n - ta[0].nominal)))
    lv = format_level(worst.level)
    misses, n = totals.misses, totals.n
    direction = worst.direction
    others = [_where(t) for t, _ in sorted(coverage, key=lambda ta: _edge(ta[0].bucket)) if t is not worst]
    text = (f"{lv}% intervals missed {misses:,} of {n:,} actuals since {label(worst.since, worst.freq)}; expected about "
            f"{about(n * (1 - worst.level / 100))}; worst at {_where(worst)}: {worst.misses:,} of {worst.n:,}, expected "
            f"about {about(worst.expected)} ({direction}: {worst.below:,} below, {worst.above:,} above; {worst.zone}, "
            f"Kupiec {pval(worst.kupiec_p)}, adjusted {pval(adj)})")
    if others:
        text += f"; also {direction} at {', '.join(others)}"
    text += totals.worst
    if clustered:
        t, a = min(clustered, key=lambda ta: ta[1])
        text += f"; misses cluster at horizon 1 (Christoffersen LR {t.statistic:.1f}, adjusted {pval(a)})"
    severity = "act" if any(t.zone == "out of tolerance" for t, _ in coverage) else "watch"
    return Finding(kind="calibration", series="", model=worst.model, horizon=_single(worst.bucket),
                   level=worst.level, since=label(worst.since, worst.freq), figure=1 - misses / n, evidence=text,
                   check=direction, severity=severity, zone=worst.zone,
                   horizons=",".join(t.bucket for t, _ in sorted(coverage, key=lambda ta: _edge(ta[0].bucket))),
                   measure="coverage", p_value=adj, n=n,
                   impact=share(totals.cost, total) if direction == "too narrow" else 0.0,
                   action=_action(totals), action_figure=totals.factor, action_measure="half-width factor")


def _worst_series(cols: dict, idx: np.ndarray, top: int = 3) -> str:
    """'; series missing most at horizon 1: a (9 of 12), b (8 of 12)' from the horizon-1 cells of ``idx``.

    Highest miss rate first, then most cells, then series name."""
    one = idx[cols["horizon"][idx] == 1]
    if one.size == 0:
        return ""
    names, at, size = np.unique(cols["series"][one], return_inverse=True, return_counts=True)
    misses = np.bincount(at, weights=cols["miss"][one].astype(np.int64), minlength=names.size).astype(np.int64)
    rate = misses / size
    order = np.lexsort((np.arange(names.size), -size, -rate))[:top]
    return "; series missing most at horizon 1: " + ", ".join(f"{names[i]} ({misses[i]:,} of {size[i]:,})" for i in order)


def _clustered_finding(clustered: list, totals: _Test, total: float) -> Finding:
    t, adj = min(clustered, key=lambda ta: ta[1])
    lv = format_level(t.level)
    since = label(t.since, t.freq)
    overall = (t.n01 + t.n11) / (t.n00 + t.n01 + t.n10 + t.n11)
    rate_after = t.n11 / (t.n10 + t.n11) if t.n10 + t.n11 else math.nan
    text = (f"{lv}% interval misses cluster at horizon 1 since {since}: {t.n11:,} of {t.n10 + t.n11:,} "
            f"actuals after a miss were missed again, against {overall:.0%} of all actuals "
            f"(Christoffersen LR {t.statistic:.1f}, adjusted {pval(adj)}; conditional coverage "
            f"LR {t.cc_statistic:.1f}, {pval(t.cc_p)})")
    action = "misses come in runs, so the model reacts late to changes; " + _action(totals)
    return Finding(kind="calibration", series=t.series, model=t.model, horizon=1, level=t.level,
                   since=since, figure=rate_after, evidence=text, check="clustered misses", severity="watch",
                   horizons="1", measure="miss rate after a miss", p_value=adj, n=t.n,
                   impact=share(totals.cost, total), action=action, action_figure=totals.factor,
                   action_measure="half-width factor")


def _series_finding(t: _Test, adj: float, total: float) -> Finding:
    lv, rate = format_level(t.level), t.rate
    x = t.below + t.above
    direction = "more" if x / t.n > rate else "less"
    text = (f"{lv}% intervals at horizon 1 missed {x:,} of {t.n:,} actuals since {label(t.since, t.freq)} "
            f"({t.below:,} below, {t.above:,} above), {direction} often than the model's own {rate:.0%} at horizon 1 "
            f"(nominal {1 - t.level / 100:.0%}; exact binomial, adjusted {pval(adj)})")
    return Finding(kind="calibration", series=t.series, model=t.model, horizon=1, level=t.level,
                   since=label(t.since, t.freq), figure=1 - x / t.n, evidence=text,
                   check=f"departs from the model ({'too narrow' if direction == 'more' else 'too wide'})",
                   severity="watch", horizons="1", measure="coverage", p_value=adj, n=t.n,
                   impact=share(t.cost, total) if direction == "more" else 0.0, action=_action(t),
                   action_figure=t.factor, action_measure="half-width factor")


def _edge(bucket: str) -> int:
    """Lower edge of a bucket label ('1', '2-3', '13+')."""
    return int(bucket.split("-")[0].rstrip("+"))


def _single(bucket: str) -> int | None:
    return int(bucket) if bucket.isdigit() else None


def _small_note(t: _Test, options: FlagOptions) -> Finding:
    since = label(t.since, t.freq)
    text = (f"{format_level(t.level)}% intervals at {_where(t)}: {t.n:,} actuals since {since}; "
            f"not enough data to judge (need {options.min_cells:,})")
    return Finding(kind="calibration", series=t.series, model=t.model, horizon=_single(t.bucket), level=t.level,
                   since=since, figure=float(t.n), evidence=text, check="not enough data",
                   severity="note", horizons=t.bucket, measure="cells", n=t.n)


def _skipped_note(t: _Test, options: FlagOptions) -> Finding:
    text = (f"{format_level(t.level)}% intervals not judged per series on {t.unjudged:,} of {t.n:,} series: "
            f"fewer than {options.min_cells:,} cells each; not enough data to judge")
    return Finding(kind="calibration", series="", model=t.model, horizon=None, level=t.level, since="",
                   figure=float(t.unjudged), evidence=text, check="not enough data", severity="note",
                   horizons="all", measure="series not judged", n=t.n)
