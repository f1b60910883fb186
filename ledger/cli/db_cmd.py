"""`refledger db`: where the database is, create it, migrate it."""

from __future__ import annotations

from typing import Annotated

import typer

from ledger.cli import context

app = typer.Typer(no_args_is_help=True, help="Create, locate and migrate the ledger database.")


@app.command("where")
def where() -> None:
    """Print which database this run uses and why.

    Example: refledger --db plant.db db where
    """
    loc = context.location()
    typer.echo(f"{loc.url}  (from {loc.source})")


@app.command("init")
def init() -> None:
    """Create an empty ledger (or bring an existing one to the newest schema).

    Example: refledger --db plant.db db init
    """
    from ledger.store.db import upgrade

    loc = context.location()
    before, after, _ = upgrade(loc, backup=False)
    state = "already at" if before == after else "created at"
    typer.echo(f"ledger {state} schema {after}: {loc.url}")


@app.command("status")
def status() -> None:
    """List the applied and pending schema revisions without writing anything.

    Example: refledger db status
    """
    from ledger.store.db import status as db_status

    current, pending = db_status(context.location())
    typer.echo(f"applied: {current or 'none (empty database)'}")
    typer.echo(f"pending: {', '.join(pending) if pending else 'none'}")


@app.command("upgrade")
def upgrade() -> None:
    """Apply pending schema revisions (an SQLite file is first copied to NAME.bak-REV).

    Example: refledger db upgrade
    """
    from ledger.store.db import missing_file
    from ledger.store.db import upgrade as db_upgrade

    loc = context.location()
    missing_file(loc)  # `db init` creates a ledger; upgrading names one that exists
    before, after, saved = db_upgrade(loc)
    if before == after:
        typer.echo(f"nothing to do: schema is at {after}")
        return
    if saved:
        typer.echo(f"backup: {saved}")
    typer.echo(f"upgraded {before or 'empty database'} -> {after}")


@app.command("roles")
def roles(
    writer: Annotated[
        str, typer.Option("--writer", help="Name of the application's writer role.")
    ] = "refledger_writer",
    auditor: Annotated[str, typer.Option("--auditor", help="Name of the read-only role.")] = "refledger_auditor",
    grant_writer: Annotated[
        str | None, typer.Option("--grant-writer", help="Make this login role a member of the writer role.")
    ] = None,
    grant_auditor: Annotated[
        str | None, typer.Option("--grant-auditor", help="Make this login role a member of the auditor role.")
    ] = None,
) -> None:
    """PostgreSQL only: create roles that can append events but never change them, and read only.

    Example: refledger --db postgresql://admin@db/ledger db roles --grant-writer ledger_app
    """
    from ledger.services.dbroles import make_roles

    made = make_roles(context.open_db(), writer=writer, auditor=auditor, grant_writer=grant_writer,
                      grant_auditor=grant_auditor)
    typer.echo(f"writer role {made.writer}: SELECT everything, INSERT events and filings, never UPDATE/DELETE them")
    typer.echo(f"auditor role {made.auditor}: SELECT only (not the web accounts tables)")
