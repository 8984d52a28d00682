"""Content hashes of runs and of actual revisions: canonical forms that are injective.

A content hash is only as good as its canonical form: if two different contents can encode to
the same bytes, the second is taken for the first ("already in the ledger; nothing written")
and is lost. So every field here is length-prefixed or of fixed width, never joined with a
separator that could itself occur in a name.

Run hash (version 2): SHA-256 over the fields, each written as an 8-byte little-endian length
followed by its bytes: the tag ``backsight-run-v2``, model, frequency, origin index, the row
count, the lengths of the series keys (int64 each) and their UTF-8 bytes, then ``period_index``
and ``point`` and, per interval level in increasing order, the level and its lower and upper
bounds, per quantile level in increasing order, tau and its values — rows sorted by (series,
period_index), floats as little-endian IEEE-754 bytes with -0.0 written as 0.0 and every NaN (a
bound absent from a row) as the same NaN. A level with no value in the run is left out, so a run
hashes alike however many other runs shared its file.

Actual revisions: each row of ``actuals`` carries ``chain_hash``, the SHA-256 (hex) of the
previous revision's ``chain_hash`` ('' for revision 1) followed by length-prefixed series,
period index, revision, value (DuckDB's shortest round-trip text of the double, -0 as 0) and
the recorded time in microseconds; so a changed value or time breaks its own row and every
later revision's. ``actual_writes`` holds, per write, its row count and a checksum of its rows'
chain hashes (the exact sum of their first 60 bits), so a deleted revision is found too. Both are
computed in SQL (:func:`chain_hash_sql`, :func:`write_hash_sql`), at write time and by verify.
"""

from __future__ import annotations

import hashlib
from collections.abc import Sequence

import numpy as np
from .lazy import pandas as pd
from .lazy import pyarrow as pa

__all__ = ["run_content_hash", "run_rows", "chain_hash_sql", "write_hash_sql"]

_RUN_TAG = b"backsight-run-v2"


def _field(digest, data: bytes) -> None:
    digest.update(len(data).to_bytes(8, "little"))
    digest.update(data)


def _floats(values) -> bytes:
    array = np.asarray(values, dtype="<f8") + 0.0          # -0.0 + 0.0 is 0.0
    array = np.where(np.isnan(array), np.nan, array)        # one NaN bit pattern
    return np.ascontiguousarray(array, dtype="<f8").tobytes()


def _keys(keys) -> tuple[bytes, bytes]:
    """(int64 lengths in bytes, concatenated UTF-8 bytes) of the keys (an array of str, or an
    Arrow string array as the importer streams them): together injective."""
    array = keys.cast(pa.large_string()) if isinstance(keys, pa.Array) else \
        pa.array([str(k) for k in keys], pa.large_string())
    # a slice of a batch (the importer hands each run its slice) starts at array.offset, not 0
    offsets = np.frombuffer(array.buffers()[1], dtype="<i8")[array.offset: array.offset + len(array) + 1]
    data = array.buffers()[2]
    body = b"" if data is None else data.to_pybytes()[offsets[0]:offsets[-1]]
    return np.diff(offsets).astype("<i8").tobytes(), body


def _column(part, name: str, dtype) -> np.ndarray:
    values = part[name]
    if isinstance(values, pd.Series):
        return values.to_numpy(dtype=dtype, na_value=np.nan) if dtype == "float64" else values.to_numpy(dtype=dtype)
    return np.asarray(values, dtype=dtype)


def _canonical_order(series: np.ndarray, period_index: np.ndarray) -> np.ndarray | None:
    """The permutation sorting rows by (series, period_index); None when they are sorted already
    (the writer and verify read them sorted, so the check is all they pay)."""
    if len(series) < 2:
        return None
    a, b = series[:-1], series[1:]
    if np.all((a < b) | ((a == b) & (period_index[:-1] < period_index[1:]))):
        return None
    codes = pd.factorize(series, sort=True)[0]       # code point order, as Python compares str
    return np.lexsort((period_index, codes))


def run_content_hash(model: str, frequency: str, origin_index: int, part,
                     levels: Sequence[float] = (), taus: Sequence[float] = ()) -> str:
    """SHA-256 (hex) over a run's canonical form (module docstring).

    ``part`` (a DataFrame, or a mapping of column name to array) holds the run's rows: series,
    period_index, point, ``lo_<i>``/``hi_<i>`` for ``levels[i]`` and ``q_<j>`` for ``taus[j]``
    (NaN where a row has none); other columns are ignored. The hash does not depend on row
    order, on the order of ``levels`` or ``taus``, on the sign of a zero, or on levels absent
    from the run.
    """
    arrow_keys = part["series"] if isinstance(part["series"], pa.Array) else None
    series = _column(part, "series", object)
    period_index = _column(part, "period_index", "int64")
    order = _canonical_order(series, period_index)

    def get(name: str, dtype="float64") -> np.ndarray:
        values = _column(part, name, dtype)
        return values if order is None else values[order]

    if order is not None:
        series, period_index = series[order], period_index[order]
    digest = hashlib.sha256()
    for text in (_RUN_TAG.decode(), model, frequency, str(int(origin_index)), str(len(series))):
        _field(digest, text.encode())
    for data in _keys(arrow_keys if arrow_keys is not None and order is None else series):
        _field(digest, data)
    _field(digest, np.ascontiguousarray(period_index, dtype="<i8").tobytes())
    _field(digest, _floats(get("point")))
    for i in sorted(range(len(levels)), key=lambda i: levels[i]):
        lower = get(f"lo_{i}")
        if np.isnan(lower).all():
            continue
        for data in (b"L", _floats([levels[i]]), _floats(lower), _floats(get(f"hi_{i}"))):
            _field(digest, data)
    for j in sorted(range(len(taus)), key=lambda j: taus[j]):
        values = get(f"q_{j}")
        if np.isnan(values).all():
            continue
        for data in (b"Q", _floats([taus[j]]), _floats(values)):
            _field(digest, data)
    return digest.hexdigest()


def run_rows(con, run_id: str) -> tuple[pd.DataFrame, list[float], list[float]]:
    """A run's stored rows in the form :func:`run_content_hash` reads: (part, levels, taus)."""
    part = con.execute("SELECT series, period_index, point FROM forecasts WHERE run_id = ? "
                       "ORDER BY series, period_index", [run_id]).df()
    bounds = con.execute("SELECT series, period_index, level, lower, upper FROM bounds WHERE run_id = ?",
                         [run_id]).df()
    levels: list[float] = []
    for i, (level, rows) in enumerate(bounds.groupby("level", sort=True)):
        levels.append(float(level))
        rows = rows.drop(columns="level").rename(columns={"lower": f"lo_{i}", "upper": f"hi_{i}"})
        part = part.merge(rows, on=["series", "period_index"], how="left")
    quants = con.execute("SELECT series, period_index, tau, value FROM quantiles WHERE run_id = ?", [run_id]).df()
    taus: list[float] = []
    for j, (tau, rows) in enumerate(quants.groupby("tau", sort=True)):
        taus.append(float(tau))
        part = part.merge(rows.drop(columns="tau").rename(columns={"value": f"q_{j}"}),
                          on=["series", "period_index"], how="left")
    return part, levels, taus


def _text(expr: str) -> str:
    """A length-prefixed SQL text of ``expr`` (injective when concatenated)."""
    return f"(strlen(CAST({expr} AS VARCHAR))::VARCHAR || ':' || CAST({expr} AS VARCHAR))"


def chain_hash_sql(prev: str, series: str, period_index: str, revision: str, value: str,
                   recorded_at: str) -> str:
    """SQL for one revision's chain hash from the previous one's (NULL for revision 1)."""
    parts = [_text(f"coalesce({prev}, '')"), _text(series), _text(period_index), _text(revision),
             _text(f"({value}) + 0.0"), _text(f"epoch_us({recorded_at})")]
    return f"sha256({' || '.join(parts)})"


def write_hash_sql(chain_hash: str, series: str, period_index: str) -> str:
    """SQL aggregate: a checksum of one write's rows, the exact sum of the first 60 bits of their
    chain hashes (as text). A streaming sum, not a hash of the joined hashes: a write of
    millions of rows would build a string of hundreds of megabytes. Order-independent, so
    ``series`` and ``period_index`` are not needed; kept in the signature for the callers' clarity."""
    return f"CAST(sum(CAST('0x' || left({chain_hash}, 15) AS BIGINT)) AS VARCHAR)"
