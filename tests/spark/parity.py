"""Comparing two score tables: same columns and keys; floats to 1e-9 relative; the rest exactly."""

from __future__ import annotations

import math

import pandas as pd

RTOL = 1e-9
# Sums in another order can leave 1e-15 where the exact value is 0; relative error means nothing there.
ATOL = 1e-12


def assert_same_table(duck: pd.DataFrame, other: pd.DataFrame) -> None:
    assert list(duck.columns) == list(other.columns)
    assert len(duck) == len(other), (len(duck), len(other))
    assert len(duck) > 0
    for col in duck.columns:
        a, b = duck[col].tolist(), other[col].tolist()
        if pd.api.types.is_float_dtype(duck[col]):
            bad = [(i, x, y) for i, (x, y) in enumerate(zip(a, b))
                   if not (_missing(x) and _missing(y)) and not math.isclose(x, y, rel_tol=RTOL, abs_tol=ATOL)]
        else:
            bad = [(i, x, y) for i, (x, y) in enumerate(zip(a, b)) if x != y and not (_missing(x) and _missing(y))]
        assert not bad, f"column {col}: first differences (row, duckdb, other) {bad[:3]}"


def _missing(x) -> bool:
    return x is None or (isinstance(x, float) and math.isnan(x))
