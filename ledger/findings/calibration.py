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
"""

from __future__ import annotations

import dataclasses
import functools
import math

import numpy as np
import pandas as pd
from scipy import stats

from ..stats import intervals
from ..stats.intervals import IndependenceTest, ZoneResult, benjamini_hochberg, holm
from .base import Finding, FlagOptions, about
from ..stats.recalibration import excess_miss_cost, recalibration
from .drift_actions import share
from ..wording import format_level, label, pval

__all__ = ["calibration_findings", "bucket_labels"]

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
    """One calibration test before adjustment: where it applies and what it found."""

    test: str  # "coverage" or "independence"
    model: str
    series: str
    level: float
    bucket: str  # "" for a per-series test over all horizons
    freq: str
    since: int
    n: int
    p: float
    zone: ZoneResult | None = None
    kupiec_p: float = math.nan
    below: int = 0
    above: int = 0
    independence: IndependenceTest | None = None
    cc_statistic: float = math.nan
    cc_p: float = math.nan


def calibration_findings(icells: pd.DataFrame, freqs: dict[str, str], options: FlagOptions, *,
                         recent_from: dict[str, int] | None = None, total: float = math.nan) -> list[Finding]:
    """Calibration findings and notes for the rows of ``interval_misses`` (see the module doc).

    ``recent_from``: first period index of the recent window per frequency (default: the last
    ``options.recent`` periods); ``total``: the denominator of impact (:mod:`ledger.findings.base`).
    """
    if icells.empty:
        return []
    data = icells.assign(freq=icells["series"].map(freqs).astype(object),
                         bucket=bucket_labels(icells["horizon"], options.buckets),
                         miss=icells["below"] | icells["above"])
    data = data.sort_values(["model", "level", "series", "horizon", "period_index"], kind="stable")
    data = data.reset_index(drop=True)
    # The previous cell's miss in the same series x model x level x horizon sequence, for the
    # transition counts of the independence test (NaN at the start of each sequence).
    data["prev"] = data.groupby(["model", "level", "series", "horizon"])["miss"].shift(1).astype("float64")
    if recent_from is None:
        newest = data.groupby("freq")["period_index"].max()
        recent_from = {str(f): int(v) - options.recent + 1 for f, v in newest.items()}
    data["recent"] = data["period_index"].to_numpy() >= data["freq"].map(recent_from).to_numpy(dtype=float)
    cols = {c: data[c].to_numpy() for c in ("miss", "below", "above", "period_index", "horizon", "prev")}
    tests, notes = _bucket_tests(data, cols, options)
    if options.series_calibration:
        more, skipped = _series_tests(data, cols, options)
        tests += more
        notes += skipped
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
    return _assemble(counted, data, recent_from, total) + notes


def _counts(t: _Test, adj: float, options: FlagOptions) -> bool:
    if not adj <= options.fdr:
        return False
    if t.test == "coverage":
        return t.zone.direction != "as stated"
    if t.test == "departure":
        return True
    ind = t.independence
    after_miss = ind.n10 + ind.n11
    rate_after = ind.n11 / after_miss if after_miss else math.nan
    rate_after_hit = ind.n01 / (ind.n00 + ind.n01) if ind.n00 + ind.n01 else math.nan
    return rate_after > rate_after_hit


def _bucket_tests(data: pd.DataFrame, cols: dict, options: FlagOptions) -> tuple[list[_Test], list[Finding]]:
    tests, notes = [], []
    for (model, freq, level, bucket), idx in data.groupby(["model", "freq", "level", "bucket"], sort=True).indices.items():
        where = dict(model=str(model), series="", level=float(level), bucket=str(bucket), freq=str(freq))
        if idx.size < options.min_cells:
            notes.append(_small_note(where, cols, idx, options))
            continue
        tests.append(_coverage_test(where, cols, idx, options))
        tests += _independence_test(where, cols, idx, options)
    return tests, notes


def _series_tests(data: pd.DataFrame, cols: dict, options: FlagOptions) -> tuple[list[_Test], list[Finding]]:
    """Per series × model × level at horizon 1: do its misses depart from the model's own rate?

    Horizon 1 only: an actual appears at every horizon, so pooling horizons counts it up to H
    times and makes the per-series test far too liberal on real data.
    """
    tests, skipped = [], {}
    freq_of = data["freq"].to_numpy()
    first = data[data["horizon"] == 1]
    pooled = first.groupby(["model", "level"])["miss"].mean()
    for (model, series, level), labels in first.groupby(["model", "series", "level"], sort=True).groups.items():
        idx = labels.to_numpy()
        count = skipped.setdefault((str(model), float(level)), [0, 0])
        count[1] += 1
        if idx.size < options.min_cells:
            count[0] += 1
            continue
        where = dict(model=str(model), series=str(series), level=float(level), bucket="1", freq=str(freq_of[idx[0]]))
        rate = float(pooled[(model, level)])
        n, x = int(idx.size), int(cols["miss"][idx].sum())
        tests.append(_Test("departure", **where, since=int(cols["period_index"][idx].min()), n=n,
                           p=_binomial_p(x, n, round(rate, 9)), kupiec_p=rate,
                           below=int(cols["below"][idx].sum()), above=int(cols["above"][idx].sum())))
    notes = [_skipped_note(model, level, n, total, options) for (model, level), (n, total) in skipped.items() if n]
    return tests, notes


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
    return _Test("coverage", **where, since=int(cols["period_index"][idx].min()), n=n, p=zone.p_value,
                 zone=zone, kupiec_p=kupiec_pof(x, n, p=p).p_value,
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
    return [_Test("independence", **where, since=int(cols["period_index"][one].min()), n=int(one.size),
                  p=ind.p_value, independence=ind, cc_statistic=cc, cc_p=float(stats.chi2.sf(cc, 2)))]


def _where(t: _Test) -> str:
    if not t.bucket:
        return "all horizons"
    return f"horizon {t.bucket}" if t.bucket.isdigit() else f"horizons {t.bucket.replace('-', '–')}"


def _assemble(counted: list[tuple[_Test, float]], data: pd.DataFrame, recent_from: dict, total: float) -> list[Finding]:
    """One finding per model × level from its counted buckets (and clustering), plus departing series."""
    per_level: dict[tuple[str, float], dict[str, list]] = {}
    for t, adj in counted:
        slot = per_level.setdefault((t.model, t.level), {"coverage": [], "independence": [], "departure": []})
        slot[t.test].append((t, adj))
    rows = data.groupby(["model", "level"]).indices
    series_rows = data.groupby(["model", "level", "series"]).indices
    out = []
    for (model, level), slot in per_level.items():
        cells = data.iloc[rows[(model, level)]]
        if slot["coverage"]:
            out.append(_model_finding(slot["coverage"], slot["independence"], cells, recent_from, total))
        elif slot["independence"]:
            out.append(_clustered_finding(slot["independence"], cells, recent_from, total))
        for t, adj in slot["departure"]:
            out.append(_series_finding(t, adj, data.iloc[series_rows[(model, level, t.series)]], recent_from, total))
    return out


def _action_figures(cells: pd.DataFrame, level: float, recent_from: dict) -> tuple[str, float, float]:
    """(sentence, factor, impact numerator) for the cells of one model × level (or one series)."""
    freq = str(cells["freq"].iloc[0])
    start = int(recent_from.get(freq, cells["period_index"].min()))
    ratio = cells["ratio"].to_numpy(dtype=float, na_value=np.nan)
    factor, before, cover, n = recalibration(ratio, cells["period_index"].to_numpy(), level, start)
    lv = format_level(level)
    recent = cells["recent"].to_numpy(dtype=bool)
    cost = excess_miss_cost(cells["dist"].to_numpy(dtype=float, na_value=np.nan)[recent],
                            cells["miss"].to_numpy(dtype=bool)[recent], level)
    if not math.isfinite(factor):
        return f"widen or narrow the {lv}% intervals; no recent cell to fit a factor on", factor, cost
    text = f"scale the {lv}% half-widths by {factor:.2f} to reach {lv}% over the {n} recent cells"
    if math.isfinite(cover):
        text += (f"; a factor fitted on the cells before {label(start, freq)} ({before:.2f}) would have "
                 f"covered {cover:.0%} of those {n} cells, out of sample")
    return text, factor, cost


def _model_finding(coverage: list, clustered: list, cells: pd.DataFrame, recent_from: dict, total: float) -> Finding:
    worst, adj = min(coverage, key=lambda ta: (ta[1], -abs(ta[0].zone.misses / ta[0].zone.n - ta[0].zone.p)))
    z, lv = worst.zone, format_level(worst.level)
    misses, n = int(cells["miss"].sum()), len(cells)
    direction = z.direction
    others = [_where(t) for t, _ in sorted(coverage, key=lambda ta: _edge(ta[0].bucket)) if t is not worst]
    text = (f"{lv}% intervals missed {misses} of {n} actuals since {label(worst.since, worst.freq)}; expected about "
            f"{about(n * (1 - worst.level / 100))}; worst at {_where(worst)}: {z.misses} of {z.n}, expected about "
            f"{about(z.expected)} ({direction}: {worst.below} below, {worst.above} above; {z.zone}, Kupiec "
            f"{pval(worst.kupiec_p)}, adjusted {pval(adj)})")
    if others:
        text += f"; also {direction} at {', '.join(others)}"
    text += _worst_series(cells)
    if clustered:
        t, a = min(clustered, key=lambda ta: ta[1])
        text += f"; misses cluster at horizon 1 (Christoffersen LR {t.independence.statistic:.1f}, adjusted {pval(a)})"
    action, factor, cost = _action_figures(cells, worst.level, recent_from)
    severity = "act" if any(t.zone.zone == "out of tolerance" for t, _ in coverage) else "watch"
    return Finding(kind="calibration", series="", model=worst.model, horizon=_single(worst.bucket),
                   level=worst.level, since=label(worst.since, worst.freq), figure=1 - misses / n, evidence=text,
                   check=direction, severity=severity, zone=z.zone,
                   horizons=",".join(t.bucket for t, _ in sorted(coverage, key=lambda ta: _edge(ta[0].bucket))),
                   measure="coverage", p_value=adj, n=n, impact=share(cost, total) if direction == "too narrow" else 0.0,
                   action=action, action_figure=factor, action_measure="half-width factor")


def _worst_series(cells: pd.DataFrame, top: int = 3) -> str:
    """'; series missing most at horizon 1: a (9 of 12), b (8 of 12)' from the horizon-1 cells."""
    first = cells[cells["horizon"] == 1]
    if first.empty:
        return ""
    per = first.groupby("series")["miss"].agg(["sum", "size"])
    per = per[per["size"] > 0].assign(rate=lambda f: f["sum"] / f["size"]).sort_values(["rate", "size"], ascending=False)
    parts = [f"{s} ({int(r['sum'])} of {int(r['size'])})" for s, r in per.head(top).iterrows()]
    return f"; series missing most at horizon 1: {', '.join(parts)}" if parts else ""


def _clustered_finding(clustered: list, cells: pd.DataFrame, recent_from: dict, total: float) -> Finding:
    t, adj = min(clustered, key=lambda ta: ta[1])
    ind, lv = t.independence, format_level(t.level)
    since = label(t.since, t.freq)
    overall = (ind.n01 + ind.n11) / (ind.n00 + ind.n01 + ind.n10 + ind.n11)
    rate_after = ind.n11 / (ind.n10 + ind.n11) if ind.n10 + ind.n11 else math.nan
    text = (f"{lv}% interval misses cluster at horizon 1 since {since}: {ind.n11} of {ind.n10 + ind.n11} "
            f"actuals after a miss were missed again, against {overall:.0%} of all actuals "
            f"(Christoffersen LR {ind.statistic:.1f}, adjusted {pval(adj)}; conditional coverage "
            f"LR {t.cc_statistic:.1f}, {pval(t.cc_p)})")
    action, factor, cost = _action_figures(cells, t.level, recent_from)
    action = "misses come in runs, so the model reacts late to changes; " + action
    return Finding(kind="calibration", series=t.series, model=t.model, horizon=1, level=t.level,
                   since=since, figure=rate_after, evidence=text, check="clustered misses", severity="watch",
                   horizons="1", measure="miss rate after a miss", p_value=adj, n=t.n,
                   impact=share(cost, total), action=action, action_figure=factor, action_measure="half-width factor")


def _series_finding(t: _Test, adj: float, cells: pd.DataFrame, recent_from: dict, total: float) -> Finding:
    lv, rate = format_level(t.level), t.kupiec_p
    x = t.below + t.above
    direction = "more" if x / t.n > rate else "less"
    text = (f"{lv}% intervals at horizon 1 missed {x} of {t.n} actuals since {label(t.since, t.freq)} "
            f"({t.below} below, {t.above} above), {direction} often than the model's own {rate:.0%} at horizon 1 "
            f"(nominal {1 - t.level / 100:.0%}; exact binomial, adjusted {pval(adj)})")
    action, factor, cost = _action_figures(cells, t.level, recent_from)
    return Finding(kind="calibration", series=t.series, model=t.model, horizon=1, level=t.level,
                   since=label(t.since, t.freq), figure=1 - x / t.n, evidence=text,
                   check=f"departs from the model ({'too narrow' if direction == 'more' else 'too wide'})",
                   severity="watch", horizons="1", measure="coverage", p_value=adj, n=t.n,
                   impact=share(cost, total) if direction == "more" else 0.0, action=action,
                   action_figure=factor, action_measure="half-width factor")


def _edge(bucket: str) -> int:
    """Lower edge of a bucket label ('1', '2-3', '13+')."""
    return int(bucket.split("-")[0].rstrip("+"))


def _single(bucket: str) -> int | None:
    return int(bucket) if bucket.isdigit() else None


def _small_note(where: dict, cols: dict, idx: np.ndarray, options: FlagOptions) -> Finding:
    t = _Test("coverage", **where, since=int(cols["period_index"][idx].min()), n=int(idx.size), p=math.nan)
    since = label(t.since, t.freq)
    text = (f"{format_level(t.level)}% intervals at {_where(t)}: {t.n} actuals since {since}; "
            f"not enough data to judge (need {options.min_cells})")
    return Finding(kind="calibration", series=t.series, model=t.model, horizon=_single(t.bucket), level=t.level,
                   since=since, figure=float(t.n), evidence=text, check="not enough data",
                   severity="note", horizons=t.bucket, measure="cells", n=t.n)


def _skipped_note(model: str, level: float, n: int, total: int, options: FlagOptions) -> Finding:
    text = (f"{format_level(level)}% intervals not judged per series on {n} of {total} series: "
            f"fewer than {options.min_cells} cells each; not enough data to judge")
    return Finding(kind="calibration", series="", model=model, horizon=None, level=level, since="",
                   figure=float(n), evidence=text, check="not enough data", severity="note",
                   horizons="all", measure="series not judged", n=total)
