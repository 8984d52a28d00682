"""The names of the reference-method family, their help text, and the checks of those names.

One list of method names and one of fill names: :mod:`ledger.methods.forecasters` dispatches on
:data:`METHODS`, :mod:`ledger.methods.rolling` fills gaps by :data:`FILL_METHODS`, and the
``backtest`` command builds its choices and help from both. This module imports neither
statsmodels nor the forecasters, so the CLI can offer the names without loading them.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from typing import Literal, get_args

from ..errors import UnknownName

__all__ = [
    "FILL_HELP",
    "FILL_METHODS",
    "FillMethod",
    "METHODS",
    "METHODS_HELP",
    "Method",
    "check_fill",
    "check_levels",
    "check_methods",
]

Method = Literal[
    "naive", "snaive", "drift", "mean", "ses", "holt", "damped", "hw", "hw-damped", "theta",
    "naive2", "shd",
]
METHODS: tuple[str, ...] = get_args(Method)

FillMethod = Literal["linear", "previous"]
FILL_METHODS: tuple[str, ...] = get_args(FillMethod)

METHODS_HELP = f"Comma list of reference methods: {', '.join(METHODS)} (runs are named ref-METHOD)."
FILL_HELP = (f"Fill gaps in the history ({' or '.join(FILL_METHODS)}; recorded in the runs' note); "
             "default: skip gapped series-origins with a note.")


def check_methods(methods: Iterable[str]) -> tuple[str, ...]:
    """The methods as a tuple; UnknownName when none is given, one is unknown or one repeats."""
    chosen = tuple(methods)
    if not chosen:
        raise UnknownName(f"backtest: no reference method given; choose from {', '.join(METHODS)}")
    unknown = [m for m in chosen if m not in METHODS]
    if unknown:
        shown = ", ".join(repr(m) for m in unknown)
        raise UnknownName(f"backtest: unknown reference method {shown}; choose from {', '.join(METHODS)}")
    twice = sorted({m for m in chosen if chosen.count(m) > 1})
    if twice:
        raise UnknownName(f"backtest: method {', '.join(map(repr, twice))} is named more than once; name it once")
    return chosen


def check_fill(fill: str | None) -> None:
    """UnknownName unless ``fill`` is None or one of :data:`FILL_METHODS`."""
    if fill is not None and fill not in FILL_METHODS:
        raise UnknownName(f"backtest: fill {fill!r} is not a fill method; use one of {', '.join(FILL_METHODS)}")


def check_levels(levels: Sequence[float], *, command: str = "") -> tuple[float, ...]:
    """Interval levels as floats; UnknownName for a level outside (0, 100), led by ``command``."""
    lead = f"{command}: " if command else ""
    out = tuple(float(level) for level in levels)
    for level in out:
        if not 0.0 < level < 100.0:
            raise UnknownName(f"{lead}interval level {level:g} is outside (0, 100); use e.g. 80 or 95")
    return out
