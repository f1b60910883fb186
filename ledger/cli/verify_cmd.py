"""`refledger verify`, `refledger checkpoint` and `refledger key`: recompute the chains, sign
their heads, and check the ledger against a signed checkpoint."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from ledger.cli import context
from ledger.cli.render import EXIT_FINDINGS

key_app = typer.Typer(help="Signing keys for checkpoints (kept outside the database).", no_args_is_help=True)


def register(app: typer.Typer) -> None:
    """Add the `verify` and `checkpoint` commands to the application."""
    app.command("verify")(verify)
    app.command("checkpoint")(checkpoint)


def verify(
    site: Annotated[str | None, typer.Option("--site", help="Only this site's chains and records.")] = None,
    checkpoint_ref: Annotated[
        str | None,
        typer.Option("--checkpoint", metavar="FILE_OR_ID",
                     help="Also prove every chain still holds what this signed checkpoint recorded."),
    ] = None,
    public_key: Annotated[
        Path | None,
        typer.Option("--public-key", help="Check the checkpoint's signature against this public key file "
                                          "(the auditor's copy); default: the key stored with it."),
    ] = None,
    json_out: Annotated[bool, typer.Option("--json", help="Print JSON.")] = False,
) -> None:
    """Check that no event or record was edited, removed, inserted or reordered, and that the
    database guards are in place; exit 1 if anything does not hold.

    Example: refledger verify --checkpoint 3 --public-key auditor.pub
    """
    from ledger.cli.render import print_json
    from ledger.services.checkpoints import check_signature, load_checkpoint, load_public_key
    from ledger.services.integrity import verification_json
    from ledger.services.integrity import verify as run_verify

    db = context.open_db()
    signed = found = None
    if checkpoint_ref is not None:
        found = load_checkpoint(db, checkpoint_ref)
        signed = check_signature(found, load_public_key(public_key) if public_key else None)
    elif public_key is not None:
        raise typer.BadParameter("needs --checkpoint", param_hint="--public-key")
    result = run_verify(db, site_code=site, checkpoint=found.statement
                        if found is not None and signed is not None and signed.ok else None)
    ok = result.ok and (signed is None or signed.ok)
    if json_out:
        print_json(verification_json(result, found, signed))
    else:
        for line in result.problems():
            typer.echo(f"BROKEN {line}", err=True)
        if found is not None and signed is not None:
            for p in signed.problems:
                typer.echo(f"BROKEN checkpoint: {p}", err=True)
        state = "intact" if result.ok else f"{len(result.problems())} problem(s)"
        typer.echo(f"{result.systems} chains, {result.events} events, {result.record_versions} record versions: "
                   f"{state}; heads digest {result.digest}")
        if found is not None and signed is not None:
            where = f"checkpoint {found.id}" if found.id is not None else f"checkpoint file {checkpoint_ref}"
            verdict = "holds" if signed.ok and not result.checkpoint_breaks else "does NOT hold"
            typer.echo(f"{where} of {found.made_at} (key {found.key_id}, signature checked against "
                       f"{signed.key_source}): {verdict}")
            if signed.ok and public_key is None:
                typer.echo("note: give --public-key with your own copy of the key; the stored key only shows the "
                           "statement was not altered after it was signed")
    if not ok:
        raise typer.Exit(code=EXIT_FINDINGS)


def checkpoint(
    key: Annotated[Path, typer.Option("--key", help="The private key file (from `refledger key new`).")],
    out: Annotated[Path | None, typer.Option("--out", help="Also write the signed checkpoint to this file.")] = None,
) -> None:
    """Verify the ledger, then sign a statement of every chain head (and their Merkle root)
    and store it; give the file or the public key to whoever must be able to check later.

    Example: refledger checkpoint --key ~/.refledger/site.key --out cp-2026-12-03.json
    """
    from ledger.services.checkpoints import make_checkpoint

    made = make_checkpoint(context.open_db(), key_path=key, out=out)
    chains = len(made.statement["chains"])
    typer.echo(f"checkpoint {made.id}: {chains} event chains and the record chain, signed with key {made.key_id}")
    typer.echo(f"  merkle root {made.statement['merkle_root']}")
    if out is not None:
        typer.echo(f"  written to {out}")


@key_app.command("new")
def key_new(path: Annotated[Path, typer.Argument(help="Where to write the private key (mode 0600).")]) -> None:
    """Make an Ed25519 signing key: the private key at PATH (readable by you only, keep it out
    of the database and its backups), the public key at PATH.pub for auditors.

    Example: refledger key new ~/.refledger/site.key
    """
    from ledger.services.checkpoints import new_key

    made = new_key(path)
    typer.echo(f"private key {made.private_path} (mode 600); public key {made.public_path}")
    typer.echo(f"key id {made.key_id}; public key {made.public_hex}")
