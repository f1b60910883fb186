"""The command reference in docs/cli.md, generated from the commands' own --help (cog)."""

from __future__ import annotations

import os


def _walk(command, path):  # type: ignore[no-untyped-def]
    yield path, command
    subcommands = getattr(command, "commands", None)
    if subcommands:
        for name in subcommands:
            yield from _walk(subcommands[name], [*path, name])


def command_paths() -> list[list[str]]:
    """Every command path, e.g. ``["log", "add"]``, in registration order."""
    import typer.main

    from ledger.cli.main import app

    return [path for path, _ in _walk(typer.main.get_command(app), [])]


def help_text(path: list[str]) -> str:
    """The --help output of one command at a fixed width."""
    from typer.testing import CliRunner

    from ledger.cli.main import app

    os.environ["COLUMNS"] = "100"
    result = CliRunner().invoke(app, [*path, "--help"], env={"COLUMNS": "100"}, prog_name="refledger")
    return result.output.rstrip() + "\n"


def cli_reference() -> str:
    """Markdown with one section per command, holding its help text."""
    parts = []
    for path in command_paths():
        title = " ".join(["refledger", *path])
        parts.append(f"## `{title}`\n\n```\n{help_text(path)}```\n")
    return "\n".join(parts)
