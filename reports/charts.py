"""Charts as inline SVG, drawn by matplotlib (Agg backend, text kept as text).

Every chart has a title, labelled axes with units, and a plain-text summary that the page shows
in a ``<figcaption>`` and links with ``aria-describedby``. Output is deterministic: a fixed
``svg.hashsalt``, no date or creator metadata, ids prefixed per chart so several charts can
share one page. Matplotlib's XML prologue, DOCTYPE, namespace URIs, metadata block and global
``<style>`` are removed, so the page holds no URL of any kind.

Palette: the eight colours of Okabe & Ito (2008) "Color Universal Design (CUD): how to make
figures and presentations that are friendly to colorblind people" (yellow left out: too pale on
white), reordered; every model also gets its own line style so colour is never the only cue.
"""

from __future__ import annotations

import dataclasses
import io
import math
import re
from collections.abc import Mapping, Sequence
from html import escape

import matplotlib

matplotlib.use("Agg")
import numpy as np
from matplotlib.figure import Figure
from matplotlib.patches import Polygon
from matplotlib.ticker import MaxNLocator

__all__ = [
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

#: Okabe & Ito (2008) colours in the order Backsight assigns them to models.
PALETTE = ("#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9", "#000000")
INK = "#1F2A36"      # actuals and text
BAND = "#8A9BA8"     # tolerance bands and reference lines
_DASHES = ("-", "--", "-.", ":", (0, (5, 1, 1, 1, 1, 1)), (0, (1, 2)), (0, (8, 2)))
_MARKERS = ("o", "s", "^", "D", "v", "P", "X")

_RC = {
    "svg.fonttype": "none",
    "svg.hashsalt": "backsight-report",
    "text.parse_math": False,        # a '$' in a model name is text, not mathtext
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
    "lines.linewidth": 1.4,
    "path.simplify": True,
}
_META = {"Date": None, "Creator": None, "Format": None, "Type": None}


@dataclasses.dataclass(frozen=True)
class Chart:
    """One chart: its id on the page, title, a text summary for screen readers, and the SVG."""

    id: str
    title: str
    summary: str
    svg: str


def model_styles(models: Sequence[str]) -> dict[str, dict]:
    """Colour, dash and marker per model, by position in the (sorted) model list."""
    return {m: {"color": PALETTE[i % len(PALETTE)], "linestyle": _DASHES[i % len(_DASHES)],
                "marker": _MARKERS[i % len(_MARKERS)]} for i, m in enumerate(models)}


_WIDTH = 6.0      # inches; pages scale the SVG to their width
_LEGEND_COLS = 3


def _figure(height: float, entries: int, rows: int = 1, ratios=None) -> tuple[Figure, list]:
    """A figure with fixed margins and room for a legend of ``entries`` items below the plot.

    Fixed margins, not constrained layout: a layout engine draws the figure twice, which
    doubles the cost of the thousand series charts of a large report. The legend sits under
    the axes so that the plot keeps the full width on a phone.
    """
    legend_rows = math.ceil(entries / _LEGEND_COLS)
    total = height + 0.2 * legend_rows
    fig = Figure(figsize=(_WIDTH, total))
    axes = fig.subplots(rows, 1, sharex=True, height_ratios=ratios, squeeze=False)[:, 0]
    fig.subplots_adjust(left=0.12, right=0.97, top=1 - 0.42 / total,
                        bottom=(0.55 + 0.2 * legend_rows) / total, hspace=0.14)
    return fig, list(axes)


def _legend(fig: Figure) -> None:
    handles, labels = [], []
    for ax in fig.axes:
        h, lab = ax.get_legend_handles_labels()
        handles += h
        labels += lab
    if handles:
        fig.legend(handles, labels, loc="lower center", ncols=_LEGEND_COLS, bbox_to_anchor=(0.5, 0.0))


def _short(name: str, limit: int = 26) -> str:
    """Legend labels are cut to ``limit`` characters (tables carry the full names)."""
    return name if len(name) <= limit else name[: limit - 1] + "…"


_ID_ATTR = re.compile(r'\bid="')
_HREF = re.compile(r'\bhref="#')


def clean_svg(raw: str, chart_id: str, title: str) -> str:
    """Inline-ready SVG: no prologue, URIs, metadata or global style; ids prefixed; accessible root."""
    svg = raw[raw.index("<svg"):]
    svg = re.sub(r"<metadata>.*?</metadata>", "", svg, flags=re.DOTALL)
    svg = re.sub(r"<style[^>]*>.*?</style>", "", svg, flags=re.DOTALL)
    svg = re.sub(r"<!--.*?-->", "", svg, flags=re.DOTALL)
    svg = re.sub(r"<defs>\s*</defs>", "", svg)
    # every id, and every reference to one (url(#…), href="#…"), gets the chart's prefix
    svg = _ID_ATTR.sub(f'id="{chart_id}-', svg)
    svg = svg.replace("url(#", f"url(#{chart_id}-")
    svg = _HREF.sub(f'href="#{chart_id}-', svg)
    head_end = svg.index(">")
    head = svg[:head_end]
    view = re.search(r'viewBox="([^"]+)"', head)
    attrs = (f'<svg viewBox="{view.group(1)}" role="img" aria-labelledby="{chart_id}-t" '
             f'aria-describedby="{chart_id}-d" class="chart" preserveAspectRatio="xMidYMid meet"')
    return f'{attrs}><title id="{chart_id}-t">{escape(title)}</title>' + svg[head_end + 1:].strip()


def _render(fig: Figure, chart_id: str, title: str, summary: str) -> Chart:
    buf = io.StringIO()
    fig.savefig(buf, format="svg", metadata=_META)
    return Chart(chart_id, title, summary, clean_svg(buf.getvalue(), chart_id, title))


def _ticks(ax, labels: Sequence[str], positions: Sequence[float], most: int = 8, season: int = 1) -> None:
    """At most ``most`` x ticks; with a season length, only at season starts (index % m == 0)."""
    if not len(positions):
        return
    picks = [i for i, p in enumerate(positions) if season > 1 and int(p) % season == 0] or list(range(len(positions)))
    picks = picks[::max(1, math.ceil(len(picks) / most))]
    ax.set_xticks([positions[i] for i in picks], [labels[i] for i in picks])


def lines_chart(chart_id: str, title: str, summary: str, periods: Sequence[str],
                values: Mapping[str, Sequence[float]], styles: Mapping[str, dict], *,
                ylabel: str, xlabel: str = "Evaluation period (target period of the forecasts)",
                reference: float | None = None, percent: bool = False) -> Chart:
    """One line per model over evaluation periods; NaN leaves a gap (never bridged)."""
    with matplotlib.rc_context(_RC):
        fig, (ax,) = _figure(3.0, len(values))
        x = np.arange(len(periods))
        for model, ys in values.items():
            st = styles[model]
            ax.plot(x, np.asarray(ys, dtype=float) * (100 if percent else 1), label=_short(model),
                    color=st["color"], linestyle=st["linestyle"], marker=st["marker"], markersize=2.5)
        if reference is not None:
            ax.axhline(reference, color=BAND, linewidth=0.9, linestyle=(0, (2, 2)))
        _ticks(ax, periods, x)
        ax.set(title=title, ylabel=ylabel, xlabel=xlabel)
        if percent:
            ax.set_ylim(-2, 102)
        _legend(fig)
        return _render(fig, chart_id, title, summary)


def horizon_chart(chart_id: str, title: str, summary: str, horizons: Sequence[int],
                  values: Mapping[str, Sequence[float]], styles: Mapping[str, dict], *, ylabel: str,
                  references: Sequence[float] = ()) -> Chart:
    """One line per model (or level) across horizons; ``references`` draws dotted guide lines."""
    with matplotlib.rc_context(_RC):
        fig, (ax,) = _figure(2.8, len(values))
        for model, ys in values.items():
            st = styles[model]
            ax.plot(list(horizons), list(ys), label=_short(model), color=st["color"], linestyle=st["linestyle"],
                    marker=st["marker"], markersize=3.5)
        for ref in references:
            ax.axhline(ref, color=BAND, linewidth=0.9, linestyle=(0, (1, 2)))
        ax.set_xticks(list(horizons))
        ax.set(title=title, ylabel=ylabel, xlabel="Horizon h (periods ahead of the origin)")
        _legend(fig)
        return _render(fig, chart_id, title, summary)


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
    with matplotlib.rc_context(_RC):
        fig, (ax,) = _figure(3.2, len({p.model for p in points}) + 1)
        models = list(dict.fromkeys(p.model for p in points))
        levels = sorted({p.level for p in points})
        lo, hi = (min(levels) - 10, 100) if levels else (0, 100)
        ax.plot([lo, hi], [lo, hi], color=BAND, linewidth=0.9, linestyle=(0, (2, 2)), label="as stated")
        width = 6.0 / max(len(models), 1)
        for i, model in enumerate(models):
            st = styles[model]
            mine = [p for p in points if p.model == model]
            xs = [p.level + (i - (len(models) - 1) / 2) * width for p in mine]
            ax.vlines(xs, [p.band_low for p in mine], [p.band_high for p in mine], color=BAND,
                      linewidth=5, alpha=0.45)
            ax.plot(xs, [p.observed for p in mine], linestyle="none", marker=st["marker"],
                    color=st["color"], markersize=5, label=_short(model))
        ax.set_xticks(levels, [f"{v:g}%" for v in levels])
        ax.set(title=title, xlabel=xlabel, ylabel="Observed coverage (%)")
        ax.set_xlim(lo, hi + 3)
        _legend(fig)
        return _render(fig, chart_id, title, summary)


@dataclasses.dataclass(frozen=True)
class Fan:
    """The latest run's forecasts for one series: point and (lower, upper) per level, by x."""

    model: str
    x: Sequence[float]
    point: Sequence[float]
    bands: Mapping[float, tuple[Sequence[float], Sequence[float]]]


def series_chart(chart_id: str, title: str, summary: str, *, x: Sequence[float], labels: Sequence[str],
                 actual: Sequence[float], forecasts: Mapping[str, Sequence[float]],
                 errors: Mapping[str, Sequence[float]], fan: Fan | None, styles: Mapping[str, dict],
                 horizon: int, unit: str = "units of the series", season: int = 1) -> Chart:
    """Top: actuals, each model's h-step forecasts and the latest run's fan. Bottom: errors.

    All arrays are aligned on ``x`` (one slot per period, NaN where there is no value), so a
    missing actual is a break in the line, never bridged. The figure is reused from series to
    series (see :class:`_SeriesCanvas`); only the data of its artists changes.
    """
    levels = tuple(sorted(fan.bands, reverse=True)) if fan is not None else ()
    key = (title, unit, horizon, tuple((m, tuple(sorted(styles[m].items(), key=str))) for m in forecasts),
           fan.model if fan is not None else None, levels,
           tuple(sorted(styles[fan.model].items(), key=str)) if fan is not None else ())
    canvas = _canvas(key, title, unit, horizon, list(forecasts), styles, fan.model if fan else None, levels)
    with matplotlib.rc_context(_RC):
        canvas.update(np.asarray(x, dtype=float), labels, actual, forecasts, errors, fan, season)
        return _render(canvas.fig, chart_id, title, summary)


_CSS_DASH = {"-": "solid", "--": "dashed", "-.": "dashed", ":": "dotted"}


def legend_entries(models: Sequence[str], styles: Mapping[str, dict], horizon: int,
                   fan_model: str | None, levels: Sequence[str]) -> list[dict]:
    """The series chart's legend as data for the page: label, colour, CSS line style, kind."""
    out = [{"label": "actual", "color": INK, "line": "solid", "kind": "line"}]
    out += [{"label": f"{m} (h={horizon})", "color": styles[m]["color"],
             "line": _CSS_DASH.get(styles[m]["linestyle"], "dotted"), "kind": "line"} for m in models]
    if fan_model:
        color = styles[fan_model]["color"]
        out.append({"label": f"{fan_model}, latest run", "color": color, "line": "solid", "kind": "line"})
        out += [{"label": f"{lv}% interval, latest run", "color": color, "line": "solid", "kind": "band"}
                for lv in sorted(levels, key=float, reverse=True)]
    return out


_CANVASES: dict[tuple, _SeriesCanvas] = {}
_MAX_CANVASES = 8


def _canvas(key, title, unit, horizon, models, styles, fan_model, levels) -> _SeriesCanvas:
    canvas = _CANVASES.get(key)
    if canvas is None:
        if len(_CANVASES) >= _MAX_CANVASES:
            _CANVASES.pop(next(iter(_CANVASES)))
        with matplotlib.rc_context(_RC):
            canvas = _CANVASES[key] = _SeriesCanvas(title, unit, horizon, models, styles, fan_model, levels)
    return canvas


class _SeriesCanvas:
    """A series chart whose artists are created once and re-filled for each series.

    Creating a figure costs about as much as drawing it, and a large report draws a thousand
    of these; reusing one figure per layout (models, fan model, levels) halves the time. Every
    data-dependent setting (line data, fan polygons, limits, x ticks) is reset in
    :meth:`update`, so the output depends only on the series drawn.
    """

    def __init__(self, title, unit, horizon, models, styles, fan_model, levels):
        # no legend inside the SVG: the page shows it as text (readable on a phone, and cheaper)
        self.fig, (self.top, self.bottom) = _figure(4.4, 0, 2, [2.2, 1])
        top, bottom = self.top, self.bottom
        self.bands, self.fan_line, self.origin = {}, None, None
        if fan_model is not None:
            color = styles[fan_model]["color"]
            for i, level in enumerate(levels):
                self.bands[level] = top.add_patch(Polygon(np.zeros((1, 2)), closed=True, facecolor=color,
                                                          alpha=0.14 + 0.12 * i, linewidth=0,
                                                          label=f"{level:g}% interval, latest"))
            self.fan_line, = top.plot([], [], color=color, linewidth=1.6, marker="o", markersize=2.5,
                                      label=f"{_short(fan_model)}, latest run")
            self.origin = top.axvline(0, color=BAND, linewidth=0.8, linestyle=(0, (1, 2)))
        self.actual, = top.plot([], [], color=INK, linewidth=1.9, label="actual")
        self.lines, self.errors = {}, {}
        for model in models:
            st = styles[model]
            self.lines[model], = top.plot([], [], color=st["color"], linestyle=st["linestyle"], linewidth=1.1,
                                          label=f"{_short(model)} (h={horizon})")
            self.errors[model], = bottom.plot([], [], color=st["color"], linestyle=st["linestyle"], linewidth=1.0)
        bottom.axhline(0, color=BAND, linewidth=0.9)
        top.set(title=title, ylabel=f"Value ({unit})")
        bottom.set(ylabel="Error e = y − f", xlabel="Period")
        for ax, bins in ((top, 5), (bottom, 3)):
            ax.yaxis.set_major_locator(MaxNLocator(nbins=bins))

    def update(self, xs, labels, actual, forecasts, errors, fan: Fan | None, season: int) -> None:
        self.actual.set_data(xs, actual)
        for model, line in self.lines.items():
            line.set_data(xs, forecasts[model])
            self.errors[model].set_data(xs, errors[model])
        if fan is not None:
            fx = np.asarray(fan.x, dtype=float)
            for level, patch in self.bands.items():
                low, high = (np.asarray(b, dtype=float) for b in fan.bands[level])
                ok = np.isfinite(low) & np.isfinite(high)
                patch.set_visible(bool(ok.any()))
                if ok.any():
                    patch.set_xy(np.column_stack([np.r_[fx[ok], fx[ok][::-1]], np.r_[low[ok], high[ok][::-1]]]))
            self.fan_line.set_data(fx, fan.point)
            self.origin.set_xdata([fx.min() - 1] * 2 if fx.size else [xs[0]] * 2)
        for ax in (self.top, self.bottom):
            ax.relim(visible_only=True)
            ax.autoscale_view()
        _ticks(self.bottom, labels, xs, season=season)
