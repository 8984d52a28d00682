"""Charts of a model's quantile forecasts: reliability diagram, PIT histogram, WIS decomposition.

Drawn like :mod:`reports.charts` (inline SVG cleaned by :func:`reports.charts.clean_svg`, the
Okabe & Ito palette, text kept as text, deterministic output); colour is never the only cue:
the WIS parts also differ in hatching and the legend names them.
"""

from __future__ import annotations

import io
from collections.abc import Sequence

import matplotlib

matplotlib.use("Agg")
import numpy as np
from matplotlib.backends.backend_svg import FigureCanvasSVG
from matplotlib.figure import Figure

from .charts import BAND, INK, PALETTE, Chart, clean_svg

__all__ = ["reliability_chart", "pit_chart", "wis_parts_chart"]

_STYLE = {
    "svg.fonttype": "none",
    "svg.hashsalt": "backsight-report",
    "text.parse_math": False,
    "font.family": "sans-serif",
    "font.sans-serif": ["DejaVu Sans"],
    "font.size": 9.5,
    "axes.titlesize": 10,
    "axes.titleweight": "bold",
    "axes.titlelocation": "left",
    "axes.edgecolor": "#5B6770",
    "axes.labelcolor": INK,
    "axes.spines.top": False,
    "axes.spines.right": False,
    "axes.grid": True,
    "grid.color": "#E3E6E8",
    "grid.linewidth": 0.6,
    "xtick.color": "#5B6770",
    "ytick.color": "#5B6770",
    "legend.frameon": False,
    "legend.fontsize": 8,
}
_META = {"Date": None, "Creator": None, "Format": None, "Type": None}
_PARTS = (("dispersion", PALETTE[0], ""), ("overprediction (too high)", PALETTE[1], "//"),
          ("underprediction (too low)", PALETTE[2], ".."))


def _figure() -> tuple[Figure, object]:
    fig = Figure(figsize=(6.4, 3.3))
    FigureCanvasSVG(fig)
    ax = fig.subplots()
    fig.subplots_adjust(left=0.12, right=0.97, top=0.88, bottom=0.27)
    return fig, ax


def _render(fig: Figure, chart_id: str, title: str, summary: str) -> Chart:
    buf = io.StringIO()
    fig.savefig(buf, format="svg", metadata=_META)
    return Chart(chart_id, title, summary, clean_svg(buf.getvalue(), chart_id, title))


def reliability_chart(chart_id: str, title: str, summary: str, taus: Sequence[float], shares: Sequence[float],
                      band_low: Sequence[float], band_high: Sequence[float]) -> Chart:
    """Observed share below each quantile against tau; a grey bar per level is its binomial band."""
    with matplotlib.rc_context(_STYLE):
        fig, ax = _figure()
        t = np.asarray(taus, dtype=float)
        ax.plot([0, 1], [0, 1], color=BAND, linewidth=0.9, linestyle=(0, (2, 2)), label="calibrated")
        ax.vlines(t, band_low, band_high, color=BAND, linewidth=6, alpha=0.45, label="95% binomial band")
        ax.plot(t, shares, linestyle="-", marker="o", color=PALETTE[0], markersize=4, label="observed")
        ax.set(title=title, xlabel="Quantile level τ", ylabel="Share of actuals below q_τ", xlim=(0, 1), ylim=(0, 1))
        fig.legend(loc="lower center", ncols=3, bbox_to_anchor=(0.5, 0.0))
        return _render(fig, chart_id, title, summary)


def pit_chart(chart_id: str, title: str, summary: str, edges: Sequence[float], counts: Sequence[int]) -> Chart:
    """PIT histogram as densities (count / (n × bin width)); the dashed line at 1 is uniform."""
    with matplotlib.rc_context(_STYLE):
        fig, ax = _figure()
        e = np.asarray(edges, dtype=float)
        c = np.asarray(counts, dtype=float)
        density = c / (c.sum() * np.diff(e)) if c.sum() else np.zeros_like(c)
        ax.bar(e[:-1], density, width=np.diff(e), align="edge", color=PALETTE[0], edgecolor="white",
               linewidth=0.8, label="PIT density per bin")
        ax.axhline(1.0, color=INK, linewidth=0.9, linestyle=(0, (2, 2)), label="uniform (calibrated)")
        ax.set(title=title, xlabel="PIT (probability integral transform)", ylabel="Density", xlim=(0, 1))
        fig.legend(loc="lower center", ncols=2, bbox_to_anchor=(0.5, 0.0))
        return _render(fig, chart_id, title, summary)


def wis_parts_chart(chart_id: str, title: str, summary: str, buckets: Sequence[str],
                    parts: Sequence[Sequence[float]]) -> Chart:
    """Stacked bars per horizon bucket: dispersion, overprediction, underprediction (they sum to WIS)."""
    with matplotlib.rc_context(_STYLE):
        fig, ax = _figure()
        x = np.arange(len(buckets), dtype=float)
        bottom = np.zeros(len(buckets))
        for (name, colour, hatch), values in zip(_PARTS, parts):
            v = np.nan_to_num(np.asarray(values, dtype=float))
            ax.bar(x, v, 0.6, bottom=bottom, color=colour, edgecolor="white", hatch=hatch, linewidth=0.6, label=name)
            bottom += v
        ax.set_xticks(x, [f"h {b}" for b in buckets])
        ax.grid(axis="x", visible=False)
        ax.set(title=title, xlabel="Horizon bucket", ylabel="Mean WIS (units of the series)")
        fig.legend(loc="lower center", ncols=3, bbox_to_anchor=(0.5, 0.0))
        return _render(fig, chart_id, title, summary)
