"""Text for a terminal: names made inert, sentences wrapped and tables fitted to the width.

Everything the command line prints for people goes through here. Names from the ledger are user
input: they are never handed to rich (whose markup would read ``[/]`` or ``[link=…]``) and
characters that steer a terminal — C0/C1 controls such as ESC, line and paragraph separators,
bidi overrides and other format characters — are shown as Python-style escapes (``\\x1b``,
``\\u202e``), so a name can neither recolour, clear nor forge a line of output.

Tables: numbers right-aligned with four significant digits; identifiers (run ids, model and
series names, labels) never wrap — when a table is wider than the terminal they are shortened
in the middle with an ellipsis (csv/json always carry the full values); sentence columns wrap
at spaces. Width: ``COLUMNS`` when set, else the terminal's; output that is not a terminal and
has no ``COLUMNS`` is not limited.
"""

from __future__ import annotations

import math
import os
import re
import shutil
import sys
import unicodedata
from collections.abc import Sequence
from typing import Any

from ..lazy import pandas as pd
from rich.cells import cell_len

__all__ = ["printable", "out_width", "wrap", "error_lines", "command_lines", "middle", "render_table", "cell_text", "SENTENCE_COLUMNS"]

ELLIPSIS = "…"
GAP = "  "
MIN_ID = 8        # an identifier shortened below this is no longer recognisable
COMFORTABLE = 18  # long enough to tell most names apart
KEY_COLUMNS = frozenset({"run_id", "model", "series", "incumbent", "challenger", "kind", "horizon", "#"})
MIN_SENTENCE = 24
# Columns that hold prose: they wrap at spaces instead of being shortened.
SENTENCE_COLUMNS = frozenset({"evidence", "reason", "verdict", "advice", "action", "weighting", "note", "source"})
_UNSAFE = {"Cc", "Cf", "Zl", "Zp", "Cs", "Co", "Cn"}


def printable(text: Any) -> str:
    """``text`` with every character that could steer a terminal written as an escape.

    Control (C0, C1, DEL), format (bidi overrides, zero-width), separator, surrogate,
    private-use and unassigned characters become ``\\xNN`` / ``\\uNNNN`` / ``\\UNNNNNNNN``;
    everything else, including markup brackets and combining marks, is kept as it is.
    """
    s = str(text)
    if s.isprintable() and s.isascii():
        return s
    return "".join(_escape(ch) if unicodedata.category(ch) in _UNSAFE else ch for ch in s)


def _escape(ch: str) -> str:
    code = ord(ch)
    if code < 0x100:
        return f"\\x{code:02x}"
    return f"\\u{code:04x}" if code < 0x10000 else f"\\U{code:08x}"


def out_width(stream=None) -> int | None:
    """The width to fit: COLUMNS if set, else the terminal's; None when not a terminal."""
    env = os.environ.get("COLUMNS", "")
    if env.strip().isdigit() and int(env) > 0:
        return int(env)
    stream = stream or sys.stdout
    try:
        if stream.isatty():
            return shutil.get_terminal_size().columns
    except (AttributeError, ValueError, OSError):
        pass
    return None


def middle(text: str, width: int) -> str:
    """``text`` shortened to ``width`` cells by an ellipsis in the middle (start and end kept)."""
    if cell_len(text) <= width:
        return text
    if width <= 1:
        return ELLIPSIS[:width]
    keep = width - 1
    head, tail = _take(text, (keep + 1) // 2), _take(text[::-1], keep // 2)[::-1]
    return head + ELLIPSIS + tail


def _take(text: str, cells: int) -> str:
    out, used = [], 0
    for ch in text:
        w = cell_len(ch)
        if used + w > cells:
            break
        out.append(ch)
        used += w
    return "".join(out)


def wrap(text: str, width: int | None) -> list[str]:
    """A sentence broken at spaces into lines of at most ``width`` cells.

    A single word longer than the width (a long name) is shortened in the middle rather than
    split, so that no identifier is ever broken across lines. A leading indent and list marker
    (``  1. ``, ``- ``) stay on the first line and the lines after it hang under the text, so a
    wrapped item of a list still reads as one item.
    """
    text = printable(text)
    if width is None or cell_len(text) <= width:
        return [text]
    marker = _MARKER.match(text).group(0)
    if len(marker) >= width // 2:       # a terminal too narrow to hang lines under the text
        marker = ""
    hang = " " * len(marker)
    lines: list[str] = []
    line, words = marker, 0         # words: how many the current line holds after its indent
    for word in text[len(marker):].split(" "):
        word = middle(word, width - len(hang))
        candidate = f"{line} {word}" if words else line + word
        if cell_len(candidate) <= width or not words:
            line, words = candidate, words + 1
        else:
            lines.append(line)
            line, words = hang + word, 1
    lines.append(line)
    return lines


_MARKER = re.compile(r" *(?:\d+\. |- )?")


def error_lines(message: str, stream=None) -> list[str]:
    """An error message as printed on ``stream`` (stderr): one line per problem, so a log or a
    pipe can be searched line by line; on a terminal each line is broken at spaces to its width,
    the rest hanging two spaces in, and a word wider than that (a path, a name) is kept whole.
    """
    stream = stream or sys.stderr
    try:
        width = out_width(stream) if stream.isatty() else None
    except (AttributeError, ValueError, OSError):
        width = None
    out: list[str] = []
    for text in (printable(line) for line in message.split("\n")):
        if width is None or cell_len(text) <= width:
            out.append(text)
            continue
        line, hang = "", " " * min(2, width // 4)
        for word in text.split(" "):
            candidate = f"{line} {word}" if line.strip() else line + word
            if cell_len(candidate) <= width or not line.strip():
                line = candidate
            else:
                out.append(line)
                line = hang + word
        out.append(line)
    return out


def command_lines(command: str, width: int | None) -> list[str]:
    """A shell command to copy: never shortened, and broken at spaces only with a trailing
    ``\\`` on each line but the last (a POSIX shell joins them), the rest indented."""
    command = printable(command)
    if width is None or cell_len(command) <= width:
        return [command]
    lead = command[:len(command) - len(command.lstrip(" "))]
    indent = lead + "    "
    lines: list[str] = []
    line, words = lead, 0
    for word in command[len(lead):].split(" "):
        candidate = f"{line} {word}" if words else line + word
        if cell_len(candidate) + 2 <= width or not words:     # + 2: room for the " \\"
            line, words = candidate, words + 1
        else:
            lines.append(line + " \\")
            line, words = indent + word, 1
    lines.append(line)
    return lines


def cell_text(value: Any) -> str:
    """A table cell: '–' for missing, numbers with four significant digits, text made printable."""
    if value is None or value is pd.NA or value is pd.NaT:
        return "–"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, int) or (hasattr(value, "dtype") and getattr(value.dtype, "kind", "") in "iu"):
        return f"{int(value):,}"
    if isinstance(value, float):
        if not math.isfinite(value):
            return "–" if value != value else ("∞" if value > 0 else "−∞")
        return f"{value:,.4g}" if abs(value) < 1e5 else f"{value:,.0f}"
    if isinstance(value, pd.Timestamp):
        return value.strftime("%Y-%m-%d %H:%M:%S")
    return printable(value)


def render_table(frame: pd.DataFrame, *, title: str | None = None, width: int | None = None,
                 keep: Sequence[str] = ()) -> list[str]:
    """The lines of a plain-text table of ``frame`` fitted to ``width`` cells (None: natural width).

    ``keep``: columns never left out for the width (besides the first and the usual keys).
    """
    headers = [printable(c) for c in frame.columns]
    numeric = [pd.api.types.is_numeric_dtype(frame[c]) and not pd.api.types.is_bool_dtype(frame[c])
               for c in frame.columns]
    cells = [[cell_text(v) for v in frame[c].tolist()] for c in frame.columns]
    prose = [str(c) in SENTENCE_COLUMNS for c in frame.columns]
    widths = [max([cell_len(h)] + [cell_len(x) for x in col]) for h, col in zip(headers, cells)]
    keys = frozenset(i for i, c in enumerate(frame.columns) if str(c) in KEY_COLUMNS or str(c) in keep or i == 0)
    shown = _fit(widths, headers, numeric, prose, width, keys)
    lines = wrap(title, width) if title else []
    cols = [i for i in range(len(headers)) if shown[i] > 0]
    lines.append(_row([_pad(middle(headers[i], shown[i]), shown[i], numeric[i]) for i in cols]))
    lines.append(_row(["─" * shown[i] for i in cols]))
    for r in range(len(frame)):
        parts = {i: (wrap(cells[i][r], shown[i]) if prose[i] else [middle(cells[i][r], shown[i])]) for i in cols}
        for k in range(max(len(p) for p in parts.values()) if parts else 1):
            lines.append(_row([_pad(parts[i][k] if k < len(parts[i]) else "", shown[i], numeric[i]) for i in cols]))
    hidden = [headers[i] for i in range(len(headers)) if shown[i] == 0]
    if hidden:
        lines += wrap(f"({len(hidden)} more column{'s' if len(hidden) != 1 else ''} not shown for the width: "
                      f"{', '.join(hidden)}; --format csv has them all)", width)
    return lines


def _row(parts: Sequence[str]) -> str:
    return GAP.join(parts).rstrip()


def _pad(text: str, width: int, right: bool) -> str:
    fill = " " * max(0, width - cell_len(text))
    return fill + text if right else text + fill


def _fit(widths: list[int], headers: list[str], numeric: list[bool], prose: list[bool],
         width: int | None, keys: frozenset[int] = frozenset()) -> list[int]:
    """Column widths that fit ``width``; 0 for a column left out.

    In order, until the table fits: sentence columns wrap (down to MIN_SENTENCE); identifiers
    shorten to COMFORTABLE; trailing columns that are not keys are left out; identifiers
    shorten to MIN_ID; trailing columns are left out.
    """
    shown = list(widths)
    if width is None:
        return shown

    def total() -> int:
        used = [w for w in shown if w > 0]
        return sum(used) + len(GAP) * (len(used) - 1)

    for i in sorted(range(len(shown)), key=lambda i: -shown[i]):
        if prose[i] and total() > width:
            shown[i] = max(min(shown[i], MIN_SENTENCE), shown[i] - (total() - width))
    _shorten(shown, numeric, prose, COMFORTABLE, total, width)
    for i in reversed(range(1, len(shown))):
        if total() <= width:
            break
        if i not in keys:
            shown[i] = 0
    _shorten(shown, numeric, prose, MIN_ID, total, width)
    while total() > width and sum(1 for w in shown if w > 0) > 1:
        shown[max(i for i in range(len(shown)) if shown[i] > 0)] = 0
    return shown


def _shorten(shown: list[int], numeric: list[bool], prose: list[bool], floor: int, total, width: int) -> None:
    """Shorten the widest identifier columns, never below ``floor``, until the table fits."""
    while total() > width:
        shrinkable = [i for i in range(len(shown)) if not numeric[i] and not prose[i] and shown[i] > floor]
        if not shrinkable:
            return
        i = max(shrinkable, key=lambda i: shown[i])
        shown[i] = max(floor, shown[i] - (total() - width))
