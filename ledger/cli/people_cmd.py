"""`refledger tech` and `refledger cylinder`: who does the work, and the gas they use."""

from __future__ import annotations

from typing import Annotated

import typer

from ledger.cli import context

tech_app = typer.Typer(no_args_is_help=True, help="Technicians and their certificates.")
cylinder_app = typer.Typer(no_args_is_help=True, help="Refrigerant cylinders.")


@tech_app.command("add")
def tech_add(
    name: Annotated[str, typer.Argument(help="The technician's name, unique in the ledger.")],
    certificate: Annotated[str, typer.Option("--certificate", help="Certificate number.")],
    scheme: Annotated[str, typer.Option("--scheme", help="Issuing scheme or body.")],
    category: Annotated[str, typer.Option("--category", help="Category or type.")] = "",
    valid_from: Annotated[str | None, typer.Option("--valid-from", help="YYYY-MM-DD.")] = None,
    valid_to: Annotated[str | None, typer.Option("--valid-to", help="YYYY-MM-DD.")] = None,
    company: Annotated[str | None, typer.Option("--company", help="Employer.")] = None,
) -> None:
    """Add a technician with a personal certificate.

    Example: refledger tech add "Ada Novak" --certificate 12-345 --scheme "F-gas cat I" --valid-to 2027-06-30
    """
    from ledger.inputs import parse_day
    from ledger.services.recording import add_technician

    add_technician(
        context.open_db(),
        name=name,
        certificate=certificate,
        scheme=scheme,
        category=category,
        valid_from=parse_day(valid_from, field="--valid-from") if valid_from else None,
        valid_to=parse_day(valid_to, field="--valid-to") if valid_to else None,
        company=company,
    )
    typer.echo(f"technician {name} added")


@tech_app.command("list")
def tech_list(json_out: Annotated[bool, typer.Option("--json", help="Print JSON.")] = False) -> None:
    """List technicians and their certificates.

    Example: refledger tech list
    """
    from ledger.cli.render import print_json, table
    from ledger.services.queries import technicians

    rows = technicians(context.open_db())
    if json_out:
        print_json(rows)
        return
    table(
        ["name", "company", "certificates"],
        [
            [
                r["name"],
                r["company"],
                "; ".join(f"{c['scheme']} {c['number']} (to {c['valid_to'] or 'open'})" for c in r["certificates"]),
            ]
            for r in rows
        ],
    )


@cylinder_app.command("add")
def cylinder_add(
    code: Annotated[str, typer.Argument(help="Cylinder id as marked on it.")],
    refrigerant: Annotated[str, typer.Option("--refrigerant", help="What it holds, e.g. R-404A.")],
    kind: Annotated[str, typer.Option("--kind", help="virgin, recovery or reclaimed.")],
    tare: Annotated[str | None, typer.Option("--tare", help="Empty weight, e.g. 13.6 kg.")] = None,
) -> None:
    """Add a refrigerant cylinder.

    Example: refledger cylinder add C-0412 --refrigerant R-448A --kind virgin --tare 13.6kg
    """
    from ledger.inputs import parse_code
    from ledger.services.recording import add_cylinder
    from ledger.units import parse_mass_ng

    add_cylinder(
        context.open_db(),
        code=parse_code(code, field="ID"),
        refrigerant=refrigerant,
        kind=kind,
        tare_ng=parse_mass_ng(tare, field="--tare") if tare else None,
    )
    typer.echo(f"cylinder {code} added")


@cylinder_app.command("list")
def cylinder_list(json_out: Annotated[bool, typer.Option("--json", help="Print JSON.")] = False) -> None:
    """List cylinders.

    Example: refledger cylinder list
    """
    from ledger.cli.render import print_json, table
    from ledger.services.queries import cylinders

    rows = cylinders(context.open_db())
    if json_out:
        print_json(rows)
        return
    table(
        ["id", "refrigerant", "kind", "tare_kg"], [[r["id"], r["refrigerant"], r["kind"], r["tare_kg"]] for r in rows]
    )
