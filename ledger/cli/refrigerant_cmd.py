"""`refledger refrigerant`: the reference data, GWP under each basis, CO2e of a charge."""

from __future__ import annotations

from typing import Annotated

import typer

app = typer.Typer(no_args_is_help=True, help="Refrigerant reference data and CO2e.")


@app.command("show")
def show(
    name: Annotated[str, typer.Argument(help="e.g. R-404A, R404A, 404A, HFC-134a, CO2.")],
    charge: Annotated[str | None, typer.Option("--charge", help="A charge to convert to CO2e.")] = None,
    json_out: Annotated[bool, typer.Option("--json", help="Print JSON.")] = False,
) -> None:
    """Show a refrigerant: composition, safety class, GWP under each basis, CO2e of a charge.

    Example: refledger refrigerant show R-404A --charge 12.5kg --json
    """
    from ledger.cli.render import LOCAL_RULES_NOTE, print_json, table
    from ledger.services.refrigerants import refrigerant_view
    from ledger.units import parse_mass_ng

    charge_ng = parse_mass_ng(charge, field="--charge") if charge else None
    view = refrigerant_view(name, charge_ng=charge_ng)
    if json_out:
        print_json(view)
        return
    typer.echo(f"{view['designation']}  safety class {view['safety_class']}")
    for c in view["components"]:
        typer.echo(f"  {c['designation']:<14} {c['mass_percent']} %")
    rows = []
    for basis in view["gwp"]:
        row = [basis, str(view["gwp_rounded"][basis])]
        if charge_ng is not None:
            row.append(view["co2e_display"][basis])
        rows.append(row)
    table(["basis", "GWP"] + (["t CO2e"] if charge_ng is not None else []), rows)
    for note in view["notes"]:
        typer.echo(f"note: {note}")
    if view["caution"]:
        typer.echo(f"caution: {view['caution']}")
    typer.echo(LOCAL_RULES_NOTE)


@app.command("list")
def list_(
    json_out: Annotated[bool, typer.Option("--json", help="Print JSON.")] = False,
) -> None:
    """List the refrigerants in the reference data with their GWP.

    Example: refledger refrigerant list
    """
    from ledger.cli.render import print_json, table
    from ledger.services.refrigerants import refrigerant_list

    rows = refrigerant_list()
    if json_out:
        print_json(rows)
        return
    table(
        ["designation", "safety", "kind", "GWP eu", "ar4", "ar5", "ar6"],
        [[r["designation"], r["safety_class"], r["kind"], *r["gwp_display"].values()] for r in rows],
    )
