"""The groups page's chart: MASE per group and model as grouped bars, the weighted MASE marked on each bar.

Same style as :mod:`reports.chart_base` (its rc settings, fixed-margin figure, legend under the
plot, Okabe & Ito (2008) palette per model, cleaned inline SVG). Colour is never the only cue:
every model's bars also get their own hatch pattern, in the order of the model list.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence

import matplotlib
import numpy as np

from .chart_base import BAND, INK, LEGEND_COLS, RC, Chart, figure, render, short

__all__ = ["MAX_GROUPS_DRAWN", "group_bars_chart"]

#: Groups drawn at most (the table lists every group); the summary says when some are left out.
MAX_GROUPS_DRAWN = 30
_HATCHES = ("", "//", "..", "xx", "\\\\", "oo", "--")
_ROTATE_FROM = 6      # groups; from this many on, tick labels are slanted to fit


def group_bars_chart(chart_id: str, title: str, summary: str, groups: Sequence[str],
                     values: Mapping[str, Sequence[float]], weighted: Mapping[str, Sequence[float]],
                     styles: Mapping[str, dict], *, ylabel: str, xlabel: str, weighted_label: str,
                     reference: float | None = 1.0) -> Chart:
    """One bar per model in each group (``values``); a white diamond on it for ``weighted``.

    NaN draws no bar (or no marker); a dashed line marks ``reference`` (MASE 1: as large as
    the in-sample seasonal-naive error).
    """
    slanted = len(groups) >= _ROTATE_FROM
    extra = 0.75 if slanted else 0.0
    with matplotlib.rc_context(RC):
        fig, (ax,) = figure(3.0 + extra, len(values) + 1)
        fig.subplots_adjust(bottom=fig.subplotpars.bottom + extra / fig.get_figheight())
        x = np.arange(len(groups), dtype=float)
        k = max(len(values), 1)
        width = 0.8 / k
        offsets = {model: x + (i - (k - 1) / 2) * width for i, model in enumerate(values)}
        for i, (model, ys) in enumerate(values.items()):
            ax.bar(offsets[model], np.asarray(ys, dtype=float), width * 0.92, color=styles[model]["color"],
                   edgecolor="white", linewidth=0.6, hatch=_HATCHES[i % len(_HATCHES)], label=short(model))
        for i, model in enumerate(values):
            ax.plot(offsets[model], np.asarray(weighted.get(model, [np.nan] * len(groups)), dtype=float),
                    linestyle="none", marker="D", markersize=4.5, markerfacecolor="white", markeredgecolor=INK,
                    markeredgewidth=1.0, label=weighted_label if i == 0 else None)
        if reference is not None:
            ax.axhline(reference, color=BAND, linewidth=0.9, linestyle=(0, (2, 2)))
        ax.set_xticks(x, [short(g, 12 if slanted else 18) for g in groups], rotation=40 if slanted else 0,
                      ha="right" if slanted else "center", rotation_mode="anchor" if slanted else "default")
        ax.grid(axis="x", visible=False)
        ax.set(title=title, ylabel=ylabel, xlabel=xlabel)
        handles, labels = ax.get_legend_handles_labels()
        order = sorted(range(len(labels)), key=lambda j: labels[j] == weighted_label)   # models first
        fig.legend([handles[j] for j in order], [labels[j] for j in order], loc="lower center",
                   ncols=LEGEND_COLS, bbox_to_anchor=(0.5, 0.0))
        return render(fig, chart_id, title, summary)
