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
A coverage finding needs an adjusted p-value <= ``fdr`` (0.05) *and* a zone of watch or out of
tolerance, which also sets its severity (watch / alert). An independence finding needs an
adjusted p-value <= ``fdr`` and misses that cluster (a miss more likely after a miss). Groups
with fewer than ``min_cells`` cells are not tested and say "not enough data to judge".
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


def calibration_findings(icells: pd.DataFrame, freqs: dict[str, str], options: FlagOptions) -> list[Finding]:
    """Calibration findings and notes for the cells of ``Ledger.interval_cells`` (see the module doc)."""
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
    cols = {c: data[c].to_numpy() for c in ("miss", "below", "above", "period_index", "horizon", "prev")}
    tests, notes = _bucket_tests(data, cols, options)
    if options.series_calibration:
        more, skipped = _series_tests(data, cols, options)
        tests += more
        notes += skipped
    if not tests:
        return notes
    raw = np.array([t.p for t in tests])
    adjusted = benjamini_hochberg(raw) if options.correction == "bh" else holm(raw)
    out = [f for t, adj in zip(tests, adjusted) if (f := _finding(t, adj, options)) is not None]
    return out + notes


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
    tests, skipped = [], {}
    freq_of = data["freq"].to_numpy()
    # Horizon 1 only: an actual appears at every horizon, so pooling horizons counts it up to H
    # times and makes the per-series test far too liberal on real data.
    first = data[data["horizon"] == 1]
    for (model, series, level), labels in first.groupby(["model", "series", "level"], sort=True).groups.items():
        idx = labels.to_numpy()
        count = skipped.setdefault((str(model), float(level)), [0, 0])
        count[1] += 1
        if idx.size < options.min_cells:
            count[0] += 1
            continue
        where = dict(model=str(model), series=str(series), level=float(level), bucket="1", freq=str(freq_of[idx[0]]))
        tests.append(_coverage_test(where, cols, idx, options))
        tests += _independence_test(where, cols, idx, options)
    notes = [_skipped_note(model, level, n, total, options) for (model, level), (n, total) in skipped.items() if n]
    return tests, notes


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


def _finding(t: _Test, adj: float, options: FlagOptions) -> Finding | None:
    if not adj <= options.fdr:
        return None
    if t.test == "coverage":
        return _coverage_finding(t, adj) if t.zone.direction != "as stated" else None
    ind = t.independence
    after_miss = ind.n10 + ind.n11
    rate_after = ind.n11 / after_miss if after_miss else math.nan
    rate_after_hit = ind.n01 / (ind.n00 + ind.n01) if ind.n00 + ind.n01 else math.nan
    if not rate_after > rate_after_hit:
        return None
    return _independence_finding(t, adj, rate_after)


def _where(t: _Test) -> str:
    if not t.bucket:
        return "all horizons"
    return f"horizon {t.bucket}" if t.bucket.isdigit() else f"horizons {t.bucket.replace('-', '–')}"


def _coverage_finding(t: _Test, adj: float) -> Finding:
    z, lv = t.zone, format_level(t.level)
    since = label(t.since, t.freq)
    text = (f"{lv}% intervals missed {z.misses} of {z.n} actuals since {since}; expected about "
            f"{about(z.expected)} ({_where(t)}; {z.direction}: {t.below} below, {t.above} above; "
            f"{z.zone}, Kupiec {pval(t.kupiec_p)}, adjusted {pval(adj)})")
    return Finding(kind="calibration", series=t.series, model=t.model, horizon=_single(t.bucket),
                   level=t.level, since=since, figure=1 - z.misses / z.n, evidence=text, check=z.direction,
                   severity="alert" if z.zone == "out of tolerance" else "watch", zone=z.zone,
                   horizons=t.bucket or "all", measure="coverage", p_value=adj, n=t.n)


def _independence_finding(t: _Test, adj: float, rate_after: float) -> Finding:
    ind, lv = t.independence, format_level(t.level)
    since = label(t.since, t.freq)
    overall = (ind.n01 + ind.n11) / (ind.n00 + ind.n01 + ind.n10 + ind.n11)
    text = (f"{lv}% interval misses cluster at horizon 1 since {since}: {ind.n11} of {ind.n10 + ind.n11} "
            f"actuals after a miss were missed again, against {overall:.0%} of all actuals "
            f"(Christoffersen LR {ind.statistic:.1f}, adjusted {pval(adj)}; conditional coverage "
            f"LR {t.cc_statistic:.1f}, {pval(t.cc_p)})")
    return Finding(kind="calibration", series=t.series, model=t.model, horizon=1, level=t.level,
                   since=since, figure=rate_after, evidence=text, check="clustered misses",
                   horizons="1", measure="miss rate after a miss", p_value=adj, n=t.n)


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
