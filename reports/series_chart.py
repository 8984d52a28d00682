"""The series chart, built for speed: one reused matplotlib figure per layout.

A large report draws a thousand series charts, so :class:`_SeriesCanvas` is created once per
layout (models, fan model, levels) and re-filled for each series; see its docstring for what
it does instead of matplotlib's general machinery. Style and SVG output come from
:mod:`reports.chart_base`.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Mapping, Sequence

import matplotlib
import numpy as np
from matplotlib.font_manager import FontProperties
from matplotlib.collections import PolyCollection
from matplotlib.patches import Polygon
from matplotlib.ticker import Formatter, Locator, MaxNLocator, NullFormatter, NullLocator
from matplotlib.transforms import ScaledTranslation

from ledger.wording import format_level

from .chart_base import BAND, INK, RC, Chart, figure, render, short, text_metrics, tick_picks

__all__ = ["Fan", "clear_canvases", "legend_entries", "series_chart"]


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
                 horizon: int, unit: str = "units of the series", season: int = 1,
                 spans: Sequence[tuple[float, float]] = ()) -> Chart:
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
    with matplotlib.rc_context(RC):
        canvas.update(np.asarray(x, dtype=float), labels, actual, forecasts, errors, fan, season, spans)
        return render(canvas.fig, chart_id, title, summary)


_CSS_DASH = {"-": "solid", "--": "dashed", "-.": "dashed", ":": "dotted"}


def band_alpha(i: int) -> float:
    """Opacity of the i-th fan band, widest first (the narrower bands are drawn over it)."""
    return 0.14 + 0.12 * i


def _seen_alpha(i: int) -> float:
    """How opaque the i-th band looks where it overlaps every wider band (what its swatch shows)."""
    return 1 - math.prod(1 - band_alpha(j) for j in range(i + 1))


def legend_entries(models: Sequence[str], styles: Mapping[str, dict], horizon: int,
                   fan_model: str | None, levels: Sequence[str]) -> list[dict]:
    """The series chart's legend as data for the page: label, colour, CSS line style, kind."""
    out = [{"label": "actual", "color": INK, "line": "solid", "kind": "line"}]
    out += [{"label": f"{m} (h={horizon})", "color": styles[m]["color"],
             "line": _CSS_DASH.get(styles[m]["linestyle"], "dotted"), "kind": "line"} for m in models]
    if fan_model:
        color = styles[fan_model]["color"]
        out.append({"label": f"{fan_model}, latest run", "color": color, "line": "solid", "kind": "line"})
        out += [{"label": f"{lv}% interval, latest run", "color": color, "line": "solid", "kind": "band",
                 "opacity": round(_seen_alpha(i), 3)} for i, lv in enumerate(sorted(levels, key=float, reverse=True))]
    return out


_CANVASES: dict[tuple, _SeriesCanvas] = {}
_MAX_CANVASES = 8


def clear_canvases() -> None:
    """Forget the reused canvases (the next series chart starts on a fresh figure)."""
    _CANVASES.clear()


def _canvas(key, title, unit, horizon, models, styles, fan_model, levels) -> _SeriesCanvas:
    canvas = _CANVASES.get(key)
    if canvas is None:
        if len(_CANVASES) >= _MAX_CANVASES:
            _CANVASES.pop(next(iter(_CANVASES)))
        with matplotlib.rc_context(RC):
            canvas = _CANVASES[key] = _SeriesCanvas(title, unit, horizon, models, styles, fan_model, levels)
    return canvas


class _PlainNumbers(Formatter):
    """Tick labels with thousands separators and as many decimals as the ticks need (all alike).

    Never an offset or a "1e6" multiplier: their text sits above the axes, where the series
    chart's title is placed without a search for what might collide with it.
    """

    def __call__(self, x, pos=None) -> str:
        return self.format_ticks([x])[0]

    def format_ticks(self, values) -> list[str]:
        values = [float(v) for v in values]
        scale = max((abs(v) for v in values), default=1.0) or 1.0
        values = [0.0 if abs(v) < 1e-9 * scale else v for v in values]   # 0 computed as 1e-17
        steps = [b - a for a, b in zip(sorted(values), sorted(values)[1:]) if b > a]
        step = min(steps) if steps else scale
        decimals = next((d for d in range(16) if all(abs(round(v, d) - v) <= 1e-6 * step for v in values)), None)
        if decimals is None:
            return [f"{v:.6g}".replace("-", "\N{MINUS SIGN}") for v in values]
        return [f"{v:,.{decimals}f}".replace("-", "\N{MINUS SIGN}") if v else "0" for v in values]


_TICK_PAD = 5.0       # points between an axis and its tick labels (no tick marks: the grid shows ticks)
_LABEL_PAD = 4.0      # points between tick labels and the axis label
_EDGE = 0.04          # inches kept free between the figure's left edge and a y-axis label


def _text_size(text: str, size: float) -> tuple[float, float]:
    """Width and height (points) of one line of text in the chart font, as the SVG renderer measures it."""
    w, h, _ = text_metrics(text, FontProperties(family="sans-serif", size=size), False)
    return w, h


class _SeriesCanvas:
    """A series chart whose artists are created once and re-filled for each series.

    A large report draws a thousand of these, so the figure is built for speed: created once
    per layout (models, fan model, levels) and reused; tick labels are text artists at the
    places matplotlib gives tick labels, laid out once per draw (see :class:`_TickLabels`);
    the title, axis labels and margins are placed from cached text sizes instead of a search
    through every tick label's extent; the gridlines of an axes are one line, not one per
    tick; data limits come from the arrays, as matplotlib's autoscaling would set them, not
    from walking the artists. Every data-dependent setting (line data, fan polygons, limits,
    ticks, gridlines, label positions) is reset in :meth:`update`, so the output depends only
    on the series drawn.
    """

    def __init__(self, title, unit, horizon, models, styles, fan_model, levels):
        # no legend inside the SVG: the page shows it as text (readable on a phone, and cheaper)
        self.fig, (self.top, self.bottom) = figure(4.4, 0, 2, [2.2, 1])
        top, bottom = self.top, self.bottom
        self.left = self.fig.subplotpars.left
        self.bands, self.fan_line, self.origin = {}, None, None
        if fan_model is not None:
            color = styles[fan_model]["color"]
            for i, level in enumerate(levels):
                self.bands[level] = top.add_patch(Polygon(np.zeros((1, 2)), closed=True, facecolor=color,
                                                          alpha=band_alpha(i), linewidth=0,
                                                          label=f"{format_level(level)}% interval, latest"))
            self.fan_line, = top.plot([], [], color=color, linewidth=1.6, marker="o", markersize=2.5,
                                      label=f"{short(fan_model)}, latest run")
            self.origin = top.axvline(0, color=BAND, linewidth=0.8, linestyle=(0, (1, 2)))
        self.actual, = top.plot([], [], color=INK, linewidth=1.9, label="actual")
        # event spans: x in data, y over the axes' height; hidden (and so not written) when none
        self.spans = top.add_collection(PolyCollection([], facecolor=BAND, alpha=0.2, linewidth=0, zorder=0.4,
                                                       transform=top.get_xaxis_transform()), autolim=False)
        self.spans.set_visible(False)
        self.lines, self.errors = {}, {}
        for model in models:
            st = styles[model]
            self.lines[model], = top.plot([], [], color=st["color"], linestyle=st["linestyle"], linewidth=1.1,
                                          label=f"{short(model)} (h={horizon})")
            self.errors[model], = bottom.plot([], [], color=st["color"], linestyle=st["linestyle"], linewidth=1.0)
        bottom.axhline(0, color=BAND, linewidth=0.9)
        top.set_title(title, y=1.0)          # a fixed y: nothing is drawn above the top axes
        top.set_ylabel(f"Value ({unit})")
        bottom.set(ylabel="Error e = y − f", xlabel="Period")
        top.xaxis.set_visible(False)         # shared with the bottom axes, which label it
        size = matplotlib.rcParams["font.size"]
        self.label_height = _text_size("Error lp", size)[1]
        tick_height = _text_size("0123456789-lp", size)[1]
        bottom.xaxis.set_label_coords(0.5, 0, transform=bottom.transAxes + ScaledTranslation(
            0, -(_TICK_PAD + tick_height + _LABEL_PAD) / 72, self.fig.dpi_scale_trans))
        self.grid, self.locators, self.ylabels = {}, {}, {}
        self.formatter = _PlainNumbers()
        self.xlabels = _TickLabels(bottom, "xtick", *bottom.get_xaxis_text1_transform(_TICK_PAD))
        for ax, bins in ((top, 5), (bottom, 3)):
            self.locators[ax] = MaxNLocator(nbins=bins)
            self.ylabels[ax] = _TickLabels(ax, "ytick", *ax.get_yaxis_text1_transform(_TICK_PAD))
            for axis in (ax.xaxis, ax.yaxis):   # the axes keep their labels; ticks are drawn below
                axis.set_major_locator(NullLocator())
                axis.set_major_formatter(NullFormatter())
            ax.grid(False)
            ax.patch.set_visible(False)      # white on the white figure: one path less to write
            self.grid[ax], = ax.plot([], [], color=RC["grid.color"], linewidth=RC["grid.linewidth"], zorder=0.5)
            # the limits are those of these very data plus margins, so nothing lies outside the
            # axes: unclipped, each artist skips a clip-box computation and writes no clip path
            for artist in [*ax.lines, *ax.patches]:
                artist.set_clip_on(False)

    def update(self, xs, labels, actual, forecasts, errors, fan: Fan | None, season: int, spans=()) -> None:
        top_x, top_y, bottom_x, bottom_y = [], [], [], [np.zeros(1)]
        self.spans.set_verts([[(a - 0.5, 0), (b + 0.5, 0), (b + 0.5, 1), (a - 0.5, 1)] for a, b in spans])
        self.spans.set_visible(bool(len(spans)))
        self.actual.set_data(xs, actual)
        _extent(top_x, top_y, xs, actual)
        for model, line in self.lines.items():
            line.set_data(xs, forecasts[model])
            self.errors[model].set_data(xs, errors[model])
            _extent(top_x, top_y, xs, forecasts[model])
            _extent(bottom_x, bottom_y, xs, errors[model])
        if fan is not None:
            fx = np.asarray(fan.x, dtype=float)
            for level, patch in self.bands.items():
                low, high = (np.asarray(b, dtype=float) for b in fan.bands[level])
                ok = np.isfinite(low) & np.isfinite(high)
                patch.set_visible(bool(ok.any()))
                if ok.any():
                    patch.set_xy(np.column_stack([np.r_[fx[ok], fx[ok][::-1]], np.r_[low[ok], high[ok][::-1]]]))
                    top_x.append(fx[ok])
                    top_y += [low[ok], high[ok]]
            self.fan_line.set_data(fx, fan.point)
            _extent(top_x, top_y, fx, np.asarray(fan.point, dtype=float))
            at = fx.min() - 1 if fx.size else xs[0]
            self.origin.set_xdata([at, at])
            top_x.append(np.array([at]))
        x0, x1 = _limits(Locator(), "x", top_x + bottom_x)     # as for the fixed x ticks this had
        self.bottom.set_xlim(x0, x1)
        picks = [(t, label) for t, label in zip(*tick_picks(labels, xs, season=season)) if x0 <= t <= x1]
        xt = [t for t, _ in picks]
        self.xlabels.show([(t, 0) for t in xt], [label for _, label in picks])
        for ax, ys in ((self.top, top_y), (self.bottom, bottom_y)):
            y0, y1 = _limits(self.locators[ax], "y", ys)
            ax.set_ylim(y0, y1)
            yt = _inside(self.locators[ax].tick_values(y0, y1), y0, y1)
            self.grid[ax].set_data(*_grid_path(xt, yt, (x0, x1), (y0, y1)))
            self.ylabels[ax].show([(0, t) for t in yt], self.formatter.format_ticks(yt))
        self._place_labels()

    def _place_labels(self) -> None:
        """Y-axis labels left of the widest tick label, widening the left margin if needed."""
        size = matplotlib.rcParams["ytick.labelsize"]
        widest = max([0.0] + [_text_size(t, size)[0] for ax in (self.top, self.bottom)
                              for t in self.ylabels[ax].shown])
        offset = _TICK_PAD + widest + _LABEL_PAD
        need = (offset + self.label_height) / 72 + _EDGE
        left = max(self.left, need / self.fig.get_figwidth())
        if left != self.fig.subplotpars.left:
            self.fig.subplots_adjust(left=left)
        for ax in (self.top, self.bottom):
            ax.yaxis.set_label_coords(0, 0.5, transform=ax.transAxes + ScaledTranslation(
                -offset / 72, 0, self.fig.dpi_scale_trans))


def _extent(xs_out: list, ys_out: list, x: np.ndarray, y) -> None:
    """Collect the points of a line that matplotlib would count in its data limits (finite ones)."""
    y = np.asarray(y, dtype=float)
    ok = np.isfinite(y)
    xs_out.append(x[ok])
    ys_out.append(y[ok])


def _limits(locator, name: str, parts: list) -> tuple[float, float]:
    """The limits matplotlib's autoscaling gives these data: the locator's non-singular range plus margins."""
    values = np.concatenate(parts) if parts else np.empty(0)
    lo, hi = (float(values.min()), float(values.max())) if values.size else (-np.inf, np.inf)
    lo, hi = locator.nonsingular(lo, hi)
    pad = (hi - lo) * matplotlib.rcParams[f"axes.{name}margin"]
    return locator.view_limits(lo - pad, hi + pad)


class _TickLabels:
    """The tick labels of one axis: Text artists at the places matplotlib puts tick labels.

    Matplotlib lays out every tick label twice per draw (once for the axis' extent), which was
    half the time of a series chart; these are laid out once, and reused from chart to chart.
    """

    def __init__(self, ax, which: str, transform, va: str, ha: str):
        # which: "xtick" or "ytick", the rc group of the labels' font size and colour
        self.ax, self.which, self.transform, self.va, self.ha = ax, which, transform, va, ha
        self.texts: list = []
        self.shown: list[str] = []

    def show(self, positions: Sequence[tuple[float, float]], labels: Sequence[str]) -> None:
        """Labels at (x, y) in the axis' tick-label transform; unused artists are hidden."""
        rc = matplotlib.rcParams
        color = rc[f"{self.which}.labelcolor"]
        while len(self.texts) < len(positions):
            self.texts.append(self.ax.text(
                0, 0, "", transform=self.transform, va=self.va, ha=self.ha, clip_on=False,
                fontsize=rc[f"{self.which}.labelsize"], color=rc[f"{self.which}.color"] if color == "inherit" else color))
        for text, xy, label in zip(self.texts, positions, labels):
            text.set(position=xy, text=label, visible=True)
        for text in self.texts[len(positions):]:
            text.set_visible(False)
        self.shown = list(labels)


def _grid_path(xt, yt, xlim, ylim) -> tuple[list, list]:
    """All gridlines of an axes as one line broken by NaN (one SVG path instead of one per tick)."""
    xs, ys = [], []
    for x in xt:
        xs += [x, x, math.nan]
        ys += [ylim[0], ylim[1], math.nan]
    for y in yt:
        xs += [xlim[0], xlim[1], math.nan]
        ys += [y, y, math.nan]
    return xs, ys


def _inside(locs, lo: float, hi: float) -> list[float]:
    tol = 1e-9 * max(abs(hi - lo), 1e-300)
    return [float(v) for v in locs if lo - tol <= v <= hi + tol]
