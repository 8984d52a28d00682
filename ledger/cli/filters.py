"""The selection options, defined once: every command that reads scored cells takes the same ones.

``--model``, ``--series``, ``--horizon``, ``--since``, ``--until`` and ``--where`` mean the same
thing on ``scores``, ``compare``, ``standings``, ``advise`` and ``flags`` (and ``--model`` on
``runs``): they are passed unchanged to the keyword arguments of the same meaning of
:meth:`ledger.Ledger.selection`, which checks them against the ledger. :func:`with_selection`
gives a command the whole block at once, so the commands do not repeat it.
"""

from __future__ import annotations

import functools
import inspect
from typing import Annotated

import typer

__all__ = ["ModelOpt", "SeriesOpt", "HorizonOpt", "SinceOpt", "UntilOpt", "WhereOpt", "selection",
           "with_selection"]

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



_OPTIONS = {"model": ModelOpt, "series": SeriesOpt, "horizon": HorizonOpt, "since": SinceOpt, "until": UntilOpt,
            "where": WhereOpt}


def with_selection(*, models: bool = True, **declared):
    """Put the selection options where the command declares ``chosen``; it receives :func:`selection`'s dict.

    models=False leaves out ``--model`` (commands that name their models as arguments);
    ``declared`` replaces an option's declaration (its help) by name, e.g. ``horizon=...``.
    """
    options = {n: declared.get(n, a) for n, a in _OPTIONS.items() if models or n != "model"}

    def decorate(command):
        params = list(inspect.signature(command, eval_str=True).parameters.values())
        at = next(i for i, p in enumerate(params) if p.name == "chosen")
        added = [inspect.Parameter(n, inspect.Parameter.KEYWORD_ONLY, default=None, annotation=a)
                 for n, a in options.items()]
        # typer lists options in signature order; what follows the block must be keyword-only to follow it
        rest = [p.replace(kind=inspect.Parameter.KEYWORD_ONLY) for p in params[at + 1:]]

        @functools.wraps(command)
        def run(*args, **kwargs):
            chosen = selection(**{n: kwargs.pop(n) for n in options}, with_models=models)
            return command(*args, chosen=chosen, **kwargs)

        run.__signature__ = inspect.Signature(params[:at] + added + rest)
        return run

    return decorate
