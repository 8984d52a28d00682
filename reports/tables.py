"""Tables to take away: every ``<table>`` of a page as a CSV file, linked under the table.

The CSV is read back from the rendered table itself, so it has the same rows and columns as
what the reader sees: the header row from ``<th>`` cells, one line per body row, and for a
cell that shows a number the full-precision value that the template's number filters put in a
``<data value="…">`` element (:mod:`reports.render`). A figure the page shows only in a mark
or a tooltip (such as the number of cells a coverage was computed over) travels as an empty
``<data data-col="NAME" value="…">``: it becomes a column NAME of its own, after the table's
columns, so the CSV carries it without widening the table on screen. Rows that span the whole table ("No
findings.") are messages, not data, and are left out. Text cells that a spreadsheet would run
as a formula (a leading =, +, −, @, tab or carriage return) get a leading apostrophe, the
defence OWASP describes for "CSV injection" (OWASP Foundation, CSV Injection, from memory).
Files go to ``tables/`` beside the pages, named after the page and the table's position.
"""

from __future__ import annotations

import csv
import html
import html.parser
import io
import re
from pathlib import Path

from .names import safe_write

__all__ = ["TABLES_DIR", "attach_csv", "defuse", "label_cells", "table_csv", "write_page"]

TABLES_DIR = "tables"
_TABLE = re.compile(r"<table\b.*?</table>", re.DOTALL)
_WRAP_END = re.compile(r"\s*</div>")
_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")
_NUMBER = re.compile(r"-?\d[\d,]*(\.\d+)?")


def defuse(text: str) -> str:
    """A cell a spreadsheet will not evaluate: numbers as they are, other text starting with a
    formula character behind an apostrophe."""
    if text.startswith(_FORMULA_START) and not _NUMBER.fullmatch(text):
        return "'" + text
    return text


class _Cells(html.parser.HTMLParser):
    """Rows of one table: each cell's first <data value> if it has one, else its text."""

    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.rows: list[list[str]] = []
        self._row: list[str] | None = None
        self._cell: list[str] | None = None
        self._value: str | None = None
        self._extra: dict[str, str] = {}
        self.extras: list[dict[str, str]] = []     # per row: the data-col values of its cells
        self._spans = False
        self._caption = 0

    def handle_starttag(self, tag, attrs):
        if tag == "tr":
            self._row, self._spans, self._extra = [], False, {}
        elif tag in ("td", "th") and self._row is not None:
            self._cell, self._value = [], None
            self._spans = self._spans or any(k == "colspan" for k, _ in attrs)
        elif tag == "data" and self._cell is not None:
            found = dict(attrs)
            if found.get("data-col"):
                self._extra[found["data-col"]] = found.get("value") or ""
            elif self._value is None:
                self._value = found.get("value")
        elif tag == "caption":
            self._caption += 1

    def handle_endtag(self, tag):
        if tag in ("td", "th") and self._cell is not None and self._row is not None:
            text = " ".join("".join(self._cell).split())
            self._row.append(self._value if self._value is not None else text)
            self._cell = None
        elif tag == "tr" and self._row is not None:
            if not self._spans:
                self.rows.append(self._row)
                self.extras.append(self._extra)
            self._row = None
        elif tag == "caption":
            self._caption -= 1

    def handle_data(self, data):
        if self._cell is not None and not self._caption:
            self._cell.append(data)


def _rows(table_html: str) -> tuple[list[list[str]], list[list[str]]]:
    """(the table's rows as shown, the CSV's rows): the CSV's add the data-col columns, named in
    order of first appearance, after the shown ones."""
    parser = _Cells()
    parser.feed(table_html)
    parser.close()
    names = list(dict.fromkeys(k for extra in parser.extras for k in extra))
    if not names or not parser.rows:
        return parser.rows, parser.rows
    head, *body = zip(parser.rows, parser.extras)
    return parser.rows, [head[0] + names] + [row + [extra.get(k, "") for k in names] for row, extra in body]


def table_csv(table_html: str) -> str:
    """The CSV text of one rendered ``<table>`` (header row first)."""
    return _csv(_rows(table_html)[1])


def _csv(rows: list[list[str]]) -> str:
    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    for row in rows:
        writer.writerow([_plain_number(c) for c in row])
    return buf.getvalue()


_ROW = re.compile(r"<tr\b.*?</tr>", re.DOTALL)
_TD = re.compile(r"<td\b")


def label_cells(table_html: str, header: list[str]) -> str:
    """Each body cell gets ``data-label`` = its column's header, which the phone layout shows
    above the value (rows spanning the table are left as they are)."""
    labels = [html.escape(h, quote=True) for h in header]

    def row(match: re.Match) -> str:
        text = match.group(0)
        if "colspan" in text or "<td" not in text:
            return text
        cells = iter(labels)
        return _TD.sub(lambda _: f'<td data-label="{next(cells, "")}"', text)
    return _ROW.sub(row, table_html)


def _plain_number(cell: str) -> str:
    """'1,234' -> '1234' (a count the template printed with separators); other text defused."""
    return cell.replace(",", "") if _NUMBER.fullmatch(cell) else defuse(cell)


def attach_csv(page: str, text: str) -> tuple[str, dict[str, str]]:
    """``text`` with a CSV link under each table (after its scrolling wrapper), and the CSV files
    as {file name: CSV text}; ``page`` is the page's file name."""
    stem = page.rsplit(".", 1)[0]
    files: dict[str, str] = {}
    out, last = [], 0
    for i, match in enumerate(_TABLE.finditer(text), start=1):
        name = f"{stem}-{i}.csv"
        table = match.group(0)
        shown, rows = _rows(table)
        files[name] = _csv(rows)
        end = match.end()
        wrap = _WRAP_END.match(text, end)
        out.append(text[last:match.start()])
        out.append(label_cells(table, shown[0]) if shown else table)
        if wrap:
            out.append(text[end:wrap.end()])
            end = wrap.end()
        out.append(f'\n<p class="csv"><a href="{TABLES_DIR}/{name}" download>This table as CSV</a> '
                   f'<span class="muted">(numbers in full precision)</span></p>')
        last = end
    out.append(text[last:])
    return "".join(out), files


def write_page(out_dir: Path, page: str, text: str) -> Path:
    """Write a page and the CSV of each of its tables (``tables/``), via :func:`safe_write`."""
    html_text, files = attach_csv(page, text)
    if files:
        folder = out_dir / TABLES_DIR
        folder.mkdir(exist_ok=True)
        for name, body in files.items():
            safe_write(folder, name, body)
    return safe_write(out_dir, page, html_text)
