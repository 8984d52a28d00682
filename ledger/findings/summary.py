"""Summaries that come before the detail: counts of findings, and who led the standings how often.

:func:`finding_counts` is the one line ``flags`` opens with; :func:`standings_summary` the per-model
table ``standings`` opens with. :func:`keep_findings` applies the filters of ``flags`` that act
on findings rather than on cells (severity, and series chosen by name or attribute).
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import get_args

import numpy as np
from ..lazy import pandas as pd

from ..errors import UnknownName
from ..scoring.cells import Selection
from ..scoring.selection import selected_series
from ..store import Store
from .base import KINDS, Severity

__all__ = ["SEVERITIES", "keep_findings", "finding_counts", "standings_summary", "SUMMARY_COLUMNS"]

SEVERITIES: tuple[str, ...] = get_args(Severity)
SUMMARY_COLUMNS = ("model", "periods", "first", "first_share", "median_rank", "recent_periods", "recent_mase", "recent_n")


def keep_findings(store: Store, sel: Selection, frame: pd.DataFrame, severities: Sequence[str] = ()) -> pd.DataFrame:
    """The findings of ``frame`` of the given severities (all when empty) about the selected series.

    A finding with no series (about a model as a whole) is kept: it was computed on the selected
    cells only.
    """
    chosen = [str(s).strip().lower() for s in severities]
    unknown = [s for s in chosen if s not in SEVERITIES]
    if unknown:
        raise UnknownName(f"unknown severity {', '.join(map(repr, unknown))}; use {', '.join(SEVERITIES)}")
    keep = np.ones(len(frame), dtype=bool)
    if chosen:
        keep &= frame["severity"].isin(chosen).to_numpy()
    if sel.series or sel.where:
        wanted = selected_series(store, sel)
        keep &= ((frame["series"] == "") | frame["series"].isin(wanted)).to_numpy()
    return frame[keep].reset_index(drop=True)


def finding_counts(frame: pd.DataFrame) -> str:
    """'135 findings: 80 act, 40 watch, 15 note; 43 drift, 84 calibration, 1 value, 7 data'."""
    n = len(frame)
    by_severity = frame["severity"].value_counts()
    by_kind = frame["kind"].value_counts()
    sev = ", ".join(f"{int(by_severity[s])} {s}" for s in SEVERITIES if s in by_severity)
    kinds = ", ".join(f"{int(by_kind[k])} {k}" for k in KINDS if k in by_kind)
    return f"{n:,} finding{'' if n == 1 else 's'}: {sev}; {kinds}"


def standings_summary(frame: pd.DataFrame, *, recent: int = 12) -> pd.DataFrame:
    """Per model, from a standings frame (:func:`ledger.findings.standings.standings`).

    ``periods``: evaluation periods the model was ranked in; ``first``: periods it ranked first
    (ties share rank 1); ``first_share`` = first / periods; ``median_rank``; ``recent_mase``:
    MASE over the common cells of the last ``recent`` evaluation periods the model was ranked
    in, i.e. Σ n·MASE / Σ n over those periods (lower is better); ``recent_n`` those cells.
    Ordered by periods ranked first, then median rank.
    """
    if frame.empty:
        return pd.DataFrame(columns=list(SUMMARY_COLUMNS))
    order = {p: i for i, p in enumerate(dict.fromkeys(frame["period"]))}
    rows = []
    for model, part in frame.groupby("model", sort=True):
        part = part.assign(_o=part["period"].map(order)).sort_values("_o", kind="stable")
        last = part.tail(recent)
        n = last["n"].to_numpy(dtype=float)
        rows.append({"model": model, "periods": len(part), "first": int((part["rank"] == 1).sum()),
                     "first_share": float((part["rank"] == 1).mean()),
                     "median_rank": float(np.median(part["rank"].to_numpy(dtype=float))),
                     "recent_periods": len(last),
                     "recent_mase": float(np.sum(n * last["mase"].to_numpy(dtype=float)) / n.sum()),
                     "recent_n": int(n.sum())})
    out = pd.DataFrame(rows, columns=list(SUMMARY_COLUMNS))
    return out.sort_values(["first", "median_rank", "model"], ascending=[False, True, True],
                           kind="stable").reset_index(drop=True)
