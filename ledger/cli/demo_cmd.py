"""`refledger demo`: build the demo ledger from sample_records/ and show what is due."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from ledger.cli import context

DEFAULT_RECORDS = Path(__file__).resolve().parents[2] / "sample_records"


def register(app: typer.Typer) -> None:
    """Add the `demo` command to the application."""
    app.command("demo")(demo)


def demo(
    records: Annotated[
        Path,
        typer.Option("--records", help="Folder with the demo CSV files [default: the project's sample_records/].",
                     show_default=False),
    ] = DEFAULT_RECORDS,
    out: Annotated[Path | None, typer.Option("--out", help="Also write sample reports into this folder.")] = None,
    replace: Annotated[bool, typer.Option("--replace", help="Delete an existing SQLite demo file first.")] = False,
) -> None:
    """Build the demo ledger (an invented retailer) and print what is due.

    Example: refledger --db demo.db demo --replace --out demo-output
    """
    from ledger.cli.outputs import output_folder
    from ledger.cli.render import LOCAL_RULES_NOTE
    from ledger.services.demo import build_demo

    output_folder(out, "--out")
    result = build_demo(context.location(), records=records, out=out, replace=replace)
    typer.echo(f"demo ledger: {result.url}")
    typer.echo(f"  {result.sites} sites, {result.systems} systems, {result.events} events")
    for w in result.warnings:
        typer.echo(f"  {w}")
    typer.echo(f"\nWhat is due as of {result.as_of} (earliest first, {len(result.due)} open or overdue):")
    for line in result.due[:20]:
        typer.echo(f"  {line}")
    if len(result.due) > 20:
        typer.echo(f"  ... and {len(result.due) - 20} more: refledger due")
    for path in result.files:
        typer.echo(f"wrote {path}")
    typer.echo("\nWeb app users (passwords are shown only now):")
    for name, role, password in result.users:
        typer.echo(f"  {name:<8} {role:<10} {password}")
    typer.echo(f"Start the web app: refledger --db {result.url.removeprefix('sqlite:///')} serve  "
               "(then open http://127.0.0.1:8000/)")
    typer.echo("\n" + LOCAL_RULES_NOTE)
