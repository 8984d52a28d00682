"""The Jinja2 environment: autoescaped templates, the inlined stylesheet and the page security policy.

Every page is one self-contained file: the CSS from ``static/report.css`` is inlined, charts
are inline SVG, and a Content-Security-Policy meta tag forbids every network load (no
scripts, fonts, frames or remote images), so a page opened from disk loads nothing else.
Every value a template prints is HTML-escaped (autoescape); only chart SVG, which
:mod:`reports.charts` produced and cleaned, is marked safe.
"""

from __future__ import annotations

import functools
import math
from importlib import resources

import jinja2
import markupsafe

from ledger.wording import num, p_value, pct

from .text import SMALL_SAMPLE, bias_words

__all__ = ["CSP", "environment", "findings_table", "render_page"]

#: No network loads of any kind; inline styles only; images only as data: URIs.
CSP = ("default-src 'none'; style-src 'unsafe-inline'; img-src data:; font-src 'none'; "
       "script-src 'none'; connect-src 'none'; base-uri 'none'; form-action 'none'")


@functools.cache
def _css() -> markupsafe.Markup:
    """The stylesheet, marked safe: it is our own package file, and a <style> element's text is
    not entity-decoded, so escaping it would break the CSS."""
    text = resources.files("reports").joinpath("static/report.css").read_text(encoding="utf-8")
    if "</" in text:
        raise ValueError("report.css must not contain '</'")
    return markupsafe.Markup(text)


def _finite(x) -> bool:
    return isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(x)


def _data(value, text: str) -> markupsafe.Markup | str:
    """``text`` inside a <data> element holding ``value`` to 12 significant digits (in the unit the
    text shows), which the CSV beside each table takes (:mod:`reports.tables`); missing: plain text.
    Twelve, not seventeen: DuckDB's parallel sums can differ from run to run past the 14th digit,
    and the same ledger and as-of must give the same files."""
    if not _finite(value):
        return text
    return markupsafe.Markup('<data value="{}">{}</data>').format(f"{float(value):.12g}", text)


def _csv_value(x) -> str:
    """A figure for a ``<data data-col>`` (a CSV-only column): 12 significant digits, blank when missing."""
    return f"{float(x):.12g}" if _finite(x) else ""


def _num(x, digits: int = 3):
    return _data(x, num(x, digits))


def _pct(x, decimals: int = 1):
    return _data(x, pct(x, decimals))


def _share(x):
    """A 0–1 share as a whole percentage: 0.625 -> '63%' (the data value is 62.5, as shown)."""
    return _data(100 * x, pct(100 * x, 0)) if _finite(x) else "–"


def _pvalue(p):
    return _data(p, p_value(p)) if _finite(p) else p_value(p)


@functools.cache
def environment() -> jinja2.Environment:
    """The report's Jinja2 environment (autoescape on for every template)."""
    env = jinja2.Environment(
        loader=jinja2.PackageLoader("reports", "templates"),
        autoescape=True,
        undefined=jinja2.StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
        keep_trailing_newline=True,
    )
    env.filters.update(num=_num, pct=_pct, csv_value=_csv_value, bias=bias_words, share=_share, pvalue=_pvalue)
    env.globals.update(csp=CSP, css=_css, small_sample=SMALL_SAMPLE)
    return env


def render_page(template: str, **context) -> str:
    """Render one page template with its view-model and the shared context."""
    return environment().get_template(template).render(**context)


def findings_table(rows, caption: str) -> markupsafe.Markup:
    """The findings table of ``macros.html`` on its own (a series page's, filled in after its chart)."""
    return environment().get_template("macros.html").module.findings_table(rows, caption)
