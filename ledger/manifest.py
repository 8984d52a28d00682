"""The manifest of an export folder: what was written, from which ledger state, and each file's checksum.

An export folder holds ``manifest.json`` beside its data files. Readers (``import``, ``verify``,
the Spark and DuckDB lake readers) trust only the files the manifest lists, so files left by an
interrupted export are never read. The manifest is replaced atomically (written to a temporary
name, flushed to disk, then renamed over the old one), so a reader sees either the previous
export or the new one, never a mixture.

Fields: ``manifest_version``; ``layout`` ("partitioned" for a lake, "flat" for one file per
table); ``format``; ``schema_version`` of the ledger; ``ledger_created_at`` (the ledger's
``created_at`` meta value, to recognise the same ledger on the next export); ``recorded_up_to``
(the newest run or revision time included); ``state_hash`` (:meth:`ledger.store.Store.state_hash`
at that time); ``exports`` (how many exports wrote into the folder); ``tables`` (rows per table)
and ``files`` (path relative to the folder, table, rows, bytes, SHA-256).
"""

from __future__ import annotations

import dataclasses
import hashlib
import json
import os
from pathlib import Path

from .errors import LedgerError

__all__ = ["MANIFEST_NAME", "MANIFEST_VERSION", "ExportFile", "Manifest", "BadManifest",
           "file_checksum", "read_manifest", "write_manifest", "check_files"]

MANIFEST_NAME = "manifest.json"
MANIFEST_VERSION = 1
_CHUNK = 1 << 20


class BadManifest(LedgerError):
    """An export folder's manifest is missing, unreadable or of an unknown version."""


@dataclasses.dataclass(frozen=True)
class ExportFile:
    """One data file of an export."""

    path: str       # relative to the export folder, with forward slashes
    table: str
    rows: int
    bytes: int
    sha256: str


@dataclasses.dataclass(frozen=True)
class Manifest:
    """What an export folder holds (see the module docstring for each field)."""

    layout: str
    format: str
    schema_version: int
    ledger_created_at: str
    recorded_up_to: str | None
    state_hash: str
    exports: int
    files: tuple[ExportFile, ...]
    manifest_version: int = MANIFEST_VERSION

    @property
    def tables(self) -> dict[str, int]:
        """Rows per table, summed over its files."""
        out: dict[str, int] = {}
        for f in self.files:
            out[f.table] = out.get(f.table, 0) + f.rows
        return out

    def files_of(self, table: str) -> list[ExportFile]:
        return [f for f in self.files if f.table == table]

    def to_json(self) -> str:
        body = dataclasses.asdict(self)
        body["tables"] = self.tables
        return json.dumps(body, indent=1, sort_keys=True) + "\n"


def file_checksum(path: str | os.PathLike) -> str:
    """SHA-256 of a file's bytes, read a megabyte at a time."""
    digest = hashlib.sha256()
    with open(path, "rb") as fh:
        while block := fh.read(_CHUNK):
            digest.update(block)
    return digest.hexdigest()


def read_manifest(folder: str | os.PathLike) -> Manifest:
    """The manifest of ``folder``; :class:`BadManifest` when it is missing or unreadable."""
    path = Path(folder) / MANIFEST_NAME
    try:
        return parse_manifest(path.read_text(encoding="utf-8"), str(path))
    except FileNotFoundError:
        raise BadManifest(f"{folder} has no {MANIFEST_NAME}; give a folder written by backsight export") from None


def parse_manifest(text: str, where: str) -> Manifest:
    """A manifest from its JSON text (``where`` names it in messages)."""
    try:
        body = json.loads(text)
        version = int(body["manifest_version"])
        if version > MANIFEST_VERSION:
            raise BadManifest(f"{where} has manifest version {version}, newer than this Backsight "
                              f"understands ({MANIFEST_VERSION}); upgrade Backsight")
        files = tuple(ExportFile(**f) for f in body["files"])
        return Manifest(layout=body["layout"], format=body["format"], schema_version=int(body["schema_version"]),
                        ledger_created_at=body["ledger_created_at"], recorded_up_to=body["recorded_up_to"],
                        state_hash=body["state_hash"], exports=int(body["exports"]), files=files,
                        manifest_version=version)
    except (ValueError, KeyError, TypeError) as exc:
        raise BadManifest(f"{where} is not a readable Backsight manifest ({type(exc).__name__}: {exc})") from None


def write_manifest(folder: str | os.PathLike, manifest: Manifest) -> Path:
    """Replace ``folder``'s manifest atomically: temporary file, fsync, rename, fsync of the folder."""
    folder = Path(folder)
    target = folder / MANIFEST_NAME
    tmp = folder / f".{MANIFEST_NAME}.tmp"
    with open(tmp, "w", encoding="utf-8") as fh:
        fh.write(manifest.to_json())
        fh.flush()
        os.fsync(fh.fileno())
    os.replace(tmp, target)
    _fsync_dir(folder)
    return target


def _fsync_dir(folder: Path) -> None:
    # The rename is durable only once the folder entry is on disk (POSIX); Windows has no such call.
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


def check_files(folder: str | os.PathLike, manifest: Manifest) -> list[str]:
    """Problems with the listed files: missing, another size, another checksum (empty: all sound)."""
    problems = []
    for f in manifest.files:
        path = Path(folder) / f.path
        if not path.is_file():
            problems.append(f"{f.path}: missing")
        elif path.stat().st_size != f.bytes:
            problems.append(f"{f.path}: {path.stat().st_size} bytes, the manifest says {f.bytes}")
        elif file_checksum(path) != f.sha256:
            problems.append(f"{f.path}: checksum differs from the manifest")
    return problems
