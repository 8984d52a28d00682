"""CLI commands that look after the ledger file itself: verify, export, import."""

from __future__ import annotations

import enum
from pathlib import Path
from typing import Annotated

import typer

from .common import app, busy, notice, open_ledger, say
from .terminal import count

__all__ = ["verify", "export", "import_"]


class ExportFormat(str, enum.Enum):
    parquet = "parquet"
    csv = "csv"


@app.command()
def verify(ctx: typer.Context) -> None:
    """Check the ledger's integrity: schema, run hashes, orphans, revisions. Exit 1 on problems."""
    with open_ledger(ctx) as book, busy("Verifying"):
        problems = book.verify()
    if problems:
        for p in problems:
            say(f"problem: {p}")
        notice(f"{book.path}: {count(len(problems), 'problem')} found")
        raise typer.Exit(1)
    say(f"{book.path}: sound")


@app.command()
def export(
    ctx: typer.Context,
    out_dir: Annotated[Path, typer.Argument(help="Folder to write one file per table into.")],
    fmt: Annotated[ExportFormat, typer.Option("--format", metavar="FORMAT", help="parquet or csv.")] = ExportFormat.parquet,
) -> None:
    """Write every table (runs, forecasts, bounds, quantiles, actuals with all revisions, series) to files."""
    with open_ledger(ctx) as book, busy("Exporting"):
        files = book.export(out_dir, fmt=fmt.value)
    say(f"wrote {len(files)} files to {out_dir}")


@app.command("import")
def import_(
    ctx: typer.Context,
    in_dir: Annotated[Path, typer.Argument(help="A folder written by backsight export.")],
) -> None:
    """Rebuild an export into an empty ledger (the --ledger file must be new or empty)."""
    with open_ledger(ctx, create=True) as book, busy("Importing"):
        counts = book.import_export(in_dir)
    say(", ".join(f"{n} {table}" for table, n in counts.items() if table != "meta"))
