"""Observed interval coverage of a group of cells and its binomial tolerance zone."""

from __future__ import annotations

import dataclasses
import math

from ledger.stats.intervals import coverage_zone

from .text import is_small

__all__ = ["CoverageCell", "coverage_cell"]


@dataclasses.dataclass(frozen=True)
class CoverageCell:
    level: float
    observed: float      # % of actuals inside the interval
    n: int
    misses: int
    expected: float      # expected misses n·(1 − L/100)
    direction: str       # as stated / too narrow / too wide
    zone: str
    small: bool


def coverage_cell(level: float, n: int, misses: int) -> CoverageCell:
    """Observed coverage and its tolerance zone (ledger.stats.intervals.coverage_zone)."""
    if n == 0:
        return CoverageCell(level, math.nan, 0, 0, 0.0, "as stated", "no cells", True)
    z = coverage_zone(int(misses), int(n), p=1 - level / 100)
    return CoverageCell(level, 100 * (1 - misses / n), int(n), int(misses), z.expected, z.direction, z.zone, is_small(n))
