"""Interval-bound and quantile column names: one canonical parse, so that two names never alias.

A bound column is ``lower_<L>`` / ``upper_<L>`` with L a decimal number in (0, 100); ``lower_80``,
``lower_80.0`` and ``lower_080`` are one level (80), so two of them in one file are refused,
naming both columns. A quantile column is ``q`` and the digits after the decimal point of tau
(``q10`` is 0.10, ``q975`` is 0.975, ``q05`` is 0.05), or ``q`` and tau written out (``q0.5``);
``q50`` and ``q0.5`` are one level. A digit form with a zero beyond its second digit (``q100``,
``q500``) reads as a shorter name's level (0.100 = ``q10``) and is refused with that name, so
``q10,q100`` never keeps one column silently. Levels are compared as the doubles they are
stored as, so two spellings that round to one double also collide.
"""

from __future__ import annotations

import re
from decimal import Decimal

from ..errors import InputError
from ..wording import quantile_name

__all__ = ["bound_columns", "quantile_columns", "misspelt_column", "is_level_column"]

_BOUND = re.compile(r"^(lower|upper)_(\d+(?:\.\d+)?)$")
_QUANTILE = re.compile(r"^q(\d{2,}|\d+\.\d+)$")
_BOUND_LIKE = re.compile(r"^(lower|upper|lo|hi|low|high|lwr|upr|lb|ub)[\s_\-.]*(\d+(?:\.\d+)?)(%|pct)?$")
_QUANTILE_LIKE = re.compile(r"^(q|p|quantile|tau)[\s_\-.]*(\d+(?:\.\d+)?)$")
_LOWER_WORDS = {"lower", "lo", "low", "lwr", "lb"}


def is_level_column(name: str) -> bool:
    """True for a well-formed bound or quantile column name (its level is checked separately)."""
    return bool(_BOUND.match(name) or _QUANTILE.match(name))


def _plain(number: Decimal) -> str:
    """80.0 -> '80', 0.100 -> '0.1': a decimal without trailing zeros or exponent."""
    return format(number.normalize(), "f")


def _same_level(source: str, kind: str, shown: str, column: str, earlier: str) -> InputError:
    return InputError(source, f"names the same {kind} ({shown}) as column {earlier}; keep one of them",
                      column=column)


def bound_columns(columns: list[str], source: str) -> dict[float, tuple[str, str]]:
    """{level: (lower column, upper column)} in increasing level; refuses aliases and lone sides."""
    levels: dict[float, dict[str, str]] = {}
    for col in columns:
        if m := _BOUND.match(col):
            level = float(Decimal(m[2]))
            if not 0 < level < 100:
                raise InputError(source, f"level {m[2]} is outside (0, 100)", column=col)
            sides = levels.setdefault(level, {})
            if m[1] in sides:
                raise _same_level(source, "interval level", _plain(Decimal(m[2])), col, sides[m[1]])
            sides[m[1]] = col
    for sides in levels.values():
        for side, other in (("lower", "upper"), ("upper", "lower")):
            if side in sides and other not in sides:
                raise InputError(source, f"has no matching {other}_{sides[side].split('_', 1)[1]} column",
                                 column=sides[side])
    return {level: (sides["lower"], sides["upper"]) for level, sides in sorted(levels.items())}


def _tau(col: str, text: str, source: str) -> Decimal:
    if "." in text:
        tau = Decimal(text)
    else:
        tau = Decimal("0." + text)
        if len(text) > 2 and text.endswith("0"):
            raise InputError(source, f"reads as the {tau} quantile, which is named {quantile_name(tau)}; "
                             "name it so (quantile levels are in (0, 1))", column=col)
    if not 0 < tau < 1:
        raise InputError(source, f"quantile level {_plain(tau)} is outside (0, 1)", column=col)
    return tau


def quantile_columns(columns: list[str], source: str) -> dict[float, str]:
    """{tau: column} in increasing tau; refuses two names of one level."""
    taus: dict[float, str] = {}
    for col in columns:
        if m := _QUANTILE.match(col):
            tau = _tau(col, m[1], source)
            key = float(tau)
            if key in taus:
                raise _same_level(source, "quantile level", _plain(tau), col, taus[key])
            taus[key] = col
    return dict(sorted(taus.items()))


def misspelt_column(col: str) -> str | None:
    """The fix for a column that looks like a misspelt bound or quantile name, or None."""
    if m := _BOUND_LIKE.match(col):
        side = "lower" if m[1] in _LOWER_WORDS else "upper"
        return f"looks like an interval bound; name it {side}_{m[2]}"
    if m := _QUANTILE_LIKE.match(col):
        return f"looks like a quantile; {_quantile_hint(m[1], m[2])} (q10 is the 0.10 quantile)"
    return None


def _quantile_hint(prefix: str, number: str) -> str:
    value = Decimal(number)
    if prefix == "q" and "." not in number and len(number) == 1:
        return f"name it q0{number} (the 0.0{number} quantile) or q{number}0 (the 0.{number} quantile)"
    tau = value if "." in number and value < 1 else value / 100    # tau_0.9 is 0.9; p90 is 90%
    if not 0 < tau < 1:
        return "quantile levels are in (0, 1)"
    return f"name it {quantile_name(tau)}"
