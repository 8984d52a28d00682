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
later revision's. ``actual_writes`` holds, per write, its row count and the hash of its rows'
chain hashes in (series, period_index) order, so a deleted revision is found too. Both are
computed in SQL (:func:`chain_hash_sql`, :func:`write_hash_sql`), at write time and by verify.
"""

from __future__ import annotations

import hashlib
from collections.abc import Sequence

import numpy as np
import pandas as pd
import pyarrow as pa

__all__ = ["run_content_hash", "run_rows", "chain_hash_sql", "write_hash_sql"]

_RUN_TAG = b"backsight-run-v2"


def _field(digest, data: bytes) -> None:
    digest.update(len(data).to_bytes(8, "little"))
    digest.update(data)


def _floats(values) -> bytes:
    array = np.asarray(values, dtype="<f8") + 0.0          # -0.0 + 0.0 is 0.0
    array = np.where(np.isnan(array), np.nan, array)        # one NaN bit pattern
    return np.ascontiguousarray(array, dtype="<f8").tobytes()


def _keys(keys: pd.Series) -> tuple[bytes, bytes]:
    """(int64 lengths in bytes, concatenated UTF-8 bytes) of the keys: together injective."""
    array = pa.array(keys.astype(str).tolist(), pa.large_string())
    offsets = np.frombuffer(array.buffers()[1], dtype="<i8")[: len(array) + 1]
    data = array.buffers()[2]
    body = b"" if data is None else data.to_pybytes()[offsets[0]:offsets[-1]]
    return np.diff(offsets).astype("<i8").tobytes(), body


def run_content_hash(model: str, frequency: str, origin_index: int, part: pd.DataFrame,
                     levels: Sequence[float] = (), taus: Sequence[float] = ()) -> str:
    """SHA-256 (hex) over a run's canonical form (module docstring).

    ``part`` holds the run's rows: series, period_index, point, ``lo_<i>``/``hi_<i>`` for
    ``levels[i]`` and ``q_<j>`` for ``taus[j]`` (NaN where a row has none); other columns are
    ignored. The hash does not depend on row order, on the order of ``levels`` or ``taus``, on
    the sign of a zero, or on levels absent from the run.
    """
    part = part.sort_values(["series", "period_index"], kind="stable")
    digest = hashlib.sha256()
    for text in (_RUN_TAG.decode(), model, frequency, str(int(origin_index)), str(len(part))):
        _field(digest, text.encode())
    for data in _keys(part["series"]):
        _field(digest, data)
    _field(digest, np.ascontiguousarray(part["period_index"].to_numpy(dtype="<i8")).tobytes())
    _field(digest, _floats(part["point"].to_numpy(dtype="float64", na_value=np.nan)))
    for i in sorted(range(len(levels)), key=lambda i: levels[i]):
        lower = part[f"lo_{i}"].to_numpy(dtype="float64", na_value=np.nan)
        if np.isnan(lower).all():
            continue
        upper = part[f"hi_{i}"].to_numpy(dtype="float64", na_value=np.nan)
        for data in (b"L", _floats([levels[i]]), _floats(lower), _floats(upper)):
            _field(digest, data)
    for j in sorted(range(len(taus)), key=lambda j: taus[j]):
        values = part[f"q_{j}"].to_numpy(dtype="float64", na_value=np.nan)
        if np.isnan(values).all():
            continue
        for data in (b"Q", _floats([taus[j]]), _floats(values)):
            _field(digest, data)
    return digest.hexdigest()


def run_rows(con, run_id: str) -> tuple[pd.DataFrame, list[float], list[float]]:
    """A run's stored rows in the form :func:`run_content_hash` reads: (part, levels, taus)."""
    part = con.execute("SELECT series, period_index, point FROM forecasts WHERE run_id = ?", [run_id]).df()
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
    """SQL aggregate: the hash of one write's rows (fixed-width hex hashes, so joining is safe)."""
    return f"sha256(string_agg({chain_hash}, '' ORDER BY {series}, {period_index}))"
