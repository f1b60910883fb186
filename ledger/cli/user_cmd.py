"""`refledger user`: who may log in to the web app (`refledger serve`) and in which role."""

from __future__ import annotations

import sys
from typing import Annotated, Any

import typer

from ledger.cli import context

app = typer.Typer(no_args_is_help=True, help="Web app users and their roles.")

PasswordStdin = Annotated[
    bool, typer.Option("--password-stdin", help="Read the password from standard input (else one is made up).")
]


def _password(from_stdin: bool) -> tuple[str, bool]:
    from ledger.services.accounts import new_password

    if from_stdin:
        return sys.stdin.readline().rstrip("\n"), False
    return new_password(), True


@app.command("add")
def add(
    name: Annotated[str, typer.Argument(help="Login name (no spaces).")],
    role: Annotated[str, typer.Option("--role", help="technician, officer, auditor or admin.")],
    tech: Annotated[str | None, typer.Option("--tech", help="The technician record this user is.")] = None,
    site: Annotated[
        list[str] | None, typer.Option("--site", help="A technician's site (repeatable; default: every site).")
    ] = None,
    password_stdin: PasswordStdin = False,
) -> None:
    """Add a user; without --password-stdin a password is made up and printed once.

    Example: refledger user add jana --role technician --tech "Jana Köhler" --site DE-LEJ
    """
    from ledger.services.accounts import add_user

    password, made_up = _password(password_stdin)
    user = add_user(context.open_db(), name=name, role=role, password=password, technician=tech, sites=site or ())
    where = f", sites {', '.join(user.sites)}" if user.sites else ""
    typer.echo(f"user {user.name} added: {user.role}{where}" + (f"; password: {password}" if made_up else ""))


@app.command("list")
def list_(json_out: Annotated[bool, typer.Option("--json", help="Print JSON.")] = False) -> None:
    """List the users and their roles.

    Example: refledger user list
    """
    from ledger.cli.render import print_json, table
    from ledger.services.accounts import list_users

    rows: list[dict[str, Any]] = [{"name": u.name, "role": u.role, "technician": u.technician, "sites": list(u.sites),
             "disabled": u.disabled} for u in list_users(context.open_db())]
    if json_out:
        print_json(rows)
        return
    table(["name", "role", "technician", "sites", "disabled"],
          [[r["name"], r["role"], r["technician"] or "", ", ".join(r["sites"]) or "(all)",
            "yes" if r["disabled"] else ""] for r in rows])


@app.command("password")
def password(
    name: Annotated[str, typer.Argument(help="Login name.")],
    password_stdin: PasswordStdin = False,
) -> None:
    """Set a new password (the user's sessions end); without --password-stdin one is made up.

    Example: refledger user password jana
    """
    from ledger.services.accounts import set_password

    new, made_up = _password(password_stdin)
    set_password(context.open_db(), name=name, password=new)
    typer.echo(f"password of {name} changed" + (f": {new}" if made_up else ""))


@app.command("disable")
def disable(name: Annotated[str, typer.Argument(help="Login name.")]) -> None:
    """Stop a user from logging in (their sessions end at once).

    Example: refledger user disable jana
    """
    from ledger.services.accounts import set_disabled

    set_disabled(context.open_db(), name=name, disabled=True)
    typer.echo(f"user {name} disabled")


@app.command("enable")
def enable(name: Annotated[str, typer.Argument(help="Login name.")]) -> None:
    """Let a disabled user log in again.

    Example: refledger user enable jana
    """
    from ledger.services.accounts import set_disabled

    set_disabled(context.open_db(), name=name, disabled=False)
    typer.echo(f"user {name} enabled")
