"""Reading a CSV file as chunks of strings, refusing what is not a clean text table.

The file is streamed: bytes are decoded and checked block by block, and pandas' C parser turns
the text into frames of at most ``rows`` rows, so memory stays flat whatever the file's size.
(pandas' parser rather than DuckDB's, because its errors carry the line numbers that our
messages need, and its reading of quotes, blank lines and ragged rows is what the bad-input
corpus in ``tests/bad_inputs`` pins down.)

Decoding: UTF-8 (a byte-order mark is fine) and UTF-16 with a byte-order mark are read; any
other encoding is refused at the first byte that is not UTF-8, with its row and column.
The delimiter is taken from the header line: a comma, else a semicolon, tab or bar if the header
holds one. NUL bytes are refused (a binary file such as a workbook renamed .csv). Rows with more
fields than the header are refused.
"""

from __future__ import annotations

import codecs
import csv
import re
from collections import Counter
from collections.abc import Iterator
from pathlib import Path

from ..lazy import pandas as pd

from ..errors import InputError
from ..wording import list_names, shorten

__all__ = ["CHUNK_ROWS", "CsvText", "delimiter", "header_fields", "iter_csv_chunks"]

#: Rows per chunk: small enough that a chunk of wide rows stays well under 100 MB.
CHUNK_ROWS = 200_000
_BLOCK = 1 << 20  # bytes read and decoded at a time
_BOMS = ((codecs.BOM_UTF8, "utf-8"), (codecs.BOM_UTF16_LE, "utf-16-le"), (codecs.BOM_UTF16_BE, "utf-16-be"))
_FIELDS = re.compile(r"Expected (\d+) fields in line (\d+), saw (\d+)")
_QUOTE = re.compile(r"EOF inside string starting at row (\d+)")
_NUL = "holds a NUL byte, so it is not a text CSV file (a workbook? export it as CSV)"


# Files that are not text at all, by their first bytes (magic numbers), so that a compressed file
# passed as CSV gets a sentence instead of binary bytes read as a column name.
# (A workbook, a zip archive, is caught by its NUL bytes with a message of its own.)
_PACKED = ((b"\x1f\x8b", "a gzip-compressed file"), (b"BZh", "a bzip2-compressed file"), (b"PAR1", "a Parquet file"))
_UNPACK = {b"PAR1": "name it .parquet"}


class CsvText:
    """A file's text for pandas' parser, decoded and checked for NUL bytes block by block.

    Keeps the count of line breaks and the text of the current line decoded so far, so that a
    bad byte found anywhere in a multi-GB file is reported with its row and column.
    """

    def __init__(self, path: Path, source: str):
        self._file = open(path, "rb")
        self.source = source
        head = self._file.read(4)
        for magic, what in _PACKED:
            if head.startswith(magic):
                self._file.close()
                raise InputError(source, f"is {what}, not CSV text; {_UNPACK.get(magic, 'unpack it first and give the CSV inside')}")
        self.encoding, skip = "utf-8", 0
        for bom, encoding in _BOMS:
            if head.startswith(bom):
                self.encoding, skip = encoding, len(bom)
                break
        self._file.seek(skip)
        self._decoder = codecs.getincrementaldecoder(self.encoding)("strict")
        self._pending = ""
        self._eof = False
        self._breaks = 0          # line breaks in the text decoded so far
        self._line = ""           # decoded text after the last line break
        self.header = ""
        self.header = self._first_line()

    def close(self) -> None:
        self._file.close()

    @property
    def bytes_read(self) -> int:
        """Bytes handed to the parser so far (pending text counted as read: a block at most)."""
        return self._file.tell()

    def _first_line(self) -> str:
        while "\n" not in self._pending and not self._eof:
            self._fill()
        self._pending = self._pending.lstrip("\ufeff")
        return self._pending.split("\n", 1)[0]

    def only_blank(self) -> bool:
        """True when the whole file is whitespace (reads ahead only as far as the first other character)."""
        while not self._pending.strip("\ufeff \t\r\n") and not self._eof:
            self._fill()
        return not self._pending.strip("\ufeff \t\r\n")

    def _fill(self) -> None:
        raw = self._file.read(_BLOCK)
        self._eof = not raw
        try:
            text = self._decoder.decode(raw, final=self._eof)
        except UnicodeDecodeError as exc:
            before = exc.object[: exc.start].decode(self.encoding, "replace")
            whole = exc.object.decode(self.encoding, "replace")
            row, column = self._locate(before, None if self._breaks else self._line + whole)
            what = "UTF-16" if self.encoding.startswith("utf-16") else "UTF-8"
            bad = exc.object[exc.start] if exc.start < len(exc.object) else 0
            raise InputError(self.source, f"byte 0x{bad:02x} is not {what} text; save the file as UTF-8",
                             row=row, column=column) from None
        nul = text.find("\x00")
        if nul >= 0:
            if not self._breaks and "\n" not in text[:nul]:
                raise InputError(self.source, "the header holds a NUL byte, so it is not a text CSV file "
                                 "(a workbook? export it as CSV)")
            row, column = self._locate(text[:nul], None if self._breaks else self._line + text)
            raise InputError(self.source, _NUL, row=row, column=column)
        self._count(text)
        self._pending += text

    def _count(self, text: str) -> None:
        breaks = text.count("\n")
        self._breaks += breaks
        self._line = text[text.rfind("\n") + 1:] if breaks else self._line + text

    def _locate(self, before: str, start: str | None) -> tuple[int, str]:
        """Row (1-based, header excluded) and column name of the character after ``before``.

        ``start``: the text from the file's start, when the header line is still being read.
        """
        breaks = self._breaks + before.count("\n")
        line = before[before.rfind("\n") + 1:] if "\n" in before else self._line + before
        header_line = self.header if start is None else start.split("\n", 1)[0]
        try:
            header = next(csv.reader([header_line.lstrip("\ufeff")]), [""])
        except csv.Error:
            header = [""]
        field = line.count(",")
        name = header[field].strip() if field < len(header) else f"{field + 1} (past the header)"
        return max(1, breaks), name or str(field + 1)

    def read(self, size: int = -1) -> str:
        while not self._eof and (size < 0 or len(self._pending) < size):
            self._fill()
        if size < 0 or size >= len(self._pending):
            out, self._pending = self._pending, ""
        else:
            out, self._pending = self._pending[:size], self._pending[size:]
        return out

    def __iter__(self):  # pandas checks for it; the C parser only calls read()
        return iter(lambda: self.read(_BLOCK), "")


def delimiter(header_line: str) -> str:
    if "," in header_line:
        return ","
    counts = {d: header_line.count(d) for d in (";", "\t", "|")}
    best = max(counts, key=counts.get)
    return best if counts[best] else ","


def header_fields(line: str, sep: str, source: str) -> list[str]:
    """The header's names; refuses line ends of a lone carriage return and unreadable headers."""
    if "\r" in line.rstrip("\r"):
        raise InputError(source, "lines end with a carriage return alone (an old Mac format); save the file "
                         "with LF or CRLF line ends")
    try:
        return next(csv.reader([line], delimiter=sep), [])
    except csv.Error as exc:       # e.g. a field longer than the csv module's limit (131,072 characters)
        raise InputError(source, f"the header cannot be read ({exc}); is this a CSV file?") from None


def _check_header(names: list[str], source: str) -> None:
    counts = Counter(n.strip().lstrip("\ufeff").strip().lower() for n in names)
    dupes = sorted(n for n, k in counts.items() if k > 1)
    if dupes:
        shown = list_names([shorten(d) if d else "(empty)" for d in dupes])
        raise InputError(source, f"the header names {shown} more than once (column names are case-insensitive)")


def iter_csv_chunks(path: Path, source: str, rows: int = CHUNK_ROWS, progress=None) -> Iterator[pd.DataFrame]:
    """Frames of at most ``rows`` rows, every cell a Python string ('' when empty), the header as written.

    Each frame's index continues the previous one's (0-based data row numbers in the file).
    An empty file is refused; a header with no rows yields one empty frame.
    ``progress(done, total)`` is called after each frame with the bytes read so far.
    """
    text = CsvText(path, source)
    total = path.stat().st_size
    try:
        if text.only_blank():
            raise InputError(source, "the file is empty")
        sep = delimiter(text.header)
        header = header_fields(text.header, sep, source)
        _check_header(header, source)
        try:
            # object, not str: pandas' conversion to its string type costs more than the parse
            reader = pd.read_csv(text, sep=sep, dtype=object, keep_default_na=False, skip_blank_lines=True,
                                 chunksize=rows)
            first = True
            for chunk in reader:
                if first and not isinstance(chunk.index, pd.RangeIndex):
                    # pandas takes the first column as an index when every row has one field too many
                    raise InputError(source, f"has {len(header) + 1} fields; the header has {len(header)}",
                                     row=1, column=f"{len(header) + 1} (past the header)")
                first = False
                yield chunk
                if progress:
                    progress(min(text.bytes_read, total), total)
            if first:
                yield pd.DataFrame({name: pd.Series([], dtype=str) for name in header})
        except pd.errors.EmptyDataError:
            raise InputError(source, "the file is empty") from None
        except pd.errors.ParserError as exc:
            raise _parser_error(str(exc), header, source) from None
    finally:
        text.close()


def _parser_error(message: str, header: list[str], source: str) -> InputError:
    if m := _FIELDS.search(message):
        expected, line, saw = map(int, m.groups())
        return InputError(source, f"has {saw} fields; the header has {expected}", row=line - 1,
                          column=f"{expected + 1} (past the header)")
    if m := _QUOTE.search(message):
        return InputError(source, "a quoted field is not closed before the end of the file",
                          row=int(m[1]), column=header[0].strip() if header else "1")
    return InputError(source, f"cannot be read as CSV: {message.strip().splitlines()[0]}")
