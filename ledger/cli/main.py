"""The `refledger` application: global options and one sub-app per command group."""

from __future__ import annotations

from typing import Annotated

import typer

from ledger import __version__
from ledger.cli import context
from ledger.cli.render import LedgerGroup

app = typer.Typer(
    cls=LedgerGroup,
    no_args_is_help=True,
    add_completion=False,
    pretty_exceptions_show_locals=False,
    rich_markup_mode=None,
    help=(
        "refledger: refrigerant records, leak-check schedules and loss reports.\n\n"
        "Local regulation and the competent authority govern; schedules computed here are "
        "an aid to be checked."
    ),
)


def _version(value: bool) -> None:
    if value:
        typer.echo(f"refledger {__version__}")
        raise typer.Exit()


@app.callback()
def root(
    db: Annotated[
        str | None,
        typer.Option(
            "--db",
            help="Database: a file path or an SQLAlchemy URL (postgresql://...). "
            "Default: $REFLEDGER_DB, else a per-user data file.",
        ),
    ] = None,
    version: Annotated[
        bool, typer.Option("--version", callback=_version, is_eager=True, help="Show the version.")
    ] = False,
) -> None:
    """Keep refrigerant records and see what the regulations expect next."""
    context.set_db(db)


def _register() -> None:
    from ledger.cli import (
        backup_cmd,
        db_cmd,
        demo_cmd,
        detector_cmd,
        due_cmd,
        import_cmd,
        log_cmd,
        people_cmd,
        refrigerant_cmd,
        report_cmd,
        site_cmd,
        system_cmd,
        verify_cmd,
    )

    app.add_typer(site_cmd.app, name="site")
    app.add_typer(system_cmd.app, name="system")
    app.add_typer(people_cmd.tech_app, name="tech")
    app.add_typer(people_cmd.cylinder_app, name="cylinder")
    app.add_typer(log_cmd.app, name="log")
    due_cmd.register(app)
    app.add_typer(report_cmd.app, name="report")
    app.add_typer(refrigerant_cmd.app, name="refrigerant")
    app.add_typer(detector_cmd.app, name="detector")
    verify_cmd.register(app)
    import_cmd.register(app)
    backup_cmd.register(app)
    demo_cmd.register(app)
    app.add_typer(db_cmd.app, name="db")


_register()


def main() -> None:
    """Console-script entry point."""
    app()


if __name__ == "__main__":
    main()
