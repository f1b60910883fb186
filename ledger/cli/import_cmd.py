"""`refledger import`: bring records in from CSV files or an XLSX workbook."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from ledger.cli import context
from ledger.cli.render import EXIT_USER_ERROR


def register(app: typer.Typer) -> None:
    """Add the `import` command to the application."""
    app.command("import")(import_)


def import_(
    files: Annotated[
        list[Path] | None,
        typer.Argument(help="CSV files named sites/technicians/cylinders/systems/events.csv, or .xlsx workbooks."),
    ] = None,
    dry_run: Annotated[bool, typer.Option("--dry-run", help="Check everything, write nothing.")] = False,
    dayfirst: Annotated[bool, typer.Option("--dayfirst", help="Accept DD/MM/YYYY dates.")] = False,
    template: Annotated[
        Path | None,
        typer.Option("--template", help="Write a blank XLSX template with an example row per sheet, then stop."),
    ] = None,
) -> None:
    """Import records; all or nothing, and rows already in the ledger are skipped.

    Example: refledger import sample_records/*.csv --dry-run
    """
    if template is not None:
        from ledger.cli.outputs import output_file, writing
        from ledger.exports.template import write_template

        output_file(template, "--template")
        with writing(template, "--template"):
            write_template(template)
        typer.echo(f"template written: {template}")
        return
    if not files:
        raise typer.BadParameter("give at least one file, or --template FILE.xlsx")
    summary = _run(files, dry_run=dry_run, dayfirst=dayfirst)
    for w in summary.warnings:
        typer.echo(w, err=True)
    if summary.problems:
        for p in summary.problems:
            typer.echo(f"error: {p}", err=True)
        typer.echo(f"nothing imported: {len(summary.problems)} problem(s)", err=True)
        raise typer.Exit(code=EXIT_USER_ERROR)
    verb = "would add" if dry_run else "added"
    parts = [f"{n} {k}" for k, n in summary.added.items() if n]
    skipped = [f"{n} {k}" for k, n in summary.skipped.items() if n]
    typer.echo(
        f"{verb}: {', '.join(parts) or 'nothing'}" + (f"; already present: {', '.join(skipped)}" if skipped else "")
    )


def _run(files: list[Path], *, dry_run: bool, dayfirst: bool):
    from ledger.services.importing import import_files

    total_rows = sum(_line_count(f) for f in files if f.suffix.lower() == ".csv" and f.exists())
    if total_rows < 5000:
        return import_files(context.open_db(), files, dry_run=dry_run, dayfirst=dayfirst)
    from rich.progress import Progress

    with Progress(transient=True) as bar:
        task = bar.add_task("importing events", total=None)

        def progress(done: int, total: int) -> None:
            bar.update(task, completed=done, total=total)

        return import_files(context.open_db(), files, dry_run=dry_run, dayfirst=dayfirst, progress=progress)


def _line_count(path: Path) -> int:
    with path.open("rb") as fh:
        return sum(1 for _ in fh)
