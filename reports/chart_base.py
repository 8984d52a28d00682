"""What every chart of the report shares: palette, rc settings, figures, SVG output.

Every chart has a title, labelled axes with units, and a plain-text summary that the page shows
in a ``<figcaption>`` and links with ``aria-describedby``. Output is deterministic: a fixed
``svg.hashsalt``, no date or creator metadata, ids prefixed per chart so several charts can
share one page. Matplotlib's XML prologue, DOCTYPE, namespace URIs, metadata block and global
``<style>`` are removed, so the page holds no URL of any kind.

Palette: the eight colours of Okabe & Ito (2008) "Color Universal Design (CUD): how to make
figures and presentations that are friendly to colorblind people" (yellow left out: too pale on
white), reordered; every model also gets its own line style so colour is never the only cue.

:mod:`reports.charts` (lines, horizons, calibration), :mod:`reports.series_chart` (the fast
series canvas) and :mod:`reports.group_charts` draw with these.
"""

from __future__ import annotations

import dataclasses
import functools
import io
import math
import re
from collections.abc import Sequence
from html import escape

import matplotlib

matplotlib.use("Agg")
from matplotlib.backends.backend_mixed import MixedModeRenderer
from matplotlib.backends.backend_svg import FigureCanvasSVG, RendererSVG
from matplotlib.figure import Figure
from matplotlib.font_manager import FontProperties
from matplotlib.textpath import text_to_path

__all__ = [
    "BAND",
    "INK",
    "LEGEND_CHARS",
    "LEGEND_COLS",
    "PALETTE",
    "RC",
    "Chart",
    "clean_svg",
    "figure",
    "legend",
    "model_styles",
    "render",
    "short",
    "text_metrics",
    "tick_picks",
    "ticks",
]

#: Okabe & Ito (2008) colours in the order Backsight assigns them to models.
PALETTE = ("#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9", "#000000")
INK = "#1F2A36"      # actuals and text
BAND = "#8A9BA8"     # tolerance bands and reference lines
_DASHES = ("-", "--", "-.", ":", (0, (5, 1, 1, 1, 1, 1)), (0, (1, 2)), (0, (8, 2)))
_MARKERS = ("o", "s", "^", "D", "v", "P", "X")

RC = {
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


@functools.lru_cache(maxsize=8192)
def text_metrics(text: str, prop: FontProperties, ismath) -> tuple[float, float, float]:
    """Width, height and descent (points) of ``text``, measured as the SVG renderer measures it."""
    return text_to_path.get_text_width_height_descent(text, prop, ismath)


class _SVGRenderer(RendererSVG):
    """Matplotlib's SVG renderer, measuring each (text, font) once for all the charts of a process.

    Matplotlib caches text sizes per renderer, and every saved figure gets a new renderer, so
    each chart measured its tick labels again (a fifth of a series chart's time); the sizes
    depend only on the text and the font, since SVG text is measured at 72 dpi.
    """

    def get_text_width_height_descent(self, s, prop, ismath):
        return text_metrics(s, prop.copy(), ismath)


class _SVGCanvas(FigureCanvasSVG):
    """Matplotlib's SVG canvas, drawing with :class:`_SVGRenderer` (text kept as text)."""

    def print_svg(self, filename, *, bbox_inches_restore=None, metadata=None, **_ignored):
        # FigureCanvasSVG.print_svg for a text stream (what render passes), with another renderer;
        # print_figure has already applied what it passes in _ignored (facecolor, edgecolor, ...)
        dpi = self.figure.dpi
        self.figure.dpi = 72
        width, height = self.figure.get_size_inches()
        renderer = MixedModeRenderer(self.figure, width, height, dpi,
                                     _SVGRenderer(width * 72, height * 72, filename, image_dpi=dpi, metadata=metadata),
                                     bbox_inches_restore=bbox_inches_restore)
        self.figure.draw(renderer)
        renderer.finalize()


_WIDTH = 6.0      # inches; pages scale the SVG to their width
LEGEND_COLS = 3
#: Characters of 8-point legend text one legend row holds, handles and gaps included: a label is
#: cut to LEGEND_CHARS // columns (26 at three columns, 39 at two).
LEGEND_CHARS = 78


def figure(height: float, entries: int, rows: int = 1, ratios=None, cols: int = LEGEND_COLS) -> tuple[Figure, list]:
    """A figure with fixed margins and room for a legend of ``entries`` items below the plot.

    Fixed margins, not constrained layout: a layout engine draws the figure twice, which
    doubles the cost of the thousand series charts of a large report. The legend sits under
    the axes so that the plot keeps the full width on a phone.
    """
    legend_rows = math.ceil(entries / cols)
    total = height + 0.2 * legend_rows
    fig = Figure(figsize=(_WIDTH, total))
    _SVGCanvas(fig)
    axes = fig.subplots(rows, 1, sharex=True, height_ratios=ratios, squeeze=False)[:, 0]
    fig.subplots_adjust(left=0.12, right=0.97, top=1 - 0.42 / total,
                        bottom=(0.55 + 0.2 * legend_rows) / total, hspace=0.14)
    return fig, list(axes)


def legend(fig: Figure, cols: int = LEGEND_COLS) -> None:
    handles, labels = [], []
    for ax in fig.axes:
        h, lab = ax.get_legend_handles_labels()
        handles += h
        labels += lab
    if handles:
        fig.legend(handles, labels, loc="lower center", ncols=cols, bbox_to_anchor=(0.5, 0.0))


def short(name: str, limit: int = LEGEND_CHARS // LEGEND_COLS) -> str:
    """Legend labels are cut to ``limit`` characters (tables carry the full names)."""
    return name if len(name) <= limit else name[: limit - 1] + "…"


def clean_svg(raw: str, chart_id: str, title: str) -> str:
    """Inline-ready SVG: no prologue, URIs, metadata or global style; ids prefixed; accessible root."""
    svg = raw[raw.index("<svg"):]
    svg = re.sub(r"<metadata>.*?</metadata>", "", svg, flags=re.DOTALL)
    svg = re.sub(r"<style[^>]*>.*?</style>", "", svg, flags=re.DOTALL)
    svg = re.sub(r"<!--.*?-->", "", svg, flags=re.DOTALL)
    svg = re.sub(r"<defs>\s*</defs>", "", svg)
    # every id, and every reference to one (url(#…), href="#…" or xlink:href="#…"), gets the
    # chart's prefix; matplotlib writes each attribute after a space and escapes quotes in text,
    # so plain replacements find them all (a regex with a word boundary took 10% of a chart)
    svg = svg.replace(' id="', f' id="{chart_id}-')
    svg = svg.replace("url(#", f"url(#{chart_id}-")
    svg = svg.replace('href="#', f'href="#{chart_id}-')
    head_end = svg.index(">")
    head = svg[:head_end]
    view = re.search(r'viewBox="([^"]+)"', head)
    attrs = (f'<svg viewBox="{view.group(1)}" role="img" aria-labelledby="{chart_id}-t" '
             f'aria-describedby="{chart_id}-d" class="chart" preserveAspectRatio="xMidYMid meet"')
    return f'{attrs}><title id="{chart_id}-t">{escape(title)}</title>' + svg[head_end + 1:].strip()


def render(fig: Figure, chart_id: str, title: str, summary: str) -> Chart:
    buf = io.StringIO()
    fig.savefig(buf, format="svg", metadata=_META)
    return Chart(chart_id, title, summary, clean_svg(buf.getvalue(), chart_id, title))


def ticks(ax, labels: Sequence[str], positions: Sequence[float], most: int = 8, season: int = 1) -> None:
    """At most ``most`` x ticks; with a season length, only at season starts (index % m == 0)."""
    if len(positions):
        ax.set_xticks(*tick_picks(labels, positions, most, season))


def tick_picks(labels: Sequence[str], positions: Sequence[float], most: int = 8,
                season: int = 1) -> tuple[list[float], list[str]]:
    picks = [i for i, p in enumerate(positions) if season > 1 and int(p) % season == 0] or list(range(len(positions)))
    picks = picks[::max(1, math.ceil(len(picks) / most))]
    return [float(positions[i]) for i in picks], [labels[i] for i in picks]
