"""Safe page file names from user-supplied keys, and writes that cannot leave the output folder.

A series key or model name can be anything a forecast file holds: ``../../etc``,
``<script>alert(1)</script>``, ``North/Hoses`` next to ``north/hoses``. A page name is a
lower-case ASCII slug of the key (for people reading a folder listing) followed by a short
SHA-256 digest of the exact key, so two keys that differ only in case, or that slug alike, still
get distinct names, also on case-insensitive file systems. Names never contain a path separator
or start with a dot, and every write is checked to resolve inside the output folder. A report
is written into a hidden sibling folder and swapped in whole (:func:`staged_folder`).
"""

from __future__ import annotations

import contextlib
import errno
import hashlib
import os
import re
import shutil
import tempfile
from collections.abc import Iterable, Iterator
from pathlib import Path

from ledger.errors import LedgerError, naming_file

__all__ = ["NameClash", "UnsafePath", "FolderNotOurs", "MARKER", "claim_folder", "page_name", "page_names",
           "safe_write", "staged_folder"]

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


def claim_folder(out: Path, ledger: Path | None = None) -> None:
    """Check that ``out`` may hold a report: new, empty, or marked as a report's and holding only
    what a report writes (pages, ``tables/`` of CSV files, the marker).

    Anything else is refused naming one of its files, so that a user's own ``index.html`` (or a
    ledger file that happens to be named like a page) is never overwritten; the whole folder is
    replaced by :func:`staged_folder`, so a file a report did not write would be lost with it.
    """
    if out.exists() and not out.is_dir():
        raise FolderNotOurs(f"{out} is a file, not a folder; give a new or empty folder for the report")
    if not out.is_dir():
        return
    found = sorted(p.name for p in out.iterdir())
    if (out / MARKER).is_file():
        found = [name for name in found if not _written_by_a_report(out / name)]
    if found:
        raise FolderNotOurs(f"{out} holds {found[0]!r}{' and more' if len(found) > 1 else ''}, which no report "
                            "wrote; give a new or empty folder (a report writes only where it wrote before)")
    if ledger is not None and Path(ledger).resolve().is_relative_to(out.resolve()):
        raise FolderNotOurs(f"the ledger {ledger} is inside {out}, which a report replaces whole; "
                            "give a folder that does not hold the ledger")


def _written_by_a_report(path: Path) -> bool:
    if path.name == "tables" and path.is_dir() and not path.is_symlink():
        return all(p.is_file() and not p.is_symlink() and p.suffix == ".csv" for p in path.iterdir())
    return path.is_file() and not path.is_symlink() and (path.name == MARKER or path.suffix == ".html")


@contextlib.contextmanager
def staged_folder(out: Path, ledger: Path | None = None) -> Iterator[Path]:
    """Yield a new hidden sibling of ``out`` to write a report into; swap it in for ``out`` when
    the block ends without an error, so a report is written whole or not at all.

    On any error (a full disk, a refused write, a bug) the sibling is removed and ``out``, with
    the report written there before, is as it was. ``ledger`` (the ledger read) may not be inside.
    """
    if out.is_symlink():            # replace the folder it points to, and keep the link
        out = out.resolve()
    claim_folder(out, ledger)
    if out.is_dir() and not os.access(out, os.W_OK):
        # the swap would replace a folder its owner made read-only: refuse as a write into it would
        raise PermissionError(errno.EACCES, os.strerror(errno.EACCES), str(out))
    try:
        out.parent.mkdir(parents=True, exist_ok=True)
        work = Path(tempfile.mkdtemp(prefix=f".{out.name}.", suffix=".partial", dir=out.parent))
    except OSError as exc:          # name the folder asked for, not a temporary name never shown
        raise type(exc)(exc.errno, exc.strerror, str(out)) from exc
    try:
        mask = os.umask(0)
        os.umask(mask)
        work.chmod(out.stat().st_mode & 0o7777 if out.is_dir() else 0o777 & ~mask)   # mkdtemp makes it 0700
        with naming_file(work / MARKER):
            (work / MARKER).write_text("This folder was written by backsight report; it may replace the files "
                                       "here.\n", encoding="utf-8")
        yield work
        _swap(work, out)
    except OSError as exc:
        shutil.rmtree(work, ignore_errors=True)
        inside = str(exc.filename or "")
        if exc.errno is None or not inside.startswith(str(work)):
            raise
        # the message names the file as it would have been in ``out``, not the hidden sibling
        raise type(exc)(exc.errno, exc.strerror, str(out) + inside[len(str(work)):]) from exc
    except BaseException:
        shutil.rmtree(work, ignore_errors=True)
        raise


def _swap(work: Path, out: Path) -> None:
    """Put the finished ``work`` at ``out``; the old ``out`` is moved aside first and put back if
    the second rename fails, then removed."""
    if not out.exists():
        os.rename(work, out)
        return
    old = work.with_name(work.name.removesuffix(".partial") + ".old")
    os.rename(out, old)
    try:
        os.rename(work, out)
    except OSError:
        os.rename(old, out)
        raise
    shutil.rmtree(old, ignore_errors=True)


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
