"""Safe page file names from user-supplied keys, and writes that cannot leave the output folder.

A series key or model name can be anything a forecast file holds: ``../../etc``,
``<script>alert(1)</script>``, ``North/Hoses`` next to ``north/hoses``. A page name is a
lower-case ASCII slug of the key (for people reading a folder listing) followed by a short
SHA-256 digest of the exact key, so two keys that differ only in case, or that slug alike, still
get distinct names, also on case-insensitive file systems. Names never contain a path separator
or start with a dot, and every write is checked to resolve inside the output folder.
"""

from __future__ import annotations

import hashlib
import re
from collections.abc import Iterable
from pathlib import Path

from ledger.errors import LedgerError, naming_file

__all__ = ["NameClash", "UnsafePath", "FolderNotOurs", "MARKER", "claim_folder", "page_name", "page_names",
           "safe_write"]

_SLUG_LEN = 40
_DIGEST_LEN = 10
_NOT_SLUG = re.compile(r"[^a-z0-9]+")


class UnsafePath(LedgerError):
    """A report file would be written outside the output folder."""


class NameClash(LedgerError):
    """Two different keys were given the same page file name."""


class FolderNotOurs(LedgerError):
    """The output folder holds files that no report wrote; a report never overwrites them."""


#: The file that marks a folder as written by ``backsight report`` (and so safe to write again).
MARKER = ".backsight-report"


def claim_folder(out: Path) -> None:
    """Make ``out`` a report folder: create it, or accept it when empty or marked as a report's.

    Anything else is refused naming one of its files, so that a user's own ``index.html`` (or a
    ledger file that happens to be named like a page) is never overwritten.
    """
    if out.exists() and not out.is_dir():
        raise FolderNotOurs(f"{out} is a file, not a folder; give a new or empty folder for the report")
    if out.is_dir() and not (out / MARKER).is_file():
        found = sorted(p.name for p in out.iterdir())
        if found:
            raise FolderNotOurs(f"{out} holds {found[0]!r}{' and more' if len(found) > 1 else ''}, which no report "
                                "wrote; give a new or empty folder (a report writes only where it wrote before)")
    out.mkdir(parents=True, exist_ok=True)
    with naming_file(out / MARKER):
        (out / MARKER).write_text("This folder was written by backsight report; it may overwrite the files here.\n",
                                  encoding="utf-8")


def page_name(prefix: str, key: str) -> str:
    """``<prefix>-<slug>-<digest>.html``; the digest is of the exact key (case and all)."""
    slug = _NOT_SLUG.sub("-", key.lower()).strip("-")[:_SLUG_LEN].strip("-") or "x"
    digest = hashlib.sha256(key.encode("utf-8", "surrogatepass")).hexdigest()[:_DIGEST_LEN]
    return f"{prefix}-{slug}-{digest}.html"


def page_names(prefix: str, keys: Iterable[str]) -> dict[str, str]:
    """Page names for many keys; raises NameClash if two keys share a name (case-folded)."""
    names: dict[str, str] = {}
    seen: dict[str, str] = {}
    for key in keys:
        name = page_name(prefix, key)
        other = seen.setdefault(name.casefold(), key)
        if other != key:
            raise NameClash(f"series or model keys {other!r} and {key!r} share the page name {name}; "
                            "rename one of them")
        names[key] = name
    return names


def safe_write(out_dir: Path, name: str, text: str) -> Path:
    """Write ``text`` (UTF-8) to ``out_dir/name`` after checking it resolves inside ``out_dir``."""
    root = out_dir.resolve()
    target = (root / name).resolve()
    if target.parent != root or name.startswith(".") or "/" in name or "\\" in name:
        raise UnsafePath(f"report page {name!r} would be written to {target}, outside {root}; "
                         "choose another output folder")
    with naming_file(target):        # a full disk fails in write or close, which name no file
        target.write_text(text, encoding="utf-8", newline="\n")
    return target
