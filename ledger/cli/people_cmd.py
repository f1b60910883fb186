"""`refledger tech` and `refledger cylinder`: who does the work, and the gas they use."""

from __future__ import annotations

from datetime import date
from typing import Annotated

import typer

from ledger.cli import context

tech_app = typer.Typer(no_args_is_help=True, help="Technicians and their certificates.")
cylinder_app = typer.Typer(no_args_is_help=True, help="Refrigerant cylinders.")


Scope = Annotated[str, typer.Option("--scope", help="Where it is valid: eu, gb or us-608 (Section 608).")]
Category = Annotated[str, typer.Option(
    "--category", help="eu/gb: I, II, III or IV; us-608: Type I, Type II, Type III or Universal.")]
ValidFrom = Annotated[str | None, typer.Option("--valid-from", help="YYYY-MM-DD.")]
ValidTo = Annotated[str | None, typer.Option("--valid-to", help="YYYY-MM-DD (empty: no end).")]
Issuer = Annotated[str, typer.Option("--issuer", help="Certification body.")]


def _days(valid_from: str | None, valid_to: str | None) -> dict[str, date | None]:
    from ledger.inputs import parse_day

    return {
        "valid_from": parse_day(valid_from, field="--valid-from") if valid_from else None,
        "valid_to": parse_day(valid_to, field="--valid-to") if valid_to else None,
    }


@tech_app.command("add")
def tech_add(
    name: Annotated[str, typer.Argument(help="The technician's name, unique in the ledger.")],
    certificate: Annotated[str, typer.Option("--certificate", help="Certificate number.")],
    scheme: Annotated[str, typer.Option("--scheme", help="Issuing scheme or body.")],
    category: Category = "",
    valid_from: ValidFrom = None,
    valid_to: ValidTo = None,
    company: Annotated[str | None, typer.Option("--company", help="Employer.")] = None,
    scope: Scope = "",
    issuer: Issuer = "",
) -> None:
    """Add a technician with a personal certificate.

    Without --scope the certificate is judged by its dates only (as certificates recorded
    before scopes were kept); with it, only for work it covers at sites where it is valid.

    Example: refledger tech add "Ada Novak" --certificate 12-345 --scheme "F-gas"
    --scope eu --category I --valid-to 2027-06-30
    """
    from ledger.services.recording import add_technician

    add_technician(context.open_db(), name=name, certificate=certificate, scheme=scheme, category=category,
                   company=company, scope=scope, issuer=issuer, **_days(valid_from, valid_to))
    typer.echo(f"technician {name} added")


cert_app = typer.Typer(no_args_is_help=True, help="A technician's further certificates (renewals, other types).")
tech_app.add_typer(cert_app, name="certificate")


@cert_app.command("add")
def certificate_add(
    name: Annotated[str, typer.Argument(help="The technician, as in `tech list`.")],
    certificate: Annotated[str, typer.Option("--certificate", help="Certificate number.")],
    scheme: Annotated[str, typer.Option("--scheme", help="Issuing scheme or body.")],
    scope: Scope = "",
    category: Category = "",
    valid_from: ValidFrom = None,
    valid_to: ValidTo = None,
    issuer: Issuer = "",
) -> None:
    """Add a certificate to a technician already in the ledger, e.g. a renewal.

    Example: refledger tech certificate add "Ada Novak" --certificate 12-999 --scheme "F-gas"
    --scope eu --category I --valid-from 2027-07-01
    """
    from ledger.services.recording import add_certificate

    add_certificate(context.open_db(), name=name, certificate=certificate, scheme=scheme, scope=scope,
                    category=category, issuer=issuer, **_days(valid_from, valid_to))
    typer.echo(f"certificate {certificate} added to {name}")


company_app = typer.Typer(no_args_is_help=True, help="Companies that do the work and their certificates.")
tech_app.add_typer(company_app, name="company")


@company_app.command("certificate")
def company_certificate(
    company: Annotated[str, typer.Argument(help="The company (employer) name.")],
    certificate: Annotated[str, typer.Option("--certificate", help="Company certificate number.")],
    scope: Annotated[str, typer.Option("--scope", help="Where it is valid: eu, gb or us-608.")],
    valid_from: ValidFrom = None,
    valid_to: ValidTo = None,
    issuer: Issuer = "",
) -> None:
    """Record a company certificate (Reg. (EU) 2024/573 Art 10); the logbook prints it.

    Example: refledger tech company certificate "Cold Co GmbH" --certificate DE-U-123 --scope eu --valid-to 2029-12-31
    """
    from ledger.services.recording import add_company_certificate

    add_company_certificate(context.open_db(), company=company, number=certificate, scope=scope, issuer=issuer,
                            **_days(valid_from, valid_to))
    typer.echo(f"company certificate {certificate} of {company} added")


@company_app.command("list")
def company_list(json_out: Annotated[bool, typer.Option("--json", help="Print JSON.")] = False) -> None:
    """List company certificates.

    Example: refledger tech company list
    """
    from ledger.cli.render import print_json, table
    from ledger.services.queries import company_certificates

    rows = company_certificates(context.open_db())
    if json_out:
        print_json(rows)
        return
    table(["company", "scope", "certificate", "issuer", "valid from", "valid to"],
          [[r["company"], r["scope"], r["certificate"], r["issuer"], r["valid_from"], r["valid_to"] or "open"]
           for r in rows])


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
                "; ".join(
                    f"{c['scheme']} {c['number']}"
                    + (f" [{c['scope']} {c['category']}]" if c.get("scope") else "")
                    + f" (to {c['valid_to'] or 'open'})"
                    for c in r["certificates"]
                ),
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
