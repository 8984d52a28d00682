"""CLI commands that look after the ledger file itself: verify, export, import."""

from __future__ import annotations

import enum
from pathlib import Path
from typing import Annotated, Optional

import typer

from ..api import Ledger
from .common import app, busy, notice, open_ledger, say
from ..wording import plural

__all__ = ["verify", "export", "import_"]


class ExportFormat(str, enum.Enum):
    parquet = "parquet"
    csv = "csv"


@app.command()
def verify(
    ctx: typer.Context,
    export_dir: Annotated[Optional[Path], typer.Argument(
        metavar="EXPORT_DIR", help="An export folder with a manifest (a lake) to check instead of the ledger.")] = None,
) -> None:
    """Check the ledger's integrity: schema, run hashes, orphans, revisions. Exit 1 on problems.

    Given an export folder, check its files against the manifest (checksums, row counts) and run
    the same checks over its tables.
    """
    if export_dir is not None:
        with busy("Verifying"):
            problems, where = Ledger.verify_export(export_dir), export_dir
    else:
        with open_ledger(ctx) as book, busy("Verifying"):
            problems, where = book.verify(), book.path
    if problems:
        for p in problems:
            say(f"problem: {p}")
        notice(f"{where}: {plural(len(problems), 'problem')} found")
        raise typer.Exit(1)
    say(f"{where}: sound")


@app.command()
def export(
    ctx: typer.Context,
    out_dir: Annotated[Path, typer.Argument(help="Folder to write one file per table into.")],
    fmt: Annotated[ExportFormat, typer.Option("--format", metavar="FORMAT", help="parquet or csv.")] = ExportFormat.parquet,
    partition: Annotated[bool, typer.Option(
        "--partition", help="A partitioned Parquet lake with a manifest; later exports add only what is new.")] = False,
) -> None:
    """Write every table (runs, forecasts, bounds, quantiles, actuals with all revisions, series) to files."""
    if partition and fmt is not ExportFormat.parquet:
        raise typer.BadParameter("--partition writes Parquet; leave out --format csv", param_hint="--partition")
    with open_ledger(ctx) as book, busy("Exporting"):
        if partition:
            done = book.export_lake(out_dir)
            files = done.written
        else:
            files = book.export(out_dir, fmt=fmt.value)
    if partition:
        say(f"wrote {plural(len(files), 'file')} to {out_dir} ({plural(done.runs_added, 'new run')}, "
            f"{plural(done.revisions_added, 'new actual revision')}; export {done.manifest.exports})")
    else:
        say(f"wrote {plural(len(files), 'file')} to {out_dir}")


@app.command("import")
def import_(
    ctx: typer.Context,
    in_dir: Annotated[Path, typer.Argument(help="A folder written by backsight export (flat or partitioned).")],
) -> None:
    """Rebuild an export into an empty ledger (the --ledger file must be new or empty)."""
    with open_ledger(ctx, create=True) as book, busy("Importing"):
        counts = book.import_export(in_dir)
    say(", ".join(f"{n:,} {table}" for table, n in counts.items() if table != "meta"))
