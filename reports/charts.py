"""The report's line, horizon and calibration charts, as inline SVG drawn by matplotlib.

Style, figures and SVG cleaning are shared with the other charts in :mod:`reports.chart_base`
(Okabe & Ito (2008) palette, a line style per model, deterministic output with no URL); the
series chart with its fast reused canvas is :mod:`reports.series_chart`, re-exported here.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Mapping, Sequence

import matplotlib
import numpy as np

from ledger.wording import format_level

from .chart_base import (BAND, INK, LEGEND_CHARS, LEGEND_COLS, PALETTE, RC, Chart, clean_svg, figure, legend,
                         model_styles, render, short, ticks)
from .series_chart import Fan, legend_entries, series_chart

__all__ = [
    "LEVEL_PALETTE",
    "level_styles",
    "trend_chart",
    "BAND",
    "INK",
    "PALETTE",
    "CalibrationPoint",
    "Chart",
    "Fan",
    "calibration_chart",
    "clean_svg",
    "horizon_chart",
    "legend_entries",
    "lines_chart",
    "model_styles",
    "series_chart",
]


#: Interval levels get their own colours, never a model's: ColorBrewer "Purples" shades (Harrower &
#: Brewer 2003, ColorBrewer.org; from memory), dark for the first level, with their own dashes.
LEVEL_PALETTE = ("#54278f", "#9e9ac8", "#3f007d", "#807dba")
_LEVEL_DASHES = ("-", (0, (4, 2)), (0, (1, 1.5)), "-.")


def level_styles(names: Sequence[str]) -> dict[str, dict]:
    """Colour, dash and marker per interval level (names in ascending level order)."""
    return {n: {"color": LEVEL_PALETTE[i % len(LEVEL_PALETTE)], "linestyle": _LEVEL_DASHES[i % len(_LEVEL_DASHES)],
                "marker": ("o", "s", "^", "D")[i % 4]} for i, n in enumerate(names)}


def lines_chart(chart_id: str, title: str, summary: str, periods: Sequence[str],
                values: Mapping[str, Sequence[float]], styles: Mapping[str, dict], *,
                ylabel: str, xlabel: str = "Evaluation period (target period of the forecasts)",
                reference: float | None = None, percent: bool = False) -> Chart:
    """One line per model over evaluation periods; NaN leaves a gap (never bridged)."""
    with matplotlib.rc_context(RC):
        fig, (ax,) = figure(3.0, len(values))
        x = np.arange(len(periods))
        for model, ys in values.items():
            st = styles[model]
            ax.plot(x, np.asarray(ys, dtype=float) * (100 if percent else 1), label=short(model),
                    color=st["color"], linestyle=st["linestyle"], marker=st["marker"], markersize=2.5)
        if reference is not None:
            ax.axhline(reference, color=BAND, linewidth=0.9, linestyle=(0, (2, 2)))
        ticks(ax, periods, x)
        ax.set(title=title, ylabel=ylabel, xlabel=xlabel)
        if percent:
            ax.set_ylim(-2, 102)
        legend(fig)
        return render(fig, chart_id, title, summary)


def horizon_chart(chart_id: str, title: str, summary: str, horizons: Sequence[int],
                  values: Mapping[str, Sequence[float]], styles: Mapping[str, dict], *, ylabel: str,
                  references: Sequence[float] = (), legend_cols: int = LEGEND_COLS) -> Chart:
    """One line per model (or level) across horizons; ``references`` draws dotted guide lines;
    fewer ``legend_cols`` leave room for longer labels (a style's optional ``fill`` colours the
    marker's face, so one colour can draw two lines apart)."""
    with matplotlib.rc_context(RC):
        fig, (ax,) = figure(2.8, len(values), cols=legend_cols)
        for model, ys in values.items():
            st = styles[model]
            ax.plot(list(horizons), list(ys), label=short(model, LEGEND_CHARS // legend_cols), color=st["color"],
                    linestyle=st["linestyle"], marker=st["marker"], markersize=3.5,
                    markerfacecolor=st.get("fill", st["color"]))
        for ref in references:
            ax.axhline(ref, color=BAND, linewidth=0.9, linestyle=(0, (1, 2)))
        ax.set_xticks(list(horizons))
        ax.set(title=title, ylabel=ylabel, xlabel="Horizon h (periods ahead of the origin)")
        legend(fig, legend_cols)
        return render(fig, chart_id, title, summary)


def trend_chart(chart_id: str, title: str, summary: str, periods: Sequence[str],
                raw: Mapping[str, Sequence[float]], smooth: Mapping[str, Sequence[float]],
                styles: Mapping[str, dict], *, ylabel: str, marks: Mapping[str, Sequence[int]] | None = None,
                reference: float | None = None, percent: bool = False) -> Chart:
    """Per model a smoothed line over evaluation periods, its raw per-period values faint behind,
    and ``marks`` (positions in ``periods``) as ticks on the time axis in the model's colour, e.g.
    change points of drift findings. NaN leaves a gap."""
    scale = 100 if percent else 1
    with matplotlib.rc_context(RC):
        fig, (ax,) = figure(3.0, len(smooth) + (1 if marks else 0))
        x = np.arange(len(periods))
        for model, ys in raw.items():
            ax.plot(x, np.asarray(ys, dtype=float) * scale, color=styles[model]["color"], linewidth=0.7, alpha=0.25)
        for model, ys in smooth.items():
            st = styles[model]
            ax.plot(x, np.asarray(ys, dtype=float) * scale, label=short(model), color=st["color"],
                    linestyle=st["linestyle"], linewidth=1.8)
        if reference is not None:
            ax.axhline(reference, color=BAND, linewidth=0.9, linestyle=(0, (2, 2)))
        if percent:
            ax.set_ylim(-2, 102)
        if marks and any(len(v) for v in marks.values()):
            ymin, ymax = ax.get_ylim()
            for k, (model, where) in enumerate(marks.items()):
                ax.plot(list(where), [ymin + (0.02 + 0.035 * k) * (ymax - ymin)] * len(where), linestyle="none",
                        marker="|", markersize=7, color=styles[model]["color"])
            ax.plot([], [], linestyle="none", marker="|", color=INK, label="drift change point")
            ax.set_ylim(ymin, ymax)
        ticks(ax, periods, x)
        ax.set(title=title, ylabel=ylabel, xlabel="Evaluation period (target period of the forecasts)")
        legend(fig)
        return render(fig, chart_id, title, summary)


@dataclasses.dataclass(frozen=True)
class CalibrationPoint:
    """Observed coverage of one model at one nominal level, with its binomial tolerance band (%)."""

    model: str
    level: float
    observed: float
    band_low: float
    band_high: float
    n: int


def calibration_chart(chart_id: str, title: str, summary: str, points: Sequence[CalibrationPoint],
                      styles: Mapping[str, dict], *, xlabel: str = "Nominal coverage of the interval (%)") -> Chart:
    """Observed against nominal coverage; a grey bar per point is its tolerance band."""
    with matplotlib.rc_context(RC):
        fig, (ax,) = figure(3.2, len({p.model for p in points}) + 1)
        models = list(dict.fromkeys(p.model for p in points))
        levels = sorted({p.level for p in points})
        lo, hi = (min(levels) - 10, 100) if levels else (0, 100)
        ax.plot([lo, hi], [lo, hi], color=BAND, linewidth=0.9, linestyle=(0, (2, 2)), label="as stated")
        width = 6.0 / max(len(models), 1)
        # markers are spread sideways so they do not hide each other; a short dashed tick at each
        # level marks "as stated" level with them, so none seems off the diagonal
        span = width * max(len(models), 1) / 2 + 0.6
        ax.hlines(levels, [v - span for v in levels], [v + span for v in levels], color=BAND, linewidth=0.9,
                  linestyles=(0, (2, 2)))
        for i, model in enumerate(models):
            st = styles[model]
            mine = [p for p in points if p.model == model]
            xs = [p.level + (i - (len(models) - 1) / 2) * width for p in mine]
            ax.vlines(xs, [p.band_low for p in mine], [p.band_high for p in mine], color=BAND,
                      linewidth=5, alpha=0.45)
            ax.plot(xs, [p.observed for p in mine], linestyle="none", marker=st["marker"],
                    color=st["color"], markersize=5, label=short(model))
        ax.set_xticks(levels, [f"{format_level(v)}%" for v in levels])
        ax.set(title=title, xlabel=xlabel, ylabel="Observed coverage (%)")
        ax.set_xlim(lo, hi + 3)
        legend(fig)
        return render(fig, chart_id, title, summary)
