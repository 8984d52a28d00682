"""The thresholds of ``flags`` as options, built from the fields of :class:`FlagOptions`.

Every field becomes an option of the same name (``drift_k`` -> ``--drift-k``) and the same
default, so a field added to ``FlagOptions`` is an option at once; the command receives the
parsed values as one ``thresholds`` dict and hands it to ``Ledger.flags`` unchanged.
"""

from __future__ import annotations

import dataclasses
import enum
import functools
import inspect
import types
import typing
from typing import Annotated, Any, Literal, get_args, get_origin

import typer

from ..findings.base import FlagOptions

__all__ = ["HELP", "with_thresholds", "option_name", "cli_default"]

HELP = {
    "drift_k": "CUSUM allowance k (dates when a monitor would have sounded), in long-run sd.",
    "drift_h": "CUSUM decision interval h, in long-run sd.",
    "ts_window": "Tracking-signal window (default: one season, at least 6).",
    "trigg_alpha": "Smoothing constant of Trigg's signal.",
    "fdr": "False-finding level across all drift and across all calibration tests.",
    "correction": "bh (Benjamini-Hochberg) or holm.",
    "min_cells": "Fewer cells: not enough data to judge drift or calibration.",
    "series_calibration": "Also test each series' intervals.",
    "buckets": "Lower edges of the horizon buckets, comma list.",
    "zone_watch": "Cumulative binomial probability that starts the watch zone.",
    "zone_out": "Cumulative binomial probability that starts out of tolerance.",
    "benchmark": "Benchmark model for value added (default: one named like ref-snaive).",
    "adjusts": "OVERRIDE=BASE pairs, comma list: judge each override's value over its base (default: the pairs recorded with backsight adjusts).",
    "recent": "Evaluation periods in the recent window (value added, impact, recalibration).",
    "value_alpha": "Significance for series-level value findings.",
    "seasons": "Report origins with less history than this many seasons.",
    "adi": "Average demand interval from which demand is intermittent.",
}
_METAVAR = {int: "N", float: "X", str: "NAME"}
_FIELD_METAVAR = {"adjusts": "OVERRIDE=BASE"}    # where the type's metavar would mislead


def option_name(field: str) -> str:
    return "--" + field.replace("_", "-")


def cli_default(field: dataclasses.Field) -> Any:
    """The option's default as the command line spells it (a tuple as a comma list)."""
    value = field.default
    return ",".join(map(str, value)) if isinstance(value, tuple) else value


def _option(field: dataclasses.Field, hint) -> tuple[Any, Any]:
    """(annotation, converter) of the option for one field."""
    helptext = HELP.get(field.name, f"Threshold {field.name} of the checks (see FlagOptions).")
    name = option_name(field.name)
    optional = get_origin(hint) in (typing.Union, types.UnionType) and type(None) in get_args(hint)
    base = next(a for a in get_args(hint) if a is not type(None)) if optional else hint
    if base is bool:
        return Annotated[bool, typer.Option(f"{name}/--no-{name[2:]}", help=helptext)], bool
    if get_origin(base) is Literal:
        choice = enum.Enum(f"{field.name}_choice", {v: v for v in get_args(base)}, type=str)
        return Annotated[choice, typer.Option(name, metavar="|".join(get_args(base)), help=helptext)], lambda v: v.value if isinstance(v, enum.Enum) else v
    if get_origin(base) is tuple:
        return (Annotated[str, typer.Option(name, metavar="LIST", help=helptext)],
                functools.partial(_int_list, name))
    kind = base if base in _METAVAR else str
    annotation = kind | None if optional else kind
    return Annotated[annotation, typer.Option(name, metavar=_FIELD_METAVAR.get(field.name, _METAVAR[kind]), help=helptext)], lambda v: v


def _int_list(name: str, text: str) -> tuple[int, ...]:
    parts = [p.strip() for p in str(text).split(",") if p.strip()]
    if not parts or not all(p.isdigit() for p in parts):
        raise typer.BadParameter(f"{text!r} is not a comma list of whole numbers such as 1,2,4,7,13", param_hint=name)
    return tuple(int(p) for p in parts)


def with_thresholds(command):
    """Give ``command`` one option per FlagOptions field; it receives them as ``thresholds``."""
    hints = typing.get_type_hints(FlagOptions)
    fields = dataclasses.fields(FlagOptions)
    made = {f.name: _option(f, hints[f.name]) for f in fields}
    own = [p for p in inspect.signature(command, eval_str=True).parameters.values() if p.name != "thresholds"]
    extra = [inspect.Parameter(f.name, inspect.Parameter.KEYWORD_ONLY, default=cli_default(f),
                               annotation=made[f.name][0]) for f in fields]

    @functools.wraps(command)
    def run(*args, **kwargs):
        thresholds = {name: convert(kwargs.pop(name)) for name, (_, convert) in made.items()}
        return command(*args, thresholds=thresholds, **kwargs)

    run.__signature__ = inspect.Signature(own + extra)
    return run
