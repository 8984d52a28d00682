"""Drift findings: bias and deterioration CUSUMs per series × model × horizon, reported once per
series × model (the lowest flagged horizon speaks; the other flagged horizons are listed).

For each sequence of scored cells (one series, model and horizon, ordered by target period) the
pure :func:`ledger.stats.signals.drift_test` runs two tabular CUSUMs against the sequence's own
reference window (default: the first two seasons of scored cells, at least 8): one for bias on
standardised errors e / sd_ref(e), one for deterioration on square-rooted absolute scaled errors
|e|/q. k = 0.5 and h = :data:`ledger.stats.signals.DRIFT_H` (5.5) reference standard deviations; the
in-control false-alarm rate over a 36-period monthly record (24 reference + 12 monitored) is
about 3-4% per sequence (measured in tests/test_checks.py and, through the ledger, in
tests/test_findings.py). The tracking signal and Trigg's signal are shown in the evidence, never
used to raise a finding. Sign convention: e = actual - forecast, so a positive mean error means
forecasts too low.

Figure of a drift finding: recent MASE / reference MASE (above 1: accuracy got worse), where
recent means the monitored cells after the reference window.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pandas as pd

from ..stats.signals import DriftResult, drift_test, reference_length, tracking_window
from .base import Finding, FlagOptions
from ..wording import label, short_num, signed

__all__ = ["drift_findings"]


def drift_findings(cells: pd.DataFrame, seasons: dict[str, int], options: FlagOptions) -> list[Finding]:
    """Drift findings for every series × model × horizon in ``cells`` (from ``Ledger.cells``).

    ``seasons`` maps series to season length m. Sequences with no cell after the reference
    window are not judged; one note per model counts them.
    """
    flagged: dict[tuple[str, str], list[Finding]] = {}
    short: dict[str, list] = {}
    ordered = cells.sort_values(["model", "series", "horizon", "period_index"], kind="stable").reset_index(drop=True)
    cols = _columns(ordered)
    judged = []
    for (model, series, horizon), idx in ordered.groupby(["model", "series", "horizon"], sort=True).indices.items():
        m = int(seasons.get(series, 1))
        ref = options.reference or reference_length(m)
        counts = short.setdefault(model, [0, 0, set()])
        counts[1] += 1
        counts[2].add(ref)
        if idx.size <= ref:
            counts[0] += 1
            continue
        judged.append((model, series, horizon, idx, m, ref))
    maybe = _screen(cols, [(j[3], j[5]) for j in judged], options)
    for (model, series, horizon, idx, m, ref), candidate in zip(judged, maybe):
        if not candidate:
            continue
        result = _run(cols, idx, m, ref, options)
        if result.flagged:
            flagged.setdefault((str(model), str(series)), []).append(
                _finding(result, cols, idx, str(model), str(series), int(horizon)))
    out = [_merge(found) for found in flagged.values()]
    out += [_short_note(model, *c) for model, c in short.items() if c[0]]
    return out


def _merge(found: list[Finding]) -> Finding:
    """One finding per series × model: the lowest flagged horizon speaks, the others are listed."""
    first = min(found, key=lambda f: f.horizon)
    if len(found) == 1:
        return first
    hs = sorted(f.horizon for f in found)
    listed = horizon_ranges(hs)
    return dataclasses.replace(first, horizons=listed,
                               evidence=f"{first.evidence}; flagged at {len(hs)} horizons in all ({listed})")


def horizon_ranges(hs: list[int]) -> str:
    """[1, 2, 3, 5] -> '1–3, 5'."""
    parts, start, prev = [], hs[0], hs[0]
    for h in hs[1:] + [None]:
        if h is not None and h == prev + 1:
            prev = h
            continue
        parts.append(f"{start}" if start == prev else f"{start}–{prev}")
        if h is not None:
            start = prev = h
    return ", ".join(parts)


def _columns(cells: pd.DataFrame) -> dict[str, np.ndarray]:
    e = cells["e"].to_numpy(dtype=float)
    q = cells["q"].to_numpy(dtype=float, na_value=np.nan)
    with np.errstate(divide="ignore", invalid="ignore"):
        s = np.where(q > 0, np.abs(e) / q, np.nan)
    return {"e": e, "s": s, "period_index": cells["period_index"].to_numpy(),
            "frequency": cells["frequency"].to_numpy(dtype=object)}


#: Screen margin in reference standard deviations: far above the rounding differences between
#: the batched and the per-sequence arithmetic (~1e-12), far below any meaningful CUSUM step.
_SCREEN_MARGIN = 1e-6


def _screen(cols: dict, seqs: list[tuple[np.ndarray, int]], options: FlagOptions) -> np.ndarray:
    """Which sequences might alarm: a batched, conservative pre-check before the exact test.

    Sequences of equal length and reference window are stacked and their bias and deterioration
    CUSUMs computed at once, with the arithmetic of :func:`ledger.stats.signals.drift_test` (default
    floor, centring, transform and autocorrelation widening). A sequence is a candidate when
    either CUSUM comes within :data:`_SCREEN_MARGIN` of h, or when anything is not finite or a
    scaled error is missing (those cases go to the exact test unscreened). Only candidates run
    :func:`ledger.stats.signals.drift_test`, whose result alone decides a finding, so the screen saves
    time without changing any finding: it can pass extra sequences, never drop an alarming one.
    """
    out = np.ones(len(seqs), dtype=bool)
    buckets: dict[tuple[int, int], list[int]] = {}
    for i, (idx, ref) in enumerate(seqs):
        buckets.setdefault((idx.size, ref), []).append(i)
    for (_, ref), members in buckets.items():
        rows = np.stack([seqs[i][0] for i in members])
        peak = np.maximum(_peak(cols["e"][rows], ref, options.drift_k, centre=False, side="two-sided"),
                          _peak(np.sqrt(cols["s"][rows]), ref, options.drift_k, centre=True, side="upper"))
        out[members] = ~(peak < options.drift_h - _SCREEN_MARGIN)
    return out


def _peak(x: np.ndarray, ref: int, k: float, *, centre: bool, side: str) -> np.ndarray:
    """Highest monitored CUSUM value per row of x (NaN when a row cannot be screened)."""
    base = x[:, :ref]
    with np.errstate(divide="ignore", invalid="ignore"):
        sd = base.std(axis=1, ddof=1) * _ar1_widening(base)
        sigma = np.maximum(sd, 0.05 * np.abs(base).mean(axis=1))
        z = (x[:, ref:] - (base.mean(axis=1, keepdims=True) if centre else 0.0)) / sigma[:, None]
    peak = _cusum_max(z - k)
    if side == "two-sided":
        peak = np.maximum(peak, _cusum_max(-z - k))
    bad = ~(sigma > 0) | np.isnan(x).any(axis=1) | ~np.isfinite(peak)
    return np.where(bad, np.nan, peak)


def _ar1_widening(base: np.ndarray) -> np.ndarray:
    """sqrt((1 + r) / (1 - r)), r the clipped lag-1 autocorrelation (as in ledger.stats.signals._lag1)."""
    if base.shape[1] < 4:
        return np.ones(base.shape[0])
    d = base - base.mean(axis=1, keepdims=True)
    den = np.einsum("ij,ij->i", d, d)
    with np.errstate(divide="ignore", invalid="ignore"):
        r = np.where(den > 0, np.clip(np.einsum("ij,ij->i", d[:, 1:], d[:, :-1]) / den, 0.0, 0.9), 0.0)
    return np.sqrt((1 + r) / (1 - r))


def _cusum_max(step: np.ndarray) -> np.ndarray:
    """max_t of C_t = max(0, C_{t-1} + step_t), C_0 = 0, per row (closed form, as in cusum_path)."""
    total = np.cumsum(step, axis=1)
    return (total - np.minimum(0.0, np.minimum.accumulate(total, axis=1))).max(axis=1)


def _run(cols: dict, idx: np.ndarray, m: int, ref: int, options: FlagOptions) -> DriftResult:
    window = options.ts_window or tracking_window(m)
    return drift_test(cols["e"][idx], cols["s"][idx], reference=ref, k=options.drift_k, h=options.drift_h,
                      window=window, alpha=options.trigg_alpha)


def _finding(r: DriftResult, cols: dict, idx: np.ndarray, model: str, series: str, horizon: int) -> Finding:
    freq = str(cols["frequency"][idx[0]])
    periods, e = cols["period_index"][idx], cols["e"][idx]
    if r.biased:
        start, alarm = r.bias_start, r.bias_alarm
        check = "bias and deterioration" if r.deteriorated else "bias"
        recent = e[start:]
        text = (f"{r.bias_direction} since {label(periods[start], freq)} at horizon {horizon}: mean error "
                f"{signed(recent.mean())} over {recent.size} cells, {short_num(abs(recent.mean()) / r.sigma)} "
                f"times the reference spread")
    else:
        start, alarm, check = r.deterioration_start, r.deterioration_alarm, "deterioration"
        text = f"errors grew since {label(periods[start], freq)} at horizon {horizon}"
    text += f"; {_mase_text(r)}; tracking signal {_one(r.tracking_signal)}, Trigg {signed(r.trigg_signal)}"
    return Finding(kind="drift", series=series, model=model, horizon=horizon, level=None,
                   since=label(periods[start], freq), figure=r.mase_ratio, evidence=text, check=check,
                   horizons=str(horizon), raised=label(periods[alarm], freq),
                   measure="recent / reference MASE", n=r.n)


def _mase_text(r: DriftResult) -> str:
    if not np.isfinite(r.mase_ratio):
        return "MASE not available (no scale)"
    return (f"MASE {short_num(r.mase_recent)} recent vs {short_num(r.mase_reference)} reference "
            f"({short_num(r.mase_ratio)} times)")


def _one(x: float) -> str:
    return "–" if not np.isfinite(x) else f"{x:+.1f}"


def _short_note(model: str, n_short: int, n_total: int, refs: set[int]) -> Finding:
    window = f"the {min(refs)}-cell reference window" if len(refs) == 1 else "their reference windows"
    text = (f"drift not judged on {n_short} of {n_total} series × horizon sequences: "
            f"no scored cell yet after {window}")
    return Finding(kind="drift", series="", model=model, horizon=None, level=None, since="",
                   figure=float(n_short), evidence=text, check="not enough data", severity="note",
                   horizons="all", measure="sequences not judged", n=n_total)
