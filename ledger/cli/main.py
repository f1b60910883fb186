"""The `refledger` application: global options and one sub-app per command group.

Only the command a run names is imported and built (``COMMANDS``, ``ledger.cli.lazy``).
"""

from __future__ import annotations

import importlib
from typing import Annotated, Any

import typer

from ledger import __version__
from ledger.cli import context, lazy
from ledger.cli.render import LedgerGroup


class RootGroup(LedgerGroup):
    """The root group: every command known by name, built on first use (see ``COMMANDS``)."""

    def __init__(self, **kwargs: Any) -> None:
        super().__init__(**kwargs)
        self.commands = lazy.LazyCommands(list(COMMANDS), lambda name: _build(self, name))

    def list_commands(self, ctx):
        return list(self.commands)


app = typer.Typer(
    cls=RootGroup,
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


# Every top-level command, in the order `--help` lists them: name -> (module in ledger.cli, the
# module's sub-app for a command group, or None for a command the module's `register` adds).
# A run imports and builds only the command it names.
COMMANDS: dict[str, tuple[str, str | None]] = {
    "due": ("due_cmd", None),
    "leak-rate": ("due_cmd", None),
    "rules": ("due_cmd", None),
    "exposure": ("exposure_cmd", None),
    "verify": ("verify_cmd", None),
    "checkpoint": ("verify_cmd", None),
    "key": ("verify_cmd", "key_app"),
    "import": ("import_cmd", None),
    "export": ("backup_cmd", None),
    "restore": ("backup_cmd", None),
    "demo": ("demo_cmd", None),
    "site": ("site_cmd", "app"),
    "system": ("system_cmd", "app"),
    "tech": ("people_cmd", "tech_app"),
    "cylinder": ("people_cmd", "cylinder_app"),
    "log": ("log_cmd", "app"),
    "report": ("report_cmd", "app"),
    "refrigerant": ("refrigerant_cmd", "app"),
    "detector": ("detector_cmd", "app"),
    "db": ("db_cmd", "app"),
    "user": ("user_cmd", "app"),
    "serve": ("serve_cmd", None),
    "label": ("label_cmd", None),
}


def _build(group: RootGroup, name: str) -> Any:
    """Import the module of command ``name`` and have Typer build its click command."""
    module_name, sub_app = COMMANDS[name]
    module = importlib.import_module(f"ledger.cli.{module_name}")
    holder = typer.Typer()
    if sub_app is None:
        module.register(holder)
    else:
        holder.add_typer(getattr(module, sub_app), name=name)
    settings = lazy.BuildSettings(
        pretty_exceptions_short=app.pretty_exceptions_short,
        rich_markup_mode=group.rich_markup_mode,
        suggest_commands=group.suggest_commands,
    )
    return lazy.build_command(holder, name, settings)


lazy.use_plain_coercion()


def main() -> None:
    """Console-script entry point."""
    context.pause_collector()  # until the command first uses the database (see context)
    try:
        app()
    finally:
        context.resume_collector(freeze=False)  # no-op unless the run never used the database


if __name__ == "__main__":
    main()
