"""The gate for scheduled jobs: are there findings at or above a severity?

The severity order comes from :data:`ledger.findings.base.Severity` (most severe first); the
gate takes its two upper names. A scheduled job exits with :data:`GATE_EXIT` when the gate
closes, distinct from 1 (an error) and 2 (a usage error).
"""

from __future__ import annotations

from typing import get_args

from ..lazy import pandas as pd

from ..errors import UnknownName
from ..findings.base import Severity

__all__ = ["GATE_EXIT", "GATE_LEVELS", "at_or_above"]

GATE_EXIT = 3
SEVERITIES: tuple[str, ...] = get_args(Severity)
GATE_LEVELS: tuple[str, ...] = SEVERITIES[:2]


def at_or_above(findings: pd.DataFrame, fail_on: str) -> pd.DataFrame:
    """The findings whose severity is ``fail_on`` or more severe."""
    name = str(fail_on).strip().lower()
    if name not in GATE_LEVELS:
        raise UnknownName(f"--fail-on {fail_on!r} is not a severity the gate takes; use {' or '.join(GATE_LEVELS)}")
    worst = SEVERITIES[: SEVERITIES.index(name) + 1]
    return findings[findings["severity"].isin(worst)]
