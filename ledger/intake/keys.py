"""The series identity rule: how keys (series, model, origin and period labels) are read.

A key is trimmed of white space at both ends and put in Unicode NFC form, so ``café`` typed as
one code point or as ``e`` + combining acute is one series. Characters that make two keys look
alike while they differ, or that act on a reader's terminal, are refused with the row and
column: control characters (C0, DEL and C1, which includes NUL, ESC, tab and line breaks),
bidirectional embeddings, overrides, isolates and marks, and zero-width characters (including
the byte-order mark U+FEFF). Case is significant — ``North`` and ``north`` are two series — but
keys that differ only by case are named in a warning, within a file and against the ledger.
"""

from __future__ import annotations

import unicodedata

import numpy as np
from ..lazy import pyarrow as pa
from ..lazy import pyarrow_compute as pc

from ..errors import InputError, LedgerError
from ..wording import list_names, shorten

__all__ = ["normalise_keys", "key_problem", "check_option", "case_twins_warning", "REFUSED_RANGES", "REFUSED_PATTERN"]

#: (first, last, what) code point ranges a key may not hold
REFUSED_RANGES = (
    (0x00, 0x1F, "a control character"), (0x7F, 0x9F, "a control character"),
    (0x061C, 0x061C, "a bidirectional mark"), (0x200E, 0x200F, "a bidirectional mark"),
    (0x202A, 0x202E, "a bidirectional embedding or override"), (0x2066, 0x2069, "a bidirectional isolate"),
    (0x200B, 0x200D, "a zero-width character"), (0x2060, 0x2060, "a zero-width character"),
    (0xFEFF, 0xFEFF, "a byte-order mark"),
)
REFUSED_PATTERN = "[" + "".join(f"\\x{{{a:04X}}}-\\x{{{b:04X}}}" for a, b, _ in REFUSED_RANGES) + "]"


def _what(ch: str) -> str:
    code = ord(ch)
    return next(what for a, b, what in REFUSED_RANGES if a <= code <= b)


def key_problem(text: str) -> str | None:
    """Why ``text`` (already trimmed and normalised) cannot be a key, or None."""
    for ch in text:
        code = ord(ch)
        if any(a <= code <= b for a, b, _ in REFUSED_RANGES):
            name = f"U+{code:04X} {unicodedata.name(ch, '')}".strip()
            return (f"'{shorten(ascii(text)[1:-1])}' holds {_what(ch)} ({name}); "
                    "keys may not hold control, bidirectional or zero-width characters")
    return None


def normalise_keys(source: str, text: pa.Array, column: str) -> pa.Array:
    """Trimmed NFC keys; refuses the first row holding a character of :data:`REFUSED_RANGES`."""
    text = pc.utf8_normalize(pc.utf8_trim_whitespace(text), form="NFC")
    bad = pc.match_substring_regex(text, REFUSED_PATTERN).to_numpy(zero_copy_only=False)
    if bad.any():
        i = int(np.argmax(bad))
        raise InputError(source, key_problem(text[i].as_py()), row=i + 1, column=column)
    return text


def check_option(option: str, flag: str) -> str:
    """A key given on the command line (``--model``, ``--origin``), read by the same rule as a column."""
    text = unicodedata.normalize("NFC", str(option).strip())
    if not text:
        raise LedgerError(f"{flag} is empty; give a name")
    if problem := key_problem(text):
        raise LedgerError(f"{flag} {problem}")
    return text


def case_twins_warning(source: str, what: str, groups: list[list[str]]) -> str | None:
    """One warning naming keys that differ only by case (each group sorted), or None."""
    if not groups:
        return None
    shown = list_names([" / ".join(repr(k) for k in g) for g in groups], 5)
    return (f"{source}: {what} names that differ only by case: {shown}; they are different {what} "
            "(case is significant)")
