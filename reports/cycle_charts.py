"""Charts of the monthly cycle: revision size by horizon (a column chart per model) and how the
forecasts of a series' last target periods evolved run by run.

Built with the report's shared figure, style and SVG helpers (:mod:`reports.chart_base`);
colours from the report's per-model styles (Okabe & Ito palette).
"""

from __future__ import annotations

from collections.abc import Sequence

import matplotlib
import numpy as np

from .chart_base import BAND, INK, RC, Chart, figure, legend, render

__all__ = ["revision_columns_chart", "paths_chart"]

_TARGET_DASHES = ("-", "--", "-.", ":")


def revision_columns_chart(chart_id: str, title: str, summary: str, horizons: Sequence[int],
                           values: Sequence[float], color: str) -> Chart:
    """One column per horizon: the mean scaled revision when the target came that close (NaN: no column)."""
    with matplotlib.rc_context(RC):
        fig, (ax,) = figure(2.6, 0)
        x = np.arange(len(horizons), dtype=float)
        ax.bar(x, np.asarray(values, dtype=float), 0.7, color=color, edgecolor="white", linewidth=0.6)
        ax.set_xticks(x, [str(h) for h in horizons])
        ax.grid(axis="x", visible=False)
        ax.set_axisbelow(True)
        ax.set(title=title, xlabel="Horizon of the later run", ylabel="Mean |revision| / q")
        return render(fig, chart_id, title, summary)


def paths_chart(chart_id: str, title: str, summary: str, origin_labels: Sequence[str],
                targets: Sequence[tuple[str, Sequence[float], Sequence[float], float]], color: str) -> Chart:
    """One line per target period: its forecast at each origin (x: position in ``origin_labels``);
    a dashed level at the target's actual where it has arrived."""
    with matplotlib.rc_context(RC):
        fig, (ax,) = figure(3.0, len(targets))
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
        legend(fig)
        return render(fig, chart_id, title, summary)
