"""The command reference in docs/cli.md, generated from the commands' own --help (cog)."""

from __future__ import annotations

import os


def _walk(command, path):
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


def _cell(text: object) -> str:
    return str(text).replace("|", "\\|").replace("\n", " ")


def rules_table(code: str) -> str:
    """Markdown table of one regime's constants, from the same `CONSTANTS` the engine uses.

    docs/rules/<code>.md embeds it with cog, and `refledger rules` prints the same rows, so
    the two cannot disagree (tests/cli/test_docs.py runs `cog --check` on every page).
    """
    from ledger.services.queries import rules_view

    (view,) = rules_view(code)
    lines = [f"Rule version `{view['version']}`, GWP basis `{view['gwp_basis']}`.", "",
             "| constant | value | unit | source | mark | note |", "|---|---|---|---|---|---|"]
    for c in view["constants"]:
        lines.append("| " + " | ".join(_cell(x) for x in (
            c["name"], c["value"], c["unit"], c["citation"], c["confidence"], c["note"])) + " |")
    return "\n".join(lines) + "\n"


def servicing_table() -> str:
    """Markdown table of the packaged servicing prohibitions (docs/exposure.md, by cog)."""
    from ledger.reference.servicing import load_servicing

    lines = ["| regime | rule | covers | from | may not use | source | mark | note |",
             "|---|---|---|---|---|---|---|---|"]
    for b in load_servicing():
        use = {"virgin": "virgin gas (reclaimed / recycled allowed)", "any": "any gas",
               "reclaimed only": "anything but reclaimed gas"}.get(b.refrigerant_use, b.refrigerant_use)
        lines.append("| " + " | ".join(_cell(x) for x in (
            b.regime, b.code, b.what, b.from_on.isoformat(), use, b.citation, b.confidence,
            b.note)) + " |")
    return "\n".join(lines) + "\n"


def retrofit_table() -> str:
    """Markdown table of the packaged retrofit targets with their GWPs under each basis."""
    from ledger.reference import load_reference, round_half_up
    from ledger.reference.servicing import load_retrofits

    ref = load_reference()
    lines = ["| refrigerant | equipment | retrofit to | GWP eu / gb / ar4 of the target | source |",
             "|---|---|---|---|---|"]
    for t in load_retrofits():
        gwps = " / ".join(f"{round_half_up(ref.gwp(t.target, b).value)}" for b in ("eu", "gb", "ar4"))
        lines.append("| " + " | ".join(_cell(x) for x in (
            t.refrigerant, ", ".join(sorted(t.applications)), t.target, gwps, t.source)) + " |")
    return "\n".join(lines) + "\n"
