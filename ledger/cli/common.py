"""What every command module of the CLI shares: the app, the error translation, options, output.

Errors: library errors (:class:`ledger.errors.LedgerError`) become ``Error: <message>`` on stderr
and exit code 1, in one place (:class:`_Group`); usage errors keep exit code 2. Data goes to
stdout; notices, warnings and progress go to stderr.
"""

from __future__ import annotations

import contextlib
import enum
import json
import sys
from pathlib import Path
from typing import Annotated, Any

import pandas as pd
import typer
from rich.console import Console
from rich.table import Table
from typer.core import TyperGroup

from .. import __version__
from ..api import DEFAULT_PATH, Ledger
from ..errors import LedgerError

__all__ = ["app", "Format", "FormatOpt", "AsOfOpt", "FreqOpt", "IncludeExcludedOpt", "open_ledger", "busy", "notice", "emit", "split"]

EXIT_ERROR = 1


class _Group(TyperGroup):
    """Turns every LedgerError into one ``Error:`` line and exit code 1."""

    def invoke(self, ctx):
        try:
            return super().invoke(ctx)
        except LedgerError as exc:
            typer.echo(f"Error: {exc}", err=True)
            raise typer.Exit(EXIT_ERROR) from None


app = typer.Typer(
    cls=_Group,
    add_completion=False,
    no_args_is_help=True,
    rich_markup_mode=None,
    help="Backsight: a ledger of forecast runs, scored as actuals arrive.",
)

_stderr = Console(stderr=True, highlight=False, soft_wrap=True)


class Format(str, enum.Enum):
    table = "table"
    csv = "csv"
    json = "json"


FormatOpt = Annotated[Format, typer.Option("--format", help="table (for people), csv or json (full precision, stdout only).")]
AsOfOpt = Annotated[str | None, typer.Option("--as-of", help="Score with what the ledger held at this time (ISO 8601; default now).")]
IncludeExcludedOpt = Annotated[bool, typer.Option("--include-excluded", help="Put back the cells that events exclude from scoring.")]
FreqOpt = Annotated[str | None, typer.Option("--freq", help="yearly, quarterly, monthly, weekly or daily; needed when periods are bare dates of a new series.")]


def _print_version(value: bool) -> None:
    if value:
        typer.echo(f"backsight {__version__}")
        raise typer.Exit(0)


@app.callback()
def _root(
    ctx: typer.Context,
    ledger: Annotated[Path, typer.Option("--ledger", envvar="BACKSIGHT_LEDGER",
                                         help="The ledger file.")] = Path(DEFAULT_PATH),
    wait: Annotated[float | None, typer.Option("--wait", envvar="BACKSIGHT_WAIT", metavar="SECONDS",
                                               help="How long to wait while another process holds the ledger (default 10).")] = None,
    version: Annotated[bool, typer.Option("--version", callback=_print_version, is_eager=True,
                                          help="Print the version and exit.")] = False,
) -> None:
    ctx.obj = {"ledger": ledger, "wait": wait}


def open_ledger(ctx: typer.Context, *, create: bool = False) -> Ledger:
    """The ledger named by --ledger; read-only unless the command writes."""
    book = Ledger.open(ctx.obj["ledger"], create=create, read_only=not create, wait=ctx.obj["wait"])
    if book.store.migrated:
        old, backup = book.store.migrated
        notice(f"migrated {book.path} from schema version {old}; the old file is kept at {backup}")
    return book


@contextlib.contextmanager
def busy(message: str):
    """A spinner on stderr while slow work runs (only on a terminal).

    Yields ``say(text)``, which replaces the text after the message (e.g. how much is read).
    """
    if _stderr.is_terminal:
        with _stderr.status(message) as status:
            yield lambda text: status.update(f"{message}: {text}")
    else:
        yield lambda text: None


def read_share(done: int, total: int) -> str:
    """'37% read', then 'checking and writing': the words for an import's progress callback."""
    if total and done >= total:
        return "read; checking and writing"
    return f"{100 * done / total:.0f}% read" if total else "reading"


def notice(text: str) -> None:
    typer.echo(text, err=True)


def emit(frame: pd.DataFrame, fmt: Format, *, title: str | None = None) -> None:
    """Print a frame: csv/json on stdout with full precision; table for people."""
    if fmt is Format.csv:
        sys.stdout.write(frame.to_csv(index=False, lineterminator="\n"))
    elif fmt is Format.json:
        records = json.loads(frame.to_json(orient="records", double_precision=15, date_format="iso"))
        sys.stdout.write(json.dumps(records, indent=1, ensure_ascii=False) + "\n")
    else:
        out = Console(highlight=False)
        if not out.is_terminal:
            out = Console(highlight=False, width=max(100, 12 * len(frame.columns)))
        out.print(_table(frame, title))


def _table(frame: pd.DataFrame, title: str | None) -> Table:
    table = Table(title=title, show_lines=False, header_style="bold")
    for col in frame.columns:
        numeric = pd.api.types.is_numeric_dtype(frame[col])
        table.add_column(str(col), justify="right" if numeric else "left", overflow="fold")
    for row in frame.itertuples(index=False):
        table.add_row(*[_cell(v) for v in row])
    return table


def _cell(value: Any) -> str:
    if value is None or (isinstance(value, float) and value != value):
        return "–"
    if isinstance(value, float):
        return f"{value:,.4g}" if abs(value) < 1e5 else f"{value:,.0f}"
    return str(value)


def split(values: list[str] | None) -> list[str]:
    out: list[str] = []
    for v in values or []:
        out += [p.strip() for p in v.split(",") if p.strip()]
    return out
