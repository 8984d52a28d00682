"""Drift findings: bias and deterioration CUSUMs per series × model × horizon, reported once per
series × model (the lowest flagged horizon speaks; the other flagged horizons are listed).

For each sequence of scored cells (one series, model and horizon, ordered by target period) the
pure :func:`ledger.checks.drift_test` runs two tabular CUSUMs against the sequence's own
reference window (default: the first two seasons of scored cells, at least 8): one for bias on
standardised errors e / sd_ref(e), one for deterioration on square-rooted absolute scaled errors
|e|/q. k = 0.5 and h = :data:`ledger.checks.DRIFT_H` (5.5) reference standard deviations; the
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

from .checks import DriftResult, drift_test, reference_length, tracking_window
from .findings import Finding, FlagOptions, label, num, signed

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
    for (model, series, horizon), idx in ordered.groupby(["model", "series", "horizon"], sort=True).indices.items():
        m = int(seasons.get(series, 1))
        ref = options.reference or reference_length(m)
        counts = short.setdefault(model, [0, 0, set()])
        counts[1] += 1
        counts[2].add(ref)
        if idx.size <= ref:
            counts[0] += 1
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
                f"{signed(recent.mean())} over {recent.size} cells, {num(abs(recent.mean()) / r.sigma)} "
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
    return (f"MASE {num(r.mase_recent)} recent vs {num(r.mase_reference)} reference "
            f"({num(r.mase_ratio)} times)")


def _one(x: float) -> str:
    return "–" if not np.isfinite(x) else f"{x:+.1f}"


def _short_note(model: str, n_short: int, n_total: int, refs: set[int]) -> Finding:
    window = f"the {min(refs)}-cell reference window" if len(refs) == 1 else "their reference windows"
    text = (f"drift not judged on {n_short} of {n_total} series × horizon sequences: "
            f"no scored cell yet after {window}")
    return Finding(kind="drift", series="", model=model, horizon=None, level=None, since="",
                   figure=float(n_short), evidence=text, check="not enough data", severity="note",
                   horizons="all", measure="sequences not judged", n=n_total)
