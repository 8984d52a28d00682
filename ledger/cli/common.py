"""What every command module of the CLI shares: the app, the error translation, options, output.

Errors: library errors (:class:`ledger.errors.LedgerError`) become ``Error: <message>`` on stderr
and exit code 1, in one place (:class:`_Group`); usage errors keep exit code 2. Data goes to
stdout; notices, warnings and progress go to stderr.
"""

from __future__ import annotations

import contextlib
import csv
import enum
import json
import os
import sys
from pathlib import Path
from typing import Annotated

import duckdb
from ..lazy import pandas as pd
import typer
from rich.console import Console
from rich.markup import escape
from typer.core import TyperCommand, TyperGroup

from .terminal import error_lines, out_width, printable, render_table, wrap
from ..version import __version__
from ..api import DEFAULT_PATH, Ledger
from ..errors import LedgerError, describe_os_error

__all__ = ["app", "Format", "FormatOpt", "AsOfOpt", "FreqOpt", "IncludeExcludedOpt", "open_ledger", "busy", "notice", "say", "emit", "split"]

EXIT_ERROR = 1


class _Group(TyperGroup):
    """Turns every LedgerError into one ``Error:`` line and exit code 1."""

    def invoke(self, ctx):
        try:
            return super().invoke(ctx)
        except LedgerError as exc:
            # Messages quote names and values from the input: shown inert, never raw.
            typer.echo("\n".join(error_lines(f"Error: {exc}")), err=True)
            raise typer.Exit(EXIT_ERROR) from None
        except BrokenPipeError:
            # The reader left (``backsight changes | head``): stop quietly, as the Python docs advise
            # for SIGPIPE, without a message about a file the user never named.
            os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
            raise typer.Exit(EXIT_ERROR) from None
        except (OSError, duckdb.Error) as exc:     # no space, permission, …: one line, not a traceback
            message = describe_os_error(exc)
            if message is None:
                raise
            typer.echo("\n".join(error_lines(f"Error: {message}")), err=True)
            raise typer.Exit(EXIT_ERROR) from None


class _Command(TyperCommand):
    """Help in plain words: arguments as NAME in the usage line and without type labels."""

    def collect_usage_pieces(self, ctx) -> list[str]:
        return [piece.replace("{", "").replace("}", "") for piece in super().collect_usage_pieces(ctx)]

    def format_options(self, ctx, formatter) -> None:
        args, opts = [], []
        for param in self.get_params(ctx):
            record = param.get_help_record(ctx)
            if record is None:
                continue
            if param.param_type_name == "argument":
                args.append((record[0].split(" <", 1)[0], record[1]))
            else:
                opts.append(record)
        for title, rows in (("Arguments", args), ("Options", opts)):
            if rows:
                with formatter.section(title):
                    formatter.write_dl(rows)


class _App(typer.Typer):
    def command(self, *args, cls=_Command, **kwargs):
        return super().command(*args, cls=cls, **kwargs)


app = _App(
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


FormatOpt = Annotated[Format, typer.Option("--format", metavar="FORMAT", help="table (for people), csv or json (full precision, stdout only).")]
AsOfOpt = Annotated[str | None, typer.Option("--as-of", metavar="TIME", help="Score with what the ledger held at this time (ISO 8601; default now).")]
IncludeExcludedOpt = Annotated[bool, typer.Option("--include-excluded", help="Put back the cells that events exclude from scoring.")]
FreqOpt = Annotated[str | None, typer.Option("--freq", metavar="FREQ", help="yearly, quarterly, monthly, weekly or daily; needed when periods are bare dates of a new series.")]


def _print_version(value: bool) -> None:
    if value:
        typer.echo(f"backsight {__version__}")
        raise typer.Exit(0)


@app.callback()
def _root(
    ctx: typer.Context,
    ledger: Annotated[Path, typer.Option("--ledger", envvar="BACKSIGHT_LEDGER", metavar="FILE",
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
        message = escape(printable(message))
        with _stderr.status(message) as status:
            yield lambda text: status.update(f"{message}: {escape(printable(text))}")
    else:
        yield lambda text: None


def read_share(done: int, total: int) -> str:
    """'37% read', then 'checking and writing': the words for an import's progress callback."""
    if total and done >= total:
        return "read; checking and writing"
    return f"{100 * done / total:.0f}% read" if total else "reading"


def notice(text: str) -> None:
    """A sentence for people on stderr: names made inert, wrapped to the width."""
    for line in wrap(text, out_width(sys.stderr)):
        typer.echo(line, err=True)


def say(text: str) -> None:
    """A sentence for people on stdout: names made inert, wrapped to the width."""
    for line in wrap(text, out_width()):
        typer.echo(line)


def emit(frame: pd.DataFrame, fmt: Format, *, title: str | None = None, keep=()) -> None:
    """Print a frame: csv/json on stdout with full precision; a fitted table for people."""
    if fmt is Format.csv:
        # A lone CR inside a value is not quoted by the csv module when lines end in LF, and a
        # reader would split the row there; such (rare) output quotes every text field instead.
        quoting = csv.QUOTE_NONNUMERIC if _has_cr(frame) else csv.QUOTE_MINIMAL
        _write_out(frame.to_csv(index=False, lineterminator="\n", quoting=quoting))
    elif fmt is Format.json:
        records = json.loads(frame.to_json(orient="records", double_precision=15, date_format="iso"))
        _write_out(json.dumps(records, indent=1, ensure_ascii=False) + "\n")
    else:
        for line in render_table(frame, title=title, width=out_width(), keep=keep):
            typer.echo(line)


_PIECE = 1 << 16


def _write_out(text: str) -> None:
    """Write data to stdout a pipe's worth (64 kB) at a time.

    One big write that a reader leaves halfway (``| head -1``) comes back as a short write and
    Python drops the rest without a word, so the command would exit 0 with its output cut; the
    next piece meets the closed pipe instead, and the command ends as :class:`_Group` says (exit 1).
    """
    for start in range(0, len(text), _PIECE):
        sys.stdout.write(text[start:start + _PIECE])
    sys.stdout.flush()


def _has_cr(frame: pd.DataFrame) -> bool:
    text = [c for c in frame.columns if not pd.api.types.is_numeric_dtype(frame[c])]
    return any(frame[c].astype(str).str.contains("\r", regex=False).any() for c in text) or \
        any("\r" in str(c) for c in frame.columns)


def split(values: list[str] | None) -> list[str]:
    out: list[str] = []
    for v in values or []:
        out += [p.strip() for p in v.split(",") if p.strip()]
    return out
