"""The shared vocabulary of messages, findings and reports: how a period, a level, a number, a
p-value, a severity and a list of names are written.

One home, so that two copies cannot drift apart (two formats of one interval level once made
columns collide). Everything here is pure string formatting: nothing reads the ledger.

- Periods: :func:`label` / :func:`labels` turn period indexes into labels ('2026-01', '2026Q3').
- Severity: :data:`SEVERITY_ORDER` ranks act before watch before note (:func:`severity_rank`).
- Levels: :func:`format_level` writes an interval level (or a quantile level) as it appears in
  column names and sentences ('80', '97.5'); :func:`quantile_name` names a quantile's input
  column ('q10', 'q975').
- Numbers: :func:`num` (significant figures, for report tables and sentences), :func:`short_num`
  and :func:`signed` (figures in findings' evidence), :func:`pct`, :func:`p_value` / :func:`pval`.
- Counts, lists and values in one-line messages: :func:`plural`, :func:`list_names`, :func:`shorten`.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from decimal import Decimal

from .lazy import pandas as pd

from .periods import index_start, period_label
from .stats.quantiles import TAU_DIGITS

__all__ = [
    "SEVERITY_ORDER",
    "format_level",
    "label",
    "labels",
    "list_names",
    "num",
    "p_value",
    "pct",
    "plural",
    "pval",
    "quantile_name",
    "severity_rank",
    "short_num",
    "shorten",
    "signed",
]

#: Findings are listed most urgent first: act (costs accuracy now), watch, then notes (context).
SEVERITY_ORDER: dict[str, int] = {"act": 0, "watch": 1, "note": 2}


def severity_rank(severity: str) -> int:
    """Sort key of a severity; an unknown one ranks with 'watch' (between act and notes)."""
    return SEVERITY_ORDER.get(severity, 1)


# ---------------------------------------------------------------------------------------------
# periods


def label(index: int, freq: str) -> str:
    """The period label (2026-01, 2026Q3) of a period index."""
    return period_label(index_start(int(index), freq), freq)


def labels(indices: pd.Series, freq: str) -> pd.Series:
    """:func:`label` of every index in a column (each distinct index converted once)."""
    names = {int(i): label(i, freq) for i in pd.unique(indices)}
    return indices.map(names).astype(object)


# ---------------------------------------------------------------------------------------------
# levels


def format_level(level: float, digits: int = 6) -> str:
    """An interval or quantile level as written in column names: 80.0 -> '80', 97.5 -> '97.5'.

    ``digits`` significant figures (``format(level, 'g')`` by default). Input files name their
    columns with 6; the reference methods name the columns they produce with 10, so a level given
    with many decimals survives into the forecast frame before the ledger reads it back.
    """
    return f"{float(level):.{digits}g}"


def quantile_name(tau: float | Decimal) -> str:
    """The input-file column of quantile level tau in (0, 1): 0.1 -> 'q10', 0.975 -> 'q975', 0.05 -> 'q05'.

    A Decimal (a level read from a column name) is written as it is; a float (a level read back
    from the ledger) is first rounded to ``TAU_DIGITS`` decimals, so float noise such as
    0.30000000000000004 still names q30.
    """
    exact = tau if isinstance(tau, Decimal) else Decimal(f"{float(tau):.{TAU_DIGITS}f}")
    _, _, digits = format(exact.normalize(), "f").partition(".")
    return "q" + digits.ljust(2, "0")


# ---------------------------------------------------------------------------------------------
# numbers


def _finite(x) -> bool:
    return x is not None and isinstance(x, (int, float)) and math.isfinite(x)


def num(x, digits: int = 3) -> str:
    """A number with about ``digits`` significant figures, thousands separated; '–' if missing."""
    if not _finite(x):
        return "–"
    if abs(x) >= 10 ** (digits - 1):
        return f"{x:,.0f}"
    decimals = max(0, digits - 1 - (int(math.floor(math.log10(abs(x)))) if x else 0))
    return f"{x:,.{decimals}f}"


def short_num(x: float) -> str:
    """A figure for a finding's evidence: at most two decimals, no exponent, thousands separated.

    0.41 -> '0.41', 12.34 -> '12.3', 1234.5 -> '1,234'; below 0.01 two significant figures
    ('0.0012'); '–' if missing.
    """
    if x is None or not math.isfinite(x):
        return "–"
    if abs(x) >= 100:
        return f"{x:,.0f}"
    if abs(x) >= 10:
        return f"{x:.1f}"
    return f"{x:.2f}" if abs(x) >= 0.01 or x == 0 else f"{x:.2g}"


def signed(x: float) -> str:
    """Like :func:`short_num` with a sign (+9.8, -0.41)."""
    text = short_num(x)
    return text if text.startswith("-") or text == "–" else f"+{text}"


def pct(x, decimals: int = 1) -> str:
    """A percentage already on a 0–100 scale: '6.1%'; '–' if missing."""
    return f"{x:.{decimals}f}%" if _finite(x) else "–"


def p_value(p) -> str:
    """A p-value for a table: '0.031', '< 0.0001', '–' when undefined."""
    if not _finite(p):
        return "–"
    return "< 0.0001" if p < 0.0001 else f"{p:.2g}"


def pval(p) -> str:
    """A p-value for a sentence: 'p 0.031', 'p < 0.0001', 'p –' when undefined."""
    return f"p {p_value(p)}"


# ---------------------------------------------------------------------------------------------
# names and values in one-line messages


def plural(n: int, word: str, many: str | None = None) -> str:
    """'1 cell', '2 cells', '1,204 series' (``many`` for an irregular plural)."""
    return f"{n:,} {word if n == 1 else (many or word + 's')}"


def shorten(value: str, limit: int = 40) -> str:
    """A value fit to quote in a one-line message."""
    text = str(value)
    return text if len(text) <= limit else text[:limit] + f"… ({len(text):,} characters)"


def list_names(names: Iterable, limit: int = 5) -> str:
    """'a, b, c' or 'a, b, c, d, e and 7 more': a list fit for a one-line message."""
    names = [str(n) for n in names]
    if len(names) <= limit:
        return ", ".join(names)
    return f"{', '.join(names[:limit])} and {len(names) - limit:,} more"
