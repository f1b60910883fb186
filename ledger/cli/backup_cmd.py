"""`refledger export` and `refledger restore`: the whole ledger as plain files, and back."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from ledger.cli import context


def register(app: typer.Typer) -> None:
    """Add the `export` and `restore` commands to the application."""
    app.command("export")(export)
    app.command("restore")(restore)


def export(
    folder: Annotated[Path | None, typer.Argument(metavar="DIR", help="Empty or new folder.")] = None,
    workbook: Annotated[
        Path | None,
        typer.Option("--workbook", help="Instead: every record as an import workbook (docs/import.md).",
                     metavar="FILE"),
    ] = None,
) -> None:
    """Write the whole ledger as plain files (one per table) plus a manifest with counts and digests.

    With --workbook, write the records in the import layout instead; importing that workbook
    into an empty ledger gives the same records and the same chain heads.

    Example: refledger export backup-2026-12-01
    """
    from ledger.cli.outputs import output_file, output_folder, writing
    from ledger.services.backup import export_ledger, export_workbook

    if workbook is not None:
        output_file(workbook, "--workbook")
        with writing(workbook, "--workbook"):
            counts = export_workbook(context.open_db(), workbook)
        typer.echo(f"wrote {workbook}: " + ", ".join(f"{n} {k}" for k, n in counts.items()))
        return
    if folder is None:
        raise typer.BadParameter("give a folder, or --workbook FILE", param_hint="DIR")
    output_folder(folder, "DIR")
    with writing(folder, "DIR"):
        result = export_ledger(context.open_db(), folder)
    total = sum(result.counts.values())
    typer.echo(
        f"exported {total} rows ({result.counts.get('event', 0)} events) to {folder}; "
        f"chain heads digest {result.heads_digest}"
    )


def restore(
    folder: Annotated[Path, typer.Argument(metavar="DIR", help="A folder written by `refledger export`.")],
    db: Annotated[str, typer.Option("--db", help="Target database (path or URL); must be empty.")],
) -> None:
    """Load an export into an empty database of either kind and verify its chains.

    Example: refledger restore backup-2026-12-01 --db postgresql://ledger@db.example/ledger
    """
    from ledger.services.backup import restore_ledger
    from ledger.store.db import locate

    context.resume_collector()  # startup is over; the target is not this run's --db (context.location)
    result = restore_ledger(folder, locate(db))
    typer.echo(f"restored {sum(result.counts.values())} rows; chains verified; heads digest {result.heads_digest}")
