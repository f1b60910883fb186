"""`refledger system`: add, list, show and set systems."""

from __future__ import annotations

from typing import Annotated

import typer

from ledger.cli import context

app = typer.Typer(no_args_is_help=True, help="Systems: equipment holding refrigerant.")

Ref = Annotated[str, typer.Argument(metavar="SITE/TAG", help="The system, as SITE/TAG.")]


@app.command("add")
def add(
    ref: Ref,
    refrigerant: Annotated[str, typer.Option("--refrigerant", help="e.g. R-448A, R744, 404A.")],
    charge: Annotated[str, typer.Option("--charge", help="Full charge, e.g. 120kg or 310 lb.")],
    application: Annotated[
        str,
        typer.Option(
            "--application",
            help="commercial-refrigeration, industrial-process, comfort-cooling, transport-refrigeration or other.",
        ),
    ],
    in_service: Annotated[str, typer.Option("--in-service", help="Day placed in service, YYYY-MM-DD.")],
    hermetic: Annotated[bool, typer.Option("--hermetic", help="Hermetically sealed and labelled.")] = False,
    residential: Annotated[bool, typer.Option("--residential", help="Installed in a residential building.")] = False,
    detection_system: Annotated[
        bool, typer.Option("--detection-system", help="Has a working leak detection system.")
    ] = False,
    form: Annotated[
        str,
        typer.Option("--form", help="central-plant, condensing-unit, self-contained, chiller, split, other."),
    ] = "other",
    description: Annotated[str, typer.Option("--description", help="What it is.")] = "",
    location: Annotated[str, typer.Option("--location", help="Where it is on site.")] = "",
    maker: Annotated[str, typer.Option("--maker", help="Manufacturer.")] = "",
    model: Annotated[str, typer.Option("--model", help="Model.")] = "",
    serial: Annotated[str, typer.Option("--serial", help="Serial number.")] = "",
    tech: Annotated[str | None, typer.Option("--tech", help="Technician who commissioned it.")] = None,
) -> None:
    """Add a system and record it as placed in service.

    Example: refledger system add DE-HAM/RACK-1 --refrigerant R-448A --charge 120kg
    --application commercial-refrigeration --in-service 2022-04-01
    """
    from ledger.inputs import parse_code, parse_day, parse_system_ref
    from ledger.services.recording import add_system
    from ledger.units import parse_mass_ng

    site_code, tag = parse_system_ref(ref)
    logged = add_system(
        context.open_db(),
        site_code=site_code,
        tag=parse_code(tag, field="TAG"),
        refrigerant=refrigerant,
        charge_ng=parse_mass_ng(charge, field="--charge"),
        application=application,
        in_service_on=parse_day(in_service, field="--in-service"),
        hermetic=hermetic,
        residential=residential,
        detection_system=detection_system,
        equipment_form=form,
        description=description,
        location=location,
        maker=maker,
        model=model,
        serial=serial,
        technician=tech,
        recorded_by=tech,
    )
    typer.echo(f"system {site_code}/{tag} added (event {logged.event_id})")


@app.command("list")
def list_(
    site: Annotated[str | None, typer.Option("--site", help="Only this site.")] = None,
    json_out: Annotated[bool, typer.Option("--json", help="Print JSON.")] = False,
) -> None:
    """List systems with refrigerant, charge and CO2e today.

    Example: refledger system list --site DE-HAM
    """
    from ledger.cli.render import print_json, table
    from ledger.services.estate import systems_overview

    rows = systems_overview(context.open_db(), site_code=site)
    if json_out:
        print_json(rows)
        return
    table(
        ["system", "application", "refrigerant", "charge", "t CO2e", "in service"],
        [
            [
                f"{r['site']}/{r['tag']}",
                r["application"],
                r["refrigerant"],
                r["charge"],
                r["co2e_t_display"],
                "yes" if r["in_service"] else "retired",
            ]
            for r in rows
        ],
    )


@app.command("show")
def show(
    ref: Ref,
    as_of: Annotated[str | None, typer.Option("--as-of", help="Day to look at (default: today).")] = None,
    json_out: Annotated[bool, typer.Option("--json", help="Print JSON.")] = False,
) -> None:
    """Show a system: state, tier per regime, obligations, leak rates and history.

    Example: refledger system show DE-HAM/RACK-1 --as-of 2025-12-31 --json
    """
    from ledger.cli.render import print_json
    from ledger.cli.views import print_system
    from ledger.inputs import parse_day, parse_system_ref
    from ledger.services.queries import system_view
    from ledger.services.recording import site_today

    site_code, tag = parse_system_ref(ref)
    db = context.open_db()
    day = parse_day(as_of, field="--as-of") if as_of else None
    if day is None:
        from ledger.services.queries import sites

        zone = next((s["timezone"] for s in sites(db) if s["code"] == site_code), "UTC")
        day = site_today(zone)
    view = system_view(db, site_code=site_code, tag=tag, as_of=day)
    if json_out:
        print_json(view)
    else:
        print_system(view)


@app.command("set")
def set_(
    ref: Ref,
    defrost_every: Annotated[
        float | None, typer.Option("--defrost-every", help="Defrost interval in hours (detector review).")
    ] = None,
) -> None:
    """Set static facts about a system that are not events, e.g. its defrost interval.

    Example: refledger system set DE-HAM/RACK-1 --defrost-every 6
    """
    from ledger.inputs import parse_system_ref
    from ledger.services.recording import set_system

    site_code, tag = parse_system_ref(ref)
    set_system(context.open_db(), site_code=site_code, tag=tag, defrost_every_hours=defrost_every)
    typer.echo(f"system {site_code}/{tag}: defrost every {defrost_every} h")
