"""`refledger serve`: the web app for technicians, officers and auditors."""

from __future__ import annotations

from typing import Annotated

import typer

from ledger.cli import context


def register(app: typer.Typer) -> None:
    """Add the `serve` command to the application."""
    app.command("serve")(serve)


def serve(
    host: Annotated[str, typer.Option("--host", help="Address to listen on (0.0.0.0 for the network).")] = "127.0.0.1",
    port: Annotated[int, typer.Option("--port", help="Port to listen on.")] = 8000,
    idle_minutes: Annotated[
        int, typer.Option("--idle-minutes", help="Log a browser out after this many minutes unused.")
    ] = 30,
) -> None:
    """Serve the web app on the ledger (users come from `refledger user add`).

    Serve it behind HTTPS when it is reached from other machines: session cookies are then
    marked Secure. Local regulation governs; schedules shown are an aid to be checked.

    Example: refledger --db ledger.db serve --port 8000
    """
    from datetime import timedelta

    import uvicorn

    from ledger.web.app import Settings, create_app

    if not 1 <= idle_minutes <= 24 * 60:
        raise typer.BadParameter("must be between 1 and 1440 minutes", param_hint="--idle-minutes")
    db = context.open_db()
    db.check_schema()
    db.close()
    app = create_app(Settings(location=context.location(), idle=timedelta(minutes=idle_minutes)))
    typer.echo(f"refledger web app on http://{host}:{port}/  (ledger {context.location().url}; Ctrl-C stops it)")
    uvicorn.run(app, host=host, port=port, log_level="warning", proxy_headers=False)
