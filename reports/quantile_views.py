"""The quantile section of a model page: reliability diagram, PIT histogram, WIS decomposition.

Data comes through the Ledger's read methods (``quantile_cells``, ``wis_by_horizon``) once per
report (:func:`load_quantile_data`); :func:`build_quantile_view` turns one model's part into a
frozen view-model with its charts and sentences. A model without quantile forecasts, or without
any interval, says so instead.
"""

from __future__ import annotations

import dataclasses
import datetime as dt

import numpy as np
import pandas as pd

from ledger import Ledger
from ledger.findings.calibration import bucket_labels
from ledger.findings.quantiles import pit_inputs
from ledger.stats.quantiles import binomial_band, pit_from_quantiles, pit_uniformity
from ledger.wording import plural, pval, quantile_name

from . import quantile_charts
from .charts import Chart
from .text import SMALL_SAMPLE

__all__ = ["QuantileData", "QuantileView", "QuantileRow", "load_quantile_data", "build_quantile_view"]

_BUCKETS = (1, 2, 4, 7, 13)   # the findings' default horizon buckets


@dataclasses.dataclass
class QuantileData:
    """Quantile cells (long: one row per cell and level) and WIS means per model and horizon."""

    cells: pd.DataFrame
    wis: pd.DataFrame


@dataclasses.dataclass(frozen=True)
class QuantileRow:
    """One quantile level of a model: cells, share below, its 95% binomial band."""

    name: str
    tau: float
    n: int
    share: float
    band_low: float
    band_high: float
    outside: bool

    @property
    def texts(self) -> tuple[str, str, str]:
        """tau, share below and band as the table prints them (one decimal: bands are narrow)."""
        return f"{self.tau:g}", f"{self.share:.1%}", f"{self.band_low:.1%}–{self.band_high:.1%}"


@dataclasses.dataclass(frozen=True)
class QuantileView:
    has_quantiles: bool
    has_wis: bool
    note: str
    rows: list[QuantileRow]
    reliability: Chart | None
    pit: Chart | None
    pit_text: str
    wis_chart: Chart | None
    wis_text: str


def load_quantile_data(book: Ledger, *, as_of: dt.datetime, since: str | None, until: str | None,
                       include_excluded: bool = False) -> QuantileData:
    """The report's quantile frames, for the same selection as its scores."""
    q = dict(as_of=as_of, since=since, until=until, include_excluded=include_excluded)
    return QuantileData(cells=book.quantile_cells(**q), wis=book.wis_by_horizon(**q))


def build_quantile_view(data: QuantileData | None, model: str) -> QuantileView:
    """The quantile section of ``model``'s page."""
    cells = data.cells[data.cells["model"] == model] if data is not None else pd.DataFrame()
    wis = data.wis[data.wis["model"] == model] if data is not None else pd.DataFrame()
    chart, wis_text = _wis_chart(model, wis)
    if cells.empty:
        note = f"{model} sent no quantile forecasts, so there is no reliability diagram or PIT histogram."
        return QuantileView(False, chart is not None, note, [], None, None, "", chart, wis_text)
    rows = _rows(cells)
    reliability = quantile_charts.reliability_chart(
        "c-quantile-reliability", f"{model}: share of actuals below each quantile",
        _reliability_summary(rows), [r.tau for r in rows], [r.share for r in rows],
        [r.band_low for r in rows], [r.band_high for r in rows])
    pit, pit_text = _pit(model, cells)
    n_cells = cells[["series", "horizon", "period_index"]].drop_duplicates().shape[0]
    note = (f"{plural(n_cells, 'scored forecast')} with quantiles at {len(rows):,} levels, all horizons pooled"
            + (f"; a small sample (fewer than {SMALL_SAMPLE} cells), read with care." if n_cells < SMALL_SAMPLE else "."))
    return QuantileView(True, chart is not None, note, rows, reliability, pit, pit_text, chart, wis_text)


def _rows(cells: pd.DataFrame) -> list[QuantileRow]:
    per = cells.groupby("tau", sort=True)["below"].agg(["size", "sum"])
    n = per["size"].to_numpy(int)
    taus = per.index.to_numpy(float)
    low, high = binomial_band(n, taus)
    share = per["sum"].to_numpy(float) / n
    return [QuantileRow(quantile_name(t), float(t), int(k), float(s), float(lo), float(hi), bool(s < lo or s > hi))
            for t, k, s, lo, hi in zip(taus, n, share, low, high)]


def _reliability_summary(rows: list[QuantileRow]) -> str:
    outside = [r for r in rows if r.outside]
    shown = ", ".join(f"{r.name}: {r.share:.0%} below (expected {r.tau:.0%}, n {r.n:,})" for r in rows)
    tail = (f" {len(outside):,} of {len(rows):,} levels fall outside their 95% band (pointwise; some fall outside "
            "by chance)." if outside else " Every level is inside its 95% band.")
    return shown + "." + tail


def _pit(model: str, cells: pd.DataFrame) -> tuple[Chart | None, str]:
    y, q, taus = pit_inputs(cells)
    if taus.size < 2 or y.size == 0:
        return None, "Too few common quantile levels to draw a PIT histogram."
    x2, p, counts, widths = pit_uniformity(pit_from_quantiles(y, q, taus=taus), taus=taus)
    edges = np.concatenate([[0.0], np.cumsum(widths)])
    verdict = "not uniform" if p <= 0.05 else "consistent with uniform"
    small = " (small sample)" if y.size * widths.min() < 5 else ""
    text = (f"{y.size:,} actuals{small}; chi-square {x2:.1f} on {widths.size - 1} degrees of freedom, {pval(p)}: "
            f"{verdict} at 5% before any correction for multiple tests. Tall outer bins mean over-confident "
            "quantiles, a hump in the middle too wide ones, a slope a shifted forecast.")
    chart = quantile_charts.pit_chart("c-quantile-pit", f"{model}: PIT histogram", text, edges, counts)
    return chart, text


def _wis_chart(model: str, wis: pd.DataFrame) -> tuple[Chart | None, str]:
    if wis.empty:
        return None, f"{model} has no central interval or quantile pair, so it has no weighted interval score."
    frame = wis.assign(bucket=bucket_labels(wis["horizon"], _BUCKETS))
    order = list(dict.fromkeys(frame["bucket"]))
    parts = []
    for col in ("wis_dispersion", "wis_overprediction", "wis_underprediction"):
        weighted = frame[col] * frame["n_wis"]
        sums = weighted.groupby(frame["bucket"]).sum() / frame.groupby("bucket")["n_wis"].sum()
        parts.append([float(sums[b]) for b in order])
    counts = frame.groupby("bucket")["n_wis"].sum()
    words = "; ".join(f"h {b}: WIS {sum(p[i] for p in parts):.3g} (dispersion {parts[0][i]:.3g}, over "
                      f"{parts[1][i]:.3g}, under {parts[2][i]:.3g}; n {int(counts[b]):,})" for i, b in enumerate(order))
    chart = quantile_charts.wis_parts_chart("c-quantile-wis", f"{model}: weighted interval score by horizon",
                                            words + ".", order, parts)
    return chart, words + "."
