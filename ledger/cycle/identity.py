"""A finding's identity across re-runs: what it is about, never how it is worded.

key = kind | model | series | level | scope, where scope is the horizon bucket of a calibration
finding ("1", "2-3", "all") and the check of a data finding ("gap", "zero actuals" …), because
those kinds raise several findings for one model or series; it is empty for the other kinds.
A frame that already carries a ``key`` column (``Finding.key``, once the findings define it)
keeps it.
"""

from __future__ import annotations

import math

from ..lazy import pandas as pd

__all__ = ["finding_key", "with_keys"]

_SCOPED = {"calibration": "horizons", "data": "check"}


def finding_key(kind: str, model: str, series: str, level: float | None, scope: str = "") -> str:
    """'calibration|m|s|80|2-3'; level as written in column names (80, 97.5), '' when none."""
    lv = "" if level is None or (isinstance(level, float) and math.isnan(level)) else f"{float(level):g}"
    return "|".join([kind, model or "", series or "", lv, scope or ""])


def with_keys(findings: pd.DataFrame) -> pd.DataFrame:
    """The findings with a ``key`` column; of two findings with one key the first (most severe) is kept."""
    if "key" not in findings.columns:
        keys = [finding_key(r.kind, r.model, r.series, r.level, getattr(r, _SCOPED[r.kind]) if r.kind in _SCOPED else "")
                for r in findings.itertuples(index=False)]
        findings = findings.assign(key=pd.Series(keys, index=findings.index, dtype=object))
    return findings.drop_duplicates("key", keep="first").reset_index(drop=True)
