"""Input tables (CSV, Parquet or a pandas DataFrame) as a stream of chunks.

Nothing here holds a whole file in memory: CSV comes through :func:`csvread.iter_csv_chunks`,
Parquet one row group batch at a time, and a DataFrame in slices. Column names are lower-cased
and trimmed once, from the header, and checked for duplicates.
"""

from __future__ import annotations

import dataclasses
import itertools
import os
from collections import Counter
from collections.abc import Iterator
from pathlib import Path

from ..lazy import pandas as pd

from .csvread import CHUNK_ROWS, iter_csv_chunks
from ..errors import InputError

__all__ = ["Chunk", "Table", "open_table", "read_table"]


@dataclasses.dataclass(frozen=True)
class Chunk:
    """Rows ``offset + 1`` … ``offset + len(frame)`` of a table (1-based, header excluded)."""

    offset: int
    frame: pd.DataFrame  # RangeIndex from 0, lower-cased column names


@dataclasses.dataclass
class Table:
    source: str
    columns: list[str]
    chunks: Iterator[Chunk]


def open_table(data: str | os.PathLike | pd.DataFrame, *, name: str | None = None,
               rows: int | None = None, progress=None) -> Table:
    """Open a file or frame for reading in chunks; refuse it at once when it has no data rows.

    ``progress(done, total)`` is called after each chunk and once at the end with done = total:
    bytes for a CSV file, rows for Parquet and DataFrames.
    """
    rows = rows or CHUNK_ROWS
    report = progress or (lambda done, total: None)
    if isinstance(data, pd.DataFrame):
        source = name or "<DataFrame>"
        frames: Iterator[pd.DataFrame] = _frame_slices(data, rows, report)
    else:
        path = Path(data)
        source = name or path.name
        frames = _file_frames(path, source, rows, report)
    first = next(frames)
    columns = [str(c).strip().lstrip("\ufeff").strip().lower() for c in first.columns]
    counts = Counter(columns)
    dupes = sorted(c for c, k in counts.items() if k > 1)
    if dupes:
        shown = ", ".join(d if d else "(empty)" for d in dupes)
        raise InputError(source, f"the header names {shown} more than once (column names are case-insensitive)")
    if len(first) == 0:
        raise InputError(source, "the file has a header but no data rows")
    return Table(source, columns, _chunks(first, frames, columns))


def _chunks(first: pd.DataFrame, rest: Iterator[pd.DataFrame], columns: list[str]) -> Iterator[Chunk]:
    offset = 0
    for frame in itertools.chain([first], rest):
        if len(frame) == 0:
            continue
        frame = frame.set_axis(columns, axis=1).reset_index(drop=True)
        yield Chunk(offset, frame)
        offset += len(frame)


def _frame_slices(data: pd.DataFrame, rows: int, report) -> Iterator[pd.DataFrame]:
    for i in range(0, max(len(data), 1), rows):
        yield data.iloc[i:i + rows]
        report(min(i + rows, len(data)), len(data))


def _file_frames(path: Path, source: str, rows: int, report) -> Iterator[pd.DataFrame]:
    if not path.exists():
        raise InputError(source, f"no such file: {path}")
    if path.is_dir():
        raise InputError(source, f"{path} is a folder, not a file")
    if not path.is_file():      # a FIFO or a terminal would block the read, perhaps forever
        raise InputError(source, "this is not a regular file but a pipe, a device or standard input; "
                         "save the data to a file and give that")
    if path.suffix.lower() not in (".parquet", ".pq"):
        return iter_csv_chunks(path, source, rows, report)
    return _parquet_frames(path, source, rows, report)


def _parquet_frames(path: Path, source: str, rows: int, report) -> Iterator[pd.DataFrame]:
    import pyarrow as pa
    import pyarrow.parquet as pq

    try:
        file = pq.ParquetFile(path)
        index = [c for c in file.schema_arrow.names if c.startswith("__index_level_")]
        columns = [c for c in file.schema_arrow.names if c not in index]
        yielded, total, done = False, file.metadata.num_rows, 0
        for batch in file.iter_batches(batch_size=rows, columns=columns):
            yielded = True
            yield batch.to_pandas()
            done += batch.num_rows
            report(done, total)
        if not yielded:
            yield file.schema_arrow.empty_table().select(columns).to_pandas()
    except (ValueError, OSError, pa.ArrowException) as exc:
        first = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
        raise InputError(source, f"cannot be read as Parquet: {first}") from None


def read_table(data: str | os.PathLike | pd.DataFrame, *, name: str | None = None) -> tuple[str, pd.DataFrame]:
    """A whole table in memory, for inputs that are small by nature (one row per series)."""
    table = open_table(data, name=name)
    return table.source, pd.concat([c.frame for c in table.chunks], ignore_index=True)
