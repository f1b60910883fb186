"""`refledger verify`: recompute the hash chains and name the first event that does not match."""

from __future__ import annotations

from typing import Annotated

import typer

from ledger.cli import context
from ledger.cli.render import EXIT_FINDINGS


def register(app: typer.Typer) -> None:
    """Add the `verify` command to the application."""
    app.command("verify")(verify)


def verify(
    site: Annotated[str | None, typer.Option("--site", help="Only this site.")] = None,
    json_out: Annotated[bool, typer.Option("--json", help="Print JSON.")] = False,
) -> None:
    """Check that no event was edited, removed, inserted or reordered; exit 1 if one was.

    Example: refledger verify --site GB-LDS
    """
    from ledger.cli.render import print_json
    from ledger.services.integrity import verification_json
    from ledger.services.integrity import verify as run_verify

    result = run_verify(context.open_db(), site_code=site)
    if json_out:
        print_json(verification_json(result))
    else:
        for b in result.breaks:
            typer.echo(f"BROKEN {b.site}/{b.system}: event {b.event_id} {b.what}: {b.detail}", err=True)
        state = "intact" if result.ok else f"{len(result.breaks)} chain(s) broken"
        typer.echo(f"{result.systems} chains, {result.events} events: {state}; heads digest {result.digest}")
    if not result.ok:
        raise typer.Exit(code=EXIT_FINDINGS)
