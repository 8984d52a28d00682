"""The selection options, defined once: every command that reads scored cells takes the same ones.

``--model``, ``--series``, ``--horizon``, ``--since``, ``--until`` and ``--where`` mean the same
thing on ``scores``, ``compare``, ``standings``, ``advise`` and ``flags`` (and ``--model`` on
``runs``): they are passed unchanged to the keyword arguments of the same meaning of
:meth:`ledger.Ledger.selection`, which checks them against the ledger.
"""

from __future__ import annotations

from typing import Annotated

import typer

__all__ = ["ModelOpt", "SeriesOpt", "HorizonOpt", "SinceOpt", "UntilOpt", "WhereOpt", "selection"]

ModelOpt = Annotated[list[str] | None, typer.Option("--model", metavar="MODEL",
                                                    help="Only this model (repeatable).")]
SeriesOpt = Annotated[list[str] | None, typer.Option("--series", metavar="SERIES",
                                                     help="Only this series (repeatable).")]
HorizonOpt = Annotated[list[int] | None, typer.Option("--horizon", metavar="N",
                                                      help="Only this horizon (repeatable).")]
SinceOpt = Annotated[str | None, typer.Option("--since", metavar="PERIOD",
                                              help="First target period to include (e.g. 2025-07).")]
UntilOpt = Annotated[str | None, typer.Option("--until", metavar="PERIOD",
                                              help="Last target period to include.")]
WhereOpt = Annotated[list[str] | None, typer.Option("--where", metavar="ATTR=VALUE",
                                                    help="Only series with this attribute value (repeatable).")]


def selection(*, model=None, series=None, horizon=None, since=None, until=None, where=None,
              with_models: bool = True) -> dict:
    """The parsed options as the Ledger's keyword arguments (``models``, ``series``, ``horizons``, …)."""
    out = {"series": tuple(series or ()), "horizons": tuple(horizon or ()), "since": since, "until": until,
           "where": tuple(where or ())}
    if with_models:
        out["models"] = tuple(model or ())
    return out
