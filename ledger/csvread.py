"""Reading a CSV file into a frame of strings, refusing what is not a clean text table.

Decoding: UTF-8 (a byte-order mark is fine) and UTF-16 with a byte-order mark are read; any
other encoding is refused at the first byte that is not UTF-8, with its row and column.
The delimiter is taken from the header line: a comma, else a semicolon, tab or bar if the header
holds one. NUL bytes are refused (a binary file such as a workbook renamed .csv). Rows with more
fields than the header are refused.
"""

from __future__ import annotations

import codecs
import csv
import io
import re
from collections import Counter
from pathlib import Path

import pandas as pd

from .errors import InputError

__all__ = ["read_csv_strings", "shorten", "list_names"]

_BOMS = ((codecs.BOM_UTF8, "utf-8-sig"), (codecs.BOM_UTF16_LE, "utf-16"), (codecs.BOM_UTF16_BE, "utf-16"))
_FIELDS = re.compile(r"Expected (\d+) fields in line (\d+), saw (\d+)")
_QUOTE = re.compile(r"EOF inside string starting at row (\d+)")


def shorten(value: str, limit: int = 40) -> str:
    """A value fit to quote in a one-line message."""
    text = str(value)
    return text if len(text) <= limit else text[:limit] + f"… ({len(text):,} characters)"


def list_names(names, limit: int = 5) -> str:
    """'a, b, c' or 'a, b, c, d, e and 7 more': a list fit for a one-line message."""
    names = [str(n) for n in names]
    if len(names) <= limit:
        return ", ".join(names)
    return f"{', '.join(names[:limit])} and {len(names) - limit:,} more"


def _decode(raw: bytes, source: str) -> str:
    for bom, encoding in _BOMS:
        if raw.startswith(bom):
            return raw.decode(encoding)
    try:
        return raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        row, column = _locate(raw[: exc.start].decode("utf-8", "replace"), raw)
        raise InputError(source, f"byte 0x{raw[exc.start]:02x} is not UTF-8 text; save the file as UTF-8",
                         row=row, column=column) from None


def _locate(before: str, raw: bytes) -> tuple[int, str]:
    """Row (1-based, header excluded) and column name of the character after ``before``."""
    lines = before.split("\n")
    header = next(csv.reader([raw.split(b"\n", 1)[0].decode("utf-8", "replace")]), [""])
    field = lines[-1].count(",")
    name = header[field].strip() if field < len(header) else f"{field + 1} (past the header)"
    return max(1, len(lines) - 1), name or str(field + 1)


def _delimiter(header_line: str) -> str:
    if "," in header_line:
        return ","
    counts = {d: header_line.count(d) for d in (";", "\t", "|")}
    best = max(counts, key=counts.get)
    return best if counts[best] else ","


def _check_header(names: list[str], source: str) -> None:
    counts = Counter(n.strip().lstrip("\ufeff").strip().lower() for n in names)
    dupes = sorted(n for n, k in counts.items() if k > 1)
    if dupes:
        shown = list_names([shorten(d) for d in dupes])
        raise InputError(source, f"the header names {shown} more than once (column names are case-insensitive)")


def read_csv_strings(path: Path, source: str) -> pd.DataFrame:
    """Every cell as a string ('' when empty); the header as written (checked for duplicates)."""
    raw = path.read_bytes()
    text = _decode(raw, source)
    if not text.strip("\ufeff \t\r\n"):
        raise InputError(source, "the file is empty")
    nul = text.find("\x00")
    if nul >= 0:
        if "\n" not in text[:nul]:
            raise InputError(source, "the header holds a NUL byte, so it is not a text CSV file "
                             "(a workbook? export it as CSV)")
        row, column = _locate(text[:nul], raw)
        raise InputError(source, "holds a NUL byte, so it is not a text CSV file (a workbook? export it as CSV)",
                         row=row, column=column)
    first = text.lstrip("\ufeff").split("\n", 1)[0]
    sep = _delimiter(first)
    header = next(csv.reader([first], delimiter=sep))
    _check_header(header, source)
    try:
        frame = pd.read_csv(io.StringIO(text.lstrip("\ufeff")), sep=sep, dtype=str, keep_default_na=False,
                            skip_blank_lines=True)
    except pd.errors.EmptyDataError:
        raise InputError(source, "the file is empty") from None
    except pd.errors.ParserError as exc:
        raise _parser_error(str(exc), header, source) from None
    if not isinstance(frame.index, pd.RangeIndex):
        # pandas takes the first column as an index when every row has one field too many
        raise InputError(source, f"has {len(header) + 1} fields; the header has {len(header)}", row=1,
                         column=f"{len(header) + 1} (past the header)")
    return frame


def _parser_error(message: str, header: list[str], source: str) -> InputError:
    if m := _FIELDS.search(message):
        expected, line, saw = map(int, m.groups())
        return InputError(source, f"has {saw} fields; the header has {expected}", row=line - 1,
                          column=f"{expected + 1} (past the header)")
    if m := _QUOTE.search(message):
        return InputError(source, "a quoted field is not closed before the end of the file",
                          row=int(m[1]), column=header[0].strip() if header else "1")
    return InputError(source, f"cannot be read as CSV: {message.strip().splitlines()[0]}")
