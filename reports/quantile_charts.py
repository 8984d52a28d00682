"""Charts of a model's quantile forecasts: reliability diagram, PIT histogram, WIS decomposition.

Drawn with :mod:`reports.chart_base` (its rc settings, fixed-margin figure with the legend under
the plot, the Okabe & Ito palette, cleaned deterministic inline SVG); colour is never the only
cue: the WIS parts also differ in hatching and the legend names them.
"""

from __future__ import annotations

from collections.abc import Sequence

import matplotlib
import numpy as np

from .chart_base import BAND, INK, LEGEND_COLS, PALETTE, RC, Chart, figure, render

__all__ = ["reliability_chart", "pit_chart", "wis_parts_chart"]

_PARTS = (("dispersion", PALETTE[0], ""), ("overprediction (too high)", PALETTE[1], "//"),
          ("underprediction (too low)", PALETTE[2], ".."))


def reliability_chart(chart_id: str, title: str, summary: str, taus: Sequence[float], shares: Sequence[float],
                      band_low: Sequence[float], band_high: Sequence[float]) -> Chart:
    """Observed share below each quantile against tau; a grey bar per level is its binomial band."""
    with matplotlib.rc_context(RC):
        fig, (ax,) = figure(2.9, 3)
        t = np.asarray(taus, dtype=float)
        ax.plot([0, 1], [0, 1], color=BAND, linewidth=0.9, linestyle=(0, (2, 2)), label="calibrated")
        ax.vlines(t, band_low, band_high, color=BAND, linewidth=6, alpha=0.45, label="95% binomial band")
        ax.plot(t, shares, linestyle="-", marker="o", color=PALETTE[0], markersize=4, label="observed")
        ax.set(title=title, xlabel="Quantile level τ", ylabel="Share of actuals below q_τ", xlim=(0, 1), ylim=(0, 1))
        fig.legend(loc="lower center", ncols=LEGEND_COLS, bbox_to_anchor=(0.5, 0.0))
        return render(fig, chart_id, title, summary)


def pit_chart(chart_id: str, title: str, summary: str, edges: Sequence[float], counts: Sequence[int]) -> Chart:
    """PIT histogram as densities (count / (n × bin width)); the dashed line at 1 is uniform."""
    with matplotlib.rc_context(RC):
        fig, (ax,) = figure(2.9, 3)
        e = np.asarray(edges, dtype=float)
        c = np.asarray(counts, dtype=float)
        density = c / (c.sum() * np.diff(e)) if c.sum() else np.zeros_like(c)
        ax.bar(e[:-1], density, width=np.diff(e), align="edge", color=PALETTE[0], edgecolor="white",
               linewidth=0.8, label="PIT density per bin")
        ax.axhline(1.0, color=INK, linewidth=0.9, linestyle=(0, (2, 2)), label="uniform (calibrated)")
        ax.set(title=title, xlabel="PIT (probability integral transform)", ylabel="Density", xlim=(0, 1))
        fig.legend(loc="lower center", ncols=LEGEND_COLS, bbox_to_anchor=(0.5, 0.0))
        return render(fig, chart_id, title, summary)


def wis_parts_chart(chart_id: str, title: str, summary: str, buckets: Sequence[str],
                    parts: Sequence[Sequence[float]]) -> Chart:
    """Stacked bars per horizon bucket: dispersion, overprediction, underprediction (they sum to WIS)."""
    with matplotlib.rc_context(RC):
        fig, (ax,) = figure(2.9, 3)
        x = np.arange(len(buckets), dtype=float)
        bottom = np.zeros(len(buckets))
        for (name, colour, hatch), values in zip(_PARTS, parts):
            v = np.nan_to_num(np.asarray(values, dtype=float))
            ax.bar(x, v, 0.6, bottom=bottom, color=colour, edgecolor="white", hatch=hatch, linewidth=0.6, label=name)
            bottom += v
        ax.set_xticks(x, [f"h {b}" for b in buckets])
        ax.grid(axis="x", visible=False)
        ax.set(title=title, xlabel="Horizon bucket", ylabel="Mean WIS (units of the series)")
        fig.legend(loc="lower center", ncols=LEGEND_COLS, bbox_to_anchor=(0.5, 0.0))
        return render(fig, chart_id, title, summary)
