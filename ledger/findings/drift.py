"""Drift findings: a sustained change of bias or of error size, found over the whole record and
dated where it starts; one finding per series × model, or one per model when many of its series
change at one time.

Per series × model × horizon sequence (scored cells ordered by target period, at least
``min_cells`` of them) two tests of :mod:`ledger.stats.changepoint` run over every cell, with no
reference window: the bias scan (mean error moving away from zero, the target of an unbiased
forecast, so a model biased from its first run is found too; the GLS likelihood-ratio scan
under AR(1) errors) and the size test (a rise of sqrt(|e|/q)). Both use the autocorrelation
pooled over the model's series at that horizon (the scan whitens the errors with it, the size
test widens its long-run variance) (at least :data:`POOL_MIN` sequences; fewer: each sequence's own), because
multi-step errors overlap and one short record cannot estimate it well. A sequence's p-value is
the Bonferroni minimum of its two tests; all sequences of one ``flags`` call form one family
under Benjamini-Hochberg (``fdr``). The start of the change is the maximiser of the test that
gave the smaller p-value. A Page (1954) CUSUM on the errors standardised by the in-control
estimates (bias: the errors whitened with the pooled autocorrelation, centre 0, their
innovation spread; size: sqrt(|e|/q) about its median before the change; ``drift_k``,
``drift_h``) runs over the record: ``raised`` is where a monthly monitor would have sounded
(its first alarm from the start of the change on), and the evidence also gives the start the
CUSUM itself dates (its last zero before the alarm, not the alarm).

The tracking signal and Trigg's signal are shown in the evidence, never used to raise a finding.
Sign convention: e = actual - forecast, a positive mean error means forecasts too low.

Severity: ``act`` when the change costs at least :data:`ACT_SHARE` (10%) of the affected cells'
scaled absolute error in the recent window (common practice, no source), else ``watch``.
Impact (see :mod:`ledger.findings.base`): bias, sum over cells since the change (recent window)
of |e|/q - |e - b|/q, b the mean error since the change; size, sum of |e|/q - the mean |e|/q
before the change, floored at 0. Figure: MASE since the change / MASE before it.

Consolidation: when at least :data:`CONSOLIDATE_MIN` series of one model change in the same
direction within :data:`CONSOLIDATE_SPAN` periods of the first of them, one model-level finding
lists them (``series_list``), dated at their median date; its impact is their sum.
"""

from __future__ import annotations

import dataclasses

import numpy as np
from ..lazy import pandas as pd

from ..stats.changepoint import (MIN_SEGMENT, bias_scan, bonferroni_pair, cusum_onset, residual_phi, robust_spread,
                                 size_shift, whiten)
from ..stats.intervals import benjamini_hochberg
from ..stats.signals import tracking_signal, trigg_signal, tracking_window
from .base import Finding, FlagOptions, horizon_text
from ..wording import label, pval, short_num as num, signed
from ..stats.recalibration import corrected_mae
from .drift_actions import SeriesIndex, best_other, share

__all__ = ["drift_findings", "sequence_tests", "SEQUENCE_COLUMNS", "horizon_ranges", "POOL_MIN", "ACT_SHARE", "CONSOLIDATE_MIN", "CONSOLIDATE_SPAN"]

POOL_MIN = 5
ACT_SHARE = 0.10
CONSOLIDATE_MIN = 3
CONSOLIDATE_SPAN = 2


@dataclasses.dataclass
class _Seq:
    """One tested sequence: where it is, its cells (positions in the sorted frame) and results."""

    model: str
    series: str
    horizon: int
    idx: np.ndarray
    p: float = 1.0
    bias: bool = True
    start: int = 0
    shift: float = 0.0
    lrv: float = np.nan
    phi: float = 0.0


#: One row per series × model × horizon sequence, from :func:`sequence_tests`.
SEQUENCE_COLUMNS = ("model", "series", "horizon", "n", "judged", "p", "bias", "start", "shift", "lrv", "phi")


def sequence_tests(cells: pd.DataFrame, options: FlagOptions) -> pd.DataFrame:
    """The two change-point tests of every series × model × horizon sequence in ``cells``.

    ``cells`` (columns model, series, horizon, period_index, e, q; any order) must hold whole
    model × horizon groups: the autocorrelation is pooled over a model × horizon, so the tests of
    one group depend on that group's cells alone. They run group by group here, so the result
    is the same bit for bit whether all cells come at once (DuckDB) or one group at a time
    (Spark's grouped pandas UDFs, :meth:`ledger.scoring.spark.SparkLake.apply_in_groups`).
    Columns :data:`SEQUENCE_COLUMNS`, sorted by model, series, horizon; ``judged`` is False (and
    the results NaN) for a sequence shorter than the tests need.
    """
    ordered = cells.sort_values(["model", "series", "horizon", "period_index"], kind="stable").reset_index(drop=True)
    cols = _columns(ordered)
    need = max(options.min_cells, 2 * MIN_SEGMENT + 2)
    seqs, pairs = [], {}
    for (model, series, horizon), idx in ordered.groupby(["model", "series", "horizon"], sort=True).indices.items():
        q = _Seq(str(model), str(series), int(horizon), idx, p=np.nan, start=-1, shift=np.nan, phi=np.nan)
        seqs.append(q)
        if idx.size >= need:
            pairs.setdefault((q.model, q.horizon), []).append(q)
    for members in pairs.values():
        _test_all(members, cols)
    judged = [q.idx.size >= need for q in seqs]
    return pd.DataFrame({
        "model": pd.Series([q.model for q in seqs], dtype=object),
        "series": pd.Series([q.series for q in seqs], dtype=object),
        "horizon": np.array([q.horizon for q in seqs], dtype=np.int64),
        "n": np.array([q.idx.size for q in seqs], dtype=np.int64),
        "judged": np.array(judged, dtype=bool),
        "p": np.array([q.p for q in seqs], dtype=float),
        "bias": np.array([q.bias for q in seqs], dtype=bool),
        "start": np.array([q.start for q in seqs], dtype=np.int64),
        "shift": np.array([q.shift for q in seqs], dtype=float),
        "lrv": np.array([q.lrv for q in seqs], dtype=float),
        "phi": np.array([q.phi for q in seqs], dtype=float),
    }, columns=list(SEQUENCE_COLUMNS))


def drift_findings(cells: pd.DataFrame, seasons: dict[str, int], options: FlagOptions, *,
                   subjects=None, recent_from: dict[str, int] | None = None, total: float = np.nan,
                   tested: pd.DataFrame | None = None) -> list[Finding]:
    """Drift findings for the models in ``subjects`` (None: every model in ``cells``).

    ``cells``: scored cells of every model (``Ledger.cells``), so that a finding can name a model
    that was more accurate since the change. ``recent_from``: first period index of the recent
    window per frequency (default: the last ``options.recent`` periods of each frequency).
    ``total``: the ledger's sum of |e|/q over the recent window, the denominator of impact.
    ``tested``: :func:`sequence_tests` of the subjects' cells when computed elsewhere (on Spark's
    executors); None computes it here.
    """
    ordered = cells.sort_values(["model", "series", "horizon", "period_index"], kind="stable").reset_index(drop=True)
    cols = _columns(ordered)
    recent_from = recent_from or _recent_from(ordered, options.recent)
    wanted = set(ordered["model"]) if subjects is None else set(subjects)
    if tested is None:
        tested = sequence_tests(ordered[ordered["model"].isin(wanted)], options)
    tested = tested[tested["model"].isin(wanted)].sort_values(["model", "series", "horizon"], kind="stable")
    groups = ordered.groupby(["model", "series", "horizon"], sort=True).indices
    seqs, short = [], {}
    for row in tested.itertuples(index=False):
        counts = short.setdefault(str(row.model), [0, 0])
        counts[1] += 1
        if not row.judged:
            counts[0] += 1
            continue
        seqs.append(_Seq(str(row.model), str(row.series), int(row.horizon), groups[(row.model, row.series, row.horizon)],
                         p=float(row.p), bias=bool(row.bias), start=int(row.start), shift=float(row.shift),
                         lrv=float(row.lrv), phi=float(row.phi)))
    if seqs:
        adjusted = benjamini_hochberg(np.array([q.p for q in seqs]))
        flagged = [(q, a) for q, a in zip(seqs, adjusted) if a <= options.fdr]
    else:
        flagged = []
    per_pair: dict[tuple[str, str], list] = {}
    for q, adj in flagged:
        per_pair.setdefault((q.model, q.series), []).append(_assess(q, adj, cols, recent_from, options))
    index = SeriesIndex(ordered)
    found = [_pair_finding(items, index, cols, total, _signal_options(items[0].seq, seasons, options))
             for items in per_pair.values()]
    out = _consolidate(found)
    out += [_short_note(model, *c, options) for model, c in short.items() if c[0]]
    return out


def _columns(cells: pd.DataFrame) -> dict[str, np.ndarray]:
    e = cells["e"].to_numpy(dtype=float)
    q = cells["q"].to_numpy(dtype=float, na_value=np.nan)
    with np.errstate(divide="ignore", invalid="ignore"):
        s = np.where(q > 0, np.abs(e) / q, np.nan)
    return {"e": e, "s": s, "q": np.where(q > 0, q, np.nan), "period_index": cells["period_index"].to_numpy(),
            "frequency": cells["frequency"].to_numpy(dtype=object), "model": cells["model"].to_numpy(dtype=object),
            "series": cells["series"].to_numpy(dtype=object), "horizon": cells["horizon"].to_numpy()}


def _recent_from(cells: pd.DataFrame, recent: int) -> dict[str, int]:
    if cells.empty:
        return {}
    newest = cells.groupby("frequency")["period_index"].max()
    return {str(f): int(v) - recent + 1 for f, v in newest.items()}


def _size_values(cols: dict, idx: np.ndarray) -> np.ndarray:
    """sqrt(|e|/q) of a sequence; cells without a scale use the sequence's median scale."""
    s = cols["s"][idx]
    if np.isnan(s).any():
        q = cols["q"][idx]
        fill = np.nanmedian(q) if np.isfinite(q).any() else np.mean(np.abs(cols["e"][idx])) or 1.0
        s = np.where(np.isnan(s), np.abs(cols["e"][idx]) / fill, s)
    return np.sqrt(s)


def _test_all(seqs: list[_Seq], cols: dict) -> None:
    """Run both tests on every sequence, stacked by length; autocorrelation pooled per model × horizon."""
    by_length: dict[int, list[int]] = {}
    for i, q in enumerate(seqs):
        by_length.setdefault(q.idx.size, []).append(i)
    stacks = {n: (np.stack([cols["e"][seqs[i].idx] for i in members]),
                  np.stack([_size_values(cols, seqs[i].idx) for i in members])) for n, members in by_length.items()}
    phis = {"scan": np.zeros(len(seqs)), "size": np.zeros(len(seqs))}
    for n, members in by_length.items():
        e, g = stacks[n]
        phis["scan"][members] = residual_phi("scan", e)
        phis["size"][members] = residual_phi("size", g)
    pooled = _pooled(seqs, phis)
    for n, members in by_length.items():
        e, g = stacks[n]
        use_b, use_s = pooled["scan"][members], pooled["size"][members]
        b, s = _both(bias_scan, e, use_b), _both(size_shift, g, use_s)
        p = bonferroni_pair(b[0], s[0])
        for j, i in enumerate(members):
            q = seqs[i]
            q.p = float(p[j])
            q.bias = bool(b[0][j] <= s[0][j])
            q.start = int(b[1][j] if q.bias else s[1][j])
            q.shift, q.lrv, q.phi = float(b[2][j]), float(b[3][j]), float(b[4][j])


def _pooled(seqs: list[_Seq], phis: dict) -> dict[str, np.ndarray]:
    """Per sequence, the mean autocorrelation over its model × horizon (NaN: too few to pool)."""
    keys = [(q.model, q.horizon) for q in seqs]
    out = {}
    for test, values in phis.items():
        frame = pd.DataFrame({"k": keys, "v": values})
        stats_ = frame.groupby("k")["v"].agg(["mean", "size"])
        mean = frame["k"].map(stats_["mean"]).to_numpy(dtype=float)
        size = frame["k"].map(stats_["size"]).to_numpy()
        out[test] = np.where(size >= POOL_MIN, mean, np.nan)
    return out


def _both(test, x: np.ndarray, phi: np.ndarray) -> tuple[np.ndarray, ...]:
    """(p, start, shift, lrv, phi) of ``test`` on rows of x, pooled autocorrelation where given, own elsewhere."""
    p, start, shift, lrv, used = (np.empty(x.shape[0]) for _ in range(5))
    for given in (True, False):
        rows = np.flatnonzero(np.isfinite(phi) == given)
        if rows.size == 0:
            continue
        r = test(x[rows], phi=phi[rows]) if given else test(x[rows])
        p[rows], start[rows], shift[rows], lrv[rows], used[rows] = r.p_value, r.start, r.shift, r.lrv, r.phi
    return p, start.astype(int), shift, lrv, used


@dataclasses.dataclass
class _Assessed:
    seq: _Seq
    adjusted: float
    since: int  # period index where the change starts
    raised: int | None
    onset: int | None  # period index where the CUSUM dates the change (its last zero before the alarm)
    mean_after: float
    mase_before: float
    mase_after: float
    excess: float  # recent-window excess sum of |e|/q
    affected: float  # recent-window sum of |e|/q of the cells since the change
    n_after: int


def _assess(q: _Seq, adjusted: float, cols: dict, recent_from: dict, options: FlagOptions) -> _Assessed:
    e, s, periods = cols["e"][q.idx], cols["s"][q.idx], cols["period_index"][q.idx]
    after = np.arange(q.idx.size) >= q.start
    freq = str(cols["frequency"][q.idx[0]])
    recent = after & (periods >= recent_from.get(freq, periods.min()))
    mean_after = float(e[after].mean())
    before = s[~after & np.isfinite(s)]
    mase_before = float(before.mean()) if before.size else np.nan
    s_recent = s[recent & np.isfinite(s)]
    if q.bias:
        qs = cols["q"][q.idx][recent]
        ok = np.isfinite(qs)
        excess = max(0.0, float(np.sum(np.abs(e[recent][ok]) / qs[ok] - np.abs(e[recent][ok] - mean_after) / qs[ok])))
    else:
        excess = float(max(0.0, np.sum(s_recent - mase_before))) if np.isfinite(mase_before) else 0.0
    alarm, onset = _monitor(q, e, cols, options)
    return _Assessed(q, adjusted, int(periods[q.start]), None if alarm is None else int(periods[alarm]),
                     None if onset is None else int(periods[onset]),
                     mean_after, mase_before, float(np.nanmean(s[after])) if np.isfinite(s[after]).any() else np.nan,
                     excess, float(s_recent.sum()), int(after.sum()))


def _monitor(q: _Seq, e: np.ndarray, cols: dict, options: FlagOptions) -> tuple[int | None, int | None]:
    """(alarm, onset) cells of the CUSUM kept for the newest periods, in the direction of the change.

    Bias: the errors whitened with the autocorrelation the test used and divided by their
    innovation spread, sqrt(lrv) (1 - phi), so in control they are iid with mean 0 and sd 1
    (the CUSUM's design) and the whitened step is (1 - phi) mu per cell. Size: sqrt(|e|/q)
    standardised by its median and :func:`robust_spread` (MAD-fenced) over the cells before
    the change (robust in-control estimates; at least 4 cells, else no monitor). The alarm is the first crossing of
    ``drift_h`` from the scan's start on; the onset dates the change (:func:`cusum_onset`).
    """
    if q.bias:
        spread = np.sqrt(q.lrv) * (1 - q.phi) if q.lrv > 0 else 0.0
        if not spread > 0:
            return None, None
        z, upward = whiten(e, q.phi) / spread, q.shift > 0
    else:
        g = _size_values(cols, q.idx)
        before = g[: q.start]
        if before.size < 4:
            return None, None
        scale = robust_spread(before)
        if not scale > 0:
            return None, None
        z, upward = (g - np.median(before)) / scale, True
    return cusum_onset(z, k=options.drift_k, h=options.drift_h, upward=upward, from_cell=q.start)


def _signal_options(q: _Seq, seasons: dict[str, int], options: FlagOptions) -> tuple[int, float]:
    return options.ts_window or tracking_window(int(seasons.get(q.series, 1))), options.trigg_alpha


def _pair_finding(items: list[_Assessed], index: SeriesIndex, cols: dict, total: float,
                  signal: tuple[int, float]) -> tuple[Finding, int, str]:
    """One finding per series × model: the lowest flagged horizon speaks, the others are listed."""
    items = sorted(items, key=lambda a: a.seq.horizon)
    lead, q = items[0], items[0].seq
    freq = str(cols["frequency"][q.idx[0]])
    since = label(lead.since, freq)
    hs = [a.seq.horizon for a in items]
    e, periods = cols["e"][q.idx], cols["period_index"][q.idx]
    if q.bias:
        direction = "forecasts too low" if lead.mean_after > 0 else "forecasts too high"
        head = (f"{direction} since {since} at horizon {q.horizon}: mean error {signed(lead.mean_after)} "
                f"over {lead.n_after:,} cells, {num(abs(lead.mean_after) / np.sqrt(lead.seq.lrv))} times the "
                "long-run spread")
        check = "bias"
    else:
        head = f"errors grew since {since} at horizon {q.horizon}"
        check = "deterioration"
    text = (f"{head}; {_mase_text(lead)}; change-point test adjusted {pval(lead.adjusted)}; tracking signal "
            f"{_one(tracking_signal(e, window=signal[0]))}, Trigg {signed(float(trigg_signal(e, alpha=signal[1])[-1]))}")
    if lead.raised is not None:
        text += (f"; a CUSUM monitor would have sounded in {label(lead.raised, freq)}, dating the change from "
                 f"{label(lead.onset, freq)}")
    if len(hs) > 1:
        text += f"; flagged at {len(hs):,} horizons in all ({horizon_ranges(hs)})"
    excess, affected = sum(a.excess for a in items), sum(a.affected for a in items)
    action, figure, measure = _action(lead, index, cols, hs)
    severity = "act" if affected > 0 and excess >= ACT_SHARE * affected else "watch"
    found = Finding(kind="drift", series=q.series, model=q.model, horizon=q.horizon, level=None, since=since,
                    figure=_ratio(lead), evidence=text, check=check, severity=severity,
                    horizons=horizon_ranges(hs), raised="" if lead.raised is None else label(lead.raised, freq),
                    measure="MASE since / before the change", p_value=lead.adjusted, n=lead.n_after,
                    impact=share(excess, total), action=action, action_figure=figure, action_measure=measure)
    return found, lead.since, head.split(" since ")[0]


def _action(lead: _Assessed, index: SeriesIndex, cols: dict, hs: list[int]) -> tuple[str, float, str]:
    q = lead.seq
    freq = str(cols["frequency"][q.idx[0]])
    since = label(lead.since, freq)
    other = best_other(index, q.model, q.series, hs, lead.since)
    rival = (f"; {other[0]} has been more accurate since then (MAE {num(other[1])} against {num(other[2])} "
             f"on {other[3]} common cells)") if other else "; no other model in the ledger was more accurate since then"
    if q.bias:
        fixed, plain, n = corrected_mae(cols["e"][q.idx][q.start:])
        if np.isfinite(fixed):
            return (f"correct the bias since {since} (mean error {signed(lead.mean_after)}): a constant correction "
                    f"fitted on earlier cells gives MAE {num(fixed)} against {num(plain)} on the {n:,} later cells"
                    f"{rival}", fixed, "MAE after a constant correction")
    if other:
        return f"since {since}{rival}; re-fit the model or switch", other[1], f"MAE of {other[0]} since the change"
    return f"since {since} errors are larger; re-fit the model{rival}", lead.mase_after, "MASE since the change"


def _ratio(a: _Assessed) -> float:
    return a.mase_after / a.mase_before if a.mase_before > 0 else np.nan


def _mase_text(a: _Assessed) -> str:
    if not np.isfinite(a.mase_after):
        return "MASE not available (no scale)"
    if not np.isfinite(a.mase_before):
        return f"MASE {num(a.mase_after)} since the first cell (no cells before the change)"
    return f"MASE {num(a.mase_after)} since vs {num(a.mase_before)} before ({num(_ratio(a))} times)"


def _one(x: float) -> str:
    return "–" if not np.isfinite(x) else f"{x:+.1f}"


def horizon_ranges(hs: list[int]) -> str:
    """[1, 2, 3, 5] -> '1–3, 5'."""
    return horizon_text(hs).split(" ", 1)[1]


def _consolidate(found: list[tuple[Finding, int, str]]) -> list[Finding]:
    """Many series of one model changing the same way at one time: one model-level finding."""
    out, by_model = [], {}
    for f, since, direction in found:
        by_model.setdefault((f.model, direction), []).append((since, f))
    for (model, direction), group in by_model.items():
        group.sort(key=lambda x: x[0])
        clusters, current = [], [group[0]]
        for item in group[1:]:
            if item[0] - current[0][0] <= CONSOLIDATE_SPAN:
                current.append(item)
            else:
                clusters.append(current)
                current = [item]
        clusters.append(current)
        for c in clusters:
            members = [f for _, f in c]
            out += [_merged(members, direction)] if len(members) >= CONSOLIDATE_MIN else members
    return out


def _merged(group: list[Finding], head: str) -> Finding:
    series = sorted(f.series for f in group)
    lead = max(group, key=lambda f: f.impact)
    impact = sum(f.impact for f in group)
    names = ", ".join(series)
    what = head if head.startswith("forecasts") else "errors grew"
    # The common change is dated at the members' median date (group is in date order): each
    # member's date errs either way, and the earliest of several errs early.
    since = group[(len(group) - 1) // 2].since
    text = (f"{what} on {len(series):,} series from about {since}: {names}; the largest "
            f"({lead.series}): {lead.evidence}")
    severity = "act" if any(f.severity == "act" for f in group) else "watch"
    action = f"{len(series):,} series changed together, so look for a common cause; for {lead.series}: {lead.action}"
    return dataclasses.replace(lead, series="", evidence=text, severity=severity, impact=impact, action=action,
                               series_list=names, since=since, n=sum(f.n for f in group),
                               horizons=horizon_ranges(sorted({h for f in group for h in _hs(f.horizons)})))


def _hs(text: str) -> list[int]:
    out = []
    for part in text.split(","):
        lo, _, hi = part.strip().partition("–")
        out += list(range(int(lo), int(hi or lo) + 1))
    return out


def _short_note(model: str, n_short: int, n_total: int, options: FlagOptions) -> Finding:
    need = max(options.min_cells, 2 * MIN_SEGMENT + 2)
    text = (f"drift not judged on {n_short:,} of {n_total:,} series × horizon sequences: fewer than {need:,} "
            "scored cells each; not enough data to judge")
    return Finding(kind="drift", series="", model=model, horizon=None, level=None, since="",
                   figure=float(n_short), evidence=text, check="not enough data", severity="note",
                   horizons="all", measure="sequences not judged", n=n_total)
