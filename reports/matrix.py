"""The accuracy matrix of the overview: rows models, columns horizons (or horizon buckets).

Each cell is the model's MASE over the column's horizons, all scored periods in the selection,
with a mark per interval level for coverage, and the lowest MASE of each column marked when
two or more models have one. Pooled MASE of a bucket = Σ_h MASE_h·s_h / Σ_h s_h, where s_h is
the number of scaled cells at horizon h (n − n_unscaled), which equals the mean of |e|/q over
the bucket's scaled cells. Coverage of a bucket = 1 − Σ misses / Σ cells with bounds. The
per-horizon figures are on the model pages.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Sequence

import pandas as pd

from ledger.findings.base import FlagOptions

from .coverage import CoverageCell, coverage_cell
from .text import is_small

__all__ = ["CoverageMark", "Matrix", "MatrixCell", "MatrixRow", "PartialNote", "build_matrix", "horizon_columns", "mark", "pooled_mase"]

#: Horizon buckets of the matrix: the findings' own (ledger.findings.base.FlagOptions.buckets).
BUCKETS: tuple[int, ...] = FlagOptions().buckets
#: Up to this many horizons, the matrix shows one column per horizon.
_SINGLE = 6


@dataclasses.dataclass(frozen=True)
class CoverageMark:
    level: float
    text: str        # "80% ok", "80% narrow?" (watch), "80% narrow!" (out of tolerance)
    zone: str        # css class: zone-ok, zone-watch, zone-out, zone-none
    title: str       # the long form, for the tooltip
    partial: bool    # coverage over fewer cells than the MASE (some cells have no bounds)
    observed: float  # % of actuals inside (NaN without cells)
    cells: int       # n_L: cells with this level's bounds
    of: int          # n: the cells the MASE is over


@dataclasses.dataclass(frozen=True)
class MatrixCell:
    mase: float
    n: int
    best: bool
    small: bool
    marks: list[CoverageMark]


@dataclasses.dataclass(frozen=True)
class MatrixRow:
    model: str
    href: str
    cells: list[MatrixCell]


@dataclasses.dataclass(frozen=True)
class PartialNote:
    """A model whose coverage at a level is over fewer than all its scored cells (all columns)."""

    model: str
    level: float
    cells: int
    of: int


@dataclasses.dataclass(frozen=True)
class Matrix:
    columns: list[str]
    rows: list[MatrixRow]
    levels: list[float]
    best_marked: bool
    partial: list[PartialNote]


def horizon_columns(horizons: Sequence[int]) -> list[tuple[str, list[int]]]:
    """(label, horizons) per column: each horizon when there are few, else the buckets present."""
    hs = sorted({int(h) for h in horizons})
    if len(hs) <= _SINGLE:
        return [(str(h), [h]) for h in hs]
    out = []
    for i, lo in enumerate(BUCKETS):
        hi = BUCKETS[i + 1] - 1 if i + 1 < len(BUCKETS) else None
        inside = [h for h in hs if h >= lo and (hi is None or h <= hi)]
        if inside:
            label = str(lo) if hi == lo else f"{lo}–{hi}" if hi is not None else f"{lo}+"
            out.append((label, inside))
    return out


_WORD = {"too narrow": "narrow", "too wide": "wide"}


def mark(cell: CoverageCell, of: int) -> CoverageMark:
    """The matrix's short coverage mark: level, direction, and ? for watch or ! for out of tolerance;
    ``of`` is the number of cells the MASE is over (the mark is partial when fewer have bounds)."""
    head = f"{cell.level:g}%"
    partial = 0 < cell.n < of
    facts = dict(partial=partial, observed=cell.observed, cells=cell.n, of=of)
    if cell.n == 0:
        return CoverageMark(cell.level, f"{head} –", "zone-none", f"{head} interval: no cells with bounds", **facts)
    word = _WORD.get(cell.direction)
    over = f", over {cell.n:,} of {of:,} cells" if partial else ""
    detail = f"{head} interval held {cell.observed:.1f}% of {cell.n:,} actuals ({cell.misses:,} missed){over}"
    if word is None:
        return CoverageMark(cell.level, f"{head} ok", "zone-ok", f"{detail}: as stated", **facts)
    out = cell.zone == "out of tolerance"
    return CoverageMark(cell.level, f"{head} {word}{'!' if out else '?'}", "zone-out" if out else "zone-watch",
                        f"{detail}: too {word}, {cell.zone}", **facts)


def build_matrix(by_model_h: pd.DataFrame, intervals: pd.DataFrame, levels: Sequence[float],
                 model_href: dict[str, str]) -> Matrix:
    """The matrix from scores by model and horizon and interval counts by model, horizon, level."""
    cols = horizon_columns(by_model_h["horizon"]) if len(by_model_h) else []
    values: dict[str, list[tuple[float, int, list[CoverageMark]]]] = {}
    for model, part in by_model_h.groupby("model", sort=True):
        counts = intervals[intervals["model"] == model]
        values[str(model)] = [_cell(part[part["horizon"].isin(hs)], counts[counts["horizon"].isin(hs)], levels)
                              for _, hs in cols]
    best = [_best(values, j) for j in range(len(cols))]
    marked = sum(1 for v in values.values() if any(not math.isnan(c[0]) for c in v)) >= 2
    rows = [MatrixRow(m, model_href.get(m, ""),
                      [MatrixCell(c[0], c[1], marked and best[j] == m, is_small(c[1]), c[2]) for j, c in enumerate(v)])
            for m, v in values.items()]
    return Matrix([label for label, _ in cols], rows, list(levels), marked, _partial(rows, levels))


def _partial(rows: list[MatrixRow], levels) -> list[PartialNote]:
    out = []
    for r in rows:
        for i, level in enumerate(levels):
            cells, of = sum(c.marks[i].cells for c in r.cells), sum(c.n for c in r.cells)
            if 0 < cells < of:
                out.append(PartialNote(r.model, float(level), cells, of))
    return out


def pooled_mase(part: pd.DataFrame) -> float:
    """MASE over the cells of several rows of ``Ledger.scores`` (weights: scaled cells n − n_unscaled)."""
    scaled = part["n"] - part["n_unscaled"]
    ok = part["mase"].notna() & (scaled > 0)
    total = float(scaled[ok].sum())
    return float((part.loc[ok, "mase"] * scaled[ok]).sum() / total) if total > 0 else math.nan


def _cell(part: pd.DataFrame, counts: pd.DataFrame, levels) -> tuple[float, int, list[CoverageMark]]:
    n = int(part["n"].sum())
    mase = pooled_mase(part)
    marks = []
    for level in levels:
        hit = counts[counts["level"] == level]
        k, misses = int(hit["n"].sum()), int(hit["misses"].sum())
        marks.append(mark(coverage_cell(level, k, misses), n))
    return mase, n, marks


def _best(values: dict, j: int) -> str | None:
    scored = [(c[j][0], m) for m, c in values.items() if not math.isnan(c[j][0])]
    return min(scored)[1] if scored else None
