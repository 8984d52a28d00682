"""Quantile calibration findings: does the tau quantile sit above about tau of the actuals?

Per model × horizon bucket (the buckets of :mod:`ledger.findings.calibration`) with at least
``min_cells`` cells:

* per quantile level tau: x of n actuals below q_tau, against Binomial(n, tau), exact two-sided
  test (:func:`ledger.stats.quantiles.quantile_binomial`);
* the PIT histogram: PIT values reconstructed from each cell's quantiles by linear
  interpolation, actuals beyond the outer quantiles put in the tail bins, and a Pearson
  chi-square test of uniformity over bins edged at the quantile levels that every cell of the
  group has (:func:`ledger.stats.quantiles.pit_uniformity`; Gneiting, Balabdaoui & Raftery 2007).

All p-values of one ``flags`` call form one family under Benjamini-Hochberg (``correction="holm"``
for Holm), at ``fdr``. A model with any rejected test gets one finding: the levels that fail are
its evidence, with the direction read from them (too narrow, too wide, too high, too low).
Groups with fewer than ``min_cells`` cells are not tested and a note says so.

Severity and impact: a finding is a ``watch`` with impact 0. Impact is measured in excess scaled
absolute error of the point forecasts (:mod:`ledger.findings.base`), which miscalibrated
quantiles do not cost; their cost shows in ``wis`` instead. The action names the level the worst
quantile actually achieves (its observed share below) and the remedy: re-map the levels to the
shares they achieve (quantile recalibration, Kuleshov, Fenner & Ermon 2018, "Accurate
uncertainties for deep learning using calibrated regression", ICML; from memory). The binomial test
treats the cells of a group as independent; forecasts of one target period at neighbouring
horizons share its actual, which is why groups are horizon buckets, not all horizons pooled.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
from ..lazy import pandas as pd

from ..stats.intervals import benjamini_hochberg, holm
from ..stats.quantiles import pit_from_quantiles, pit_uniformity, quantile_binomial
from ..wording import quantile_name
from .base import Finding, FlagOptions
from ..wording import label, pval
from .calibration import bucket_labels

__all__ = ["KIND", "quantile_findings", "pit_inputs"]

KIND = "quantiles"
_CELL = ["series", "horizon", "period_index"]


@dataclasses.dataclass
class _Test:
    """One test before adjustment: a level's binomial test or a group's PIT test."""

    test: str   # "level" or "pit"
    model: str
    bucket: str
    freq: str
    since: int
    n: int
    p: float
    tau: float = math.nan
    below: int = 0
    statistic: float = math.nan
    bins: int = 0
    min_expected: float = math.nan


def quantile_findings(qcells: pd.DataFrame, options: FlagOptions) -> list[Finding]:
    """Findings and notes for the rows of :func:`ledger.scoring.quantile_reads.quantile_cells`."""
    if qcells.empty:
        return []
    data = qcells.assign(bucket=bucket_labels(qcells["horizon"], options.buckets))
    tests, small = [], {}
    for (model, bucket), part in data.groupby(["model", "bucket"], sort=True):
        cells = part[_CELL].drop_duplicates().shape[0]
        if cells < options.min_cells:
            small.setdefault(str(model), []).append((str(bucket), cells, part))
            continue
        tests += _group_tests(str(model), str(bucket), part)
    found = _findings(tests, options) if tests else []
    return found + [_small_note(model, groups, options) for model, groups in small.items()]


def pit_inputs(part: pd.DataFrame) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(actuals, quantiles (cells × levels), levels) of the cells of ``part``, on the levels that
    every cell has (a level some cell lacks is left out of the PIT)."""
    wide = part.pivot_table(index=_CELL, columns="tau", values="value", aggfunc="first")
    wide = wide.dropna(axis=1, how="any")
    actual = part.groupby(_CELL)["actual"].first().reindex(wide.index)
    return actual.to_numpy(float), wide.to_numpy(float), wide.columns.to_numpy(float)


def _group_tests(model: str, bucket: str, part: pd.DataFrame) -> list[_Test]:
    freq = str(part["frequency"].iloc[0])
    since = int(part["period_index"].min())
    out = []
    for tau, level in part.groupby("tau", sort=True):
        n, x = len(level), int(level["below"].sum())
        out.append(_Test("level", model, bucket, freq, since, n, quantile_binomial(x, n, tau=float(tau)),
                         tau=float(tau), below=x))
    y, q, taus = pit_inputs(part)
    if taus.size >= 2:
        x2, p, _, widths = pit_uniformity(pit_from_quantiles(y, q, taus=taus), taus=taus)
        out.append(_Test("pit", model, bucket, freq, since, int(y.size), p, statistic=x2, bins=widths.size,
                         min_expected=float(y.size * widths.min())))
    return out


def _findings(tests: list[_Test], options: FlagOptions) -> list[Finding]:
    raw = np.array([t.p for t in tests])
    adjusted = benjamini_hochberg(raw) if options.correction == "bh" else holm(raw)
    by_model: dict[str, list[tuple[_Test, float]]] = {}
    for t, adj in zip(tests, adjusted):
        by_model.setdefault(t.model, []).append((t, float(adj)))
    out = []
    for model, rows in by_model.items():
        failing = [(t, a) for t, a in rows if a <= options.fdr]
        if failing:
            out.append(_finding(model, rows, failing))
    return out


def _direction(levels: list[_Test]) -> str:
    """Too narrow / too wide / too high / too low, from the signs of (share below - tau)."""
    low = [t.below / t.n - t.tau for t in levels if t.tau < 0.5]
    high = [t.below / t.n - t.tau for t in levels if t.tau > 0.5]
    signs = [t.below / t.n - t.tau for t in levels]
    if low and high and all(g > 0 for g in low) and all(g < 0 for g in high):
        return "too narrow (over-confident)"
    if low and high and all(g < 0 for g in low) and all(g > 0 for g in high):
        return "too wide"
    if all(g > 0 for g in signs):
        return "too high (actuals below the quantiles too often)"
    if all(g < 0 for g in signs):
        return "too low (actuals above the quantiles too often)"
    return "miscalibrated"


def _bucket_text(buckets: list[str]) -> str:
    names = [b.replace("-", "–") for b in buckets]
    return f"horizon {names[0]}" if len(names) == 1 and names[0].isdigit() else f"horizons {', '.join(names)}"


def _bucket_key(bucket: str) -> int:
    return int(bucket.split("-")[0].rstrip("+"))


def _finding(model: str, rows: list[tuple[_Test, float]], failing: list[tuple[_Test, float]]) -> Finding:
    levels = [t for t, _ in failing if t.test == "level"]
    pits = [(t, a) for t, a in failing if t.test == "pit"]
    buckets = sorted({t.bucket for t, _ in failing}, key=_bucket_key)
    first = min(failing, key=lambda r: r[0].since)[0]
    since = label(first.since, first.freq)
    n = sum(t.n for t, _ in rows if t.test == "pit") or max(t.n for t, _ in rows)
    parts = []
    if levels:
        worst = sorted(levels, key=lambda t: -abs(t.below / t.n - t.tau))[:4]
        shown = ", ".join(f"{quantile_name(t.tau)} at {_bucket_text([t.bucket])} {t.below / t.n:.0%} below of {t.n:,} "
                          f"(expected {t.tau:.0%})" for t in sorted(worst, key=lambda t: (_bucket_key(t.bucket), t.tau)))
        parts.append(f"{_direction(levels)}: {shown}")
    if pits:
        small = "; small sample" if any(t.min_expected < 5 for t, _ in pits) else ""
        stats_text = ", ".join(f"{t.statistic:,.1f}" for t, _ in pits)
        parts.append(f"PIT histogram not uniform at {_bucket_text([t.bucket for t, _ in pits])} (chi-square "
                     f"{stats_text} on {pits[0][0].bins - 1} df, adjusted {pval(max(a for _, a in pits))} or less{small})")
    level_count = len({t.tau for t, _ in rows if t.test == "level"})
    text = (f"quantiles at {_bucket_text(buckets)} since {since} ({level_count} levels): " + "; ".join(parts)
            + "; binomial test per level and PIT chi-square, Benjamini-Hochberg across all")
    figure = max((abs(t.below / t.n - t.tau) for t in levels), default=math.nan)
    action, action_figure = _action(levels, pits)
    return _make(model=model, horizon=int(buckets[0]) if len(buckets) == 1 and buckets[0].isdigit() else None,
                 since=since, figure=figure, evidence=text,
                 check=_direction(levels) if levels else "PIT not uniform", horizons=",".join(buckets),
                 measure="largest |share below - tau|", p_value=min(a for _, a in failing), n=n,
                 severity="watch", action=action, action_figure=action_figure,
                 action_measure="share below the worst quantile" if levels else "")


def _action(levels: list[_Test], pits: list) -> tuple[str, float]:
    """What to do, and its figure: the share below the level furthest from its tau."""
    if not levels:
        return ("check the shape between the quantiles: the levels hold about the right shares but the "
                "PIT histogram is not flat, so the interpolated distribution is off", math.nan)
    worst = max(levels, key=lambda t: abs(t.below / t.n - t.tau))
    share = worst.below / worst.n
    return (f"recalibrate the quantile levels: {quantile_name(worst.tau)} at {_bucket_text([worst.bucket])} behaves "
            f"like the {share:.0%} quantile (stated {worst.tau:.0%}); map each level to the share it achieves, "
            f"or widen the tails", share)


def _small_note(model: str, groups: list[tuple[str, int, pd.DataFrame]], options: FlagOptions) -> Finding:
    first = min(int(p["period_index"].min()) for _, _, p in groups)
    since = label(first, str(groups[0][2]["frequency"].iloc[0]))
    shown = ", ".join(f"{b.replace('-', '–')}: {n:,}" for b, n, _ in groups)
    text = (f"quantiles at {_bucket_text([b for b, _, _ in groups])} since {since}: cells per bucket {shown}; "
            f"not enough data to judge (need {options.min_cells:,})")
    return _make(model=model, horizon=None, since=since, figure=float(sum(n for _, n, _ in groups)),
                 evidence=text, check="not enough data", severity="note",
                 horizons=",".join(b for b, _, _ in groups), measure="cells", n=sum(n for _, n, _ in groups))


def _make(*, model: str, horizon: int | None, since: str, figure: float, evidence: str, check: str,
          horizons: str, measure: str, n: int, p_value: float = math.nan, severity: str = "watch",
          action: str = "", action_figure: float = math.nan, action_measure: str = "") -> Finding:
    """The one place this kind builds a Finding (so a change to Finding's fields is made here)."""
    return Finding(kind=KIND, series="", model=model, horizon=horizon, level=None, since=since, figure=figure,
                   evidence=evidence, check=check, severity=severity, horizons=horizons, measure=measure,
                   p_value=p_value, n=n, impact=0.0, action=action, action_figure=action_figure,
                   action_measure=action_measure)
