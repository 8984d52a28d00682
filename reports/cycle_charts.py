"""Charts of the monthly cycle: revision size by horizon (a column chart per model) and how the
forecasts of a series' last target periods evolved run by run.

Plain matplotlib figures written as SVG with text kept as text, cleaned by
:func:`reports.charts.clean_svg` like every chart of the report; colours from the report's
per-model styles (Okabe & Ito palette).
"""

from __future__ import annotations

import io
from collections.abc import Sequence

import matplotlib
import numpy as np
from matplotlib.backends.backend_svg import FigureCanvasSVG
from matplotlib.figure import Figure

from .charts import BAND, INK, Chart, clean_svg

__all__ = ["revision_columns_chart", "paths_chart"]

_RC = {"svg.fonttype": "none", "svg.hashsalt": "backsight-report", "text.parse_math": False,
       "font.family": "sans-serif", "font.sans-serif": ["DejaVu Sans"], "font.size": 9.5,
       "axes.titlesize": 10, "axes.titleweight": "bold", "axes.titlelocation": "left",
       "axes.spines.top": False, "axes.spines.right": False, "axes.grid": True,
       "grid.color": "#E3E6E8", "grid.linewidth": 0.6, "legend.frameon": False, "legend.fontsize": 8}
_META = {"Date": None, "Creator": None, "Format": None, "Type": None}
_TARGET_DASHES = ("-", "--", "-.", ":")


def _render(fig: Figure, chart_id: str, title: str, summary: str) -> Chart:
    buf = io.StringIO()
    fig.savefig(buf, format="svg", metadata=_META)
    return Chart(chart_id, title, summary, clean_svg(buf.getvalue(), chart_id, title))


def _figure(height: float) -> tuple[Figure, object]:
    fig = Figure(figsize=(6.0, height))
    FigureCanvasSVG(fig)
    ax = fig.subplots()
    fig.subplots_adjust(left=0.12, right=0.97, top=1 - 0.42 / height, bottom=0.75 / height)
    return fig, ax


def revision_columns_chart(chart_id: str, title: str, summary: str, horizons: Sequence[int],
                           values: Sequence[float], color: str) -> Chart:
    """One column per horizon: the mean scaled revision when the target came that close (NaN: no column)."""
    with matplotlib.rc_context(_RC):
        fig, ax = _figure(2.6)
        x = np.arange(len(horizons), dtype=float)
        ax.bar(x, np.asarray(values, dtype=float), 0.7, color=color, edgecolor="white", linewidth=0.6)
        ax.set_xticks(x, [str(h) for h in horizons])
        ax.grid(axis="x", visible=False)
        ax.set(title=title, xlabel="Horizon of the later run", ylabel="Mean |revision| / q")
        return _render(fig, chart_id, title, summary)


def paths_chart(chart_id: str, title: str, summary: str, origin_labels: Sequence[str],
                targets: Sequence[tuple[str, Sequence[float], Sequence[float], float]], color: str) -> Chart:
    """One line per target period: its forecast at each origin (x: position in ``origin_labels``);
    a dashed level at the target's actual where it has arrived."""
    with matplotlib.rc_context(_RC):
        fig, ax = _figure(3.0 + 0.2 * len(targets))
        fig.subplots_adjust(bottom=(0.75 + 0.2 * len(targets)) / fig.get_figheight())
        for i, (label, xs, points, actual) in enumerate(targets):
            dash = _TARGET_DASHES[i % len(_TARGET_DASHES)]
            ax.plot(xs, points, color=color, linestyle=dash, marker="o", markersize=3, linewidth=1.3,
                    alpha=0.55 + 0.45 * (i + 1) / len(targets), label=f"target {label}")
            if np.isfinite(actual):
                ax.hlines(actual, min(xs), max(xs), color=INK, linestyle=dash, linewidth=0.8)
        step = max(1, len(origin_labels) // 8)
        ticks = list(range(0, len(origin_labels), step))
        ax.set_xticks(ticks, [origin_labels[t] for t in ticks])
        ax.axhline(ax.get_ylim()[0], color=BAND, linewidth=0.5)
        ax.set(title=title, xlabel="Origin of the run", ylabel="Forecast of the target")
        fig.legend(loc="lower center", ncols=4, bbox_to_anchor=(0.5, 0.0))
        return _render(fig, chart_id, title, summary)
