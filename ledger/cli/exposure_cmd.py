"""`refledger exposure`: servicing bans and what a retrofit would save."""

from __future__ import annotations

from typing import Annotated

import typer

from ledger.cli import context

CAUTION = ("A retrofit needs the equipment maker's approval and certified personnel; flammable "
           "(A2L/A2/A3) targets carry safety duties (ventilation, detection, charge limits) set "
           "by local codes. Local regulation and the competent authority govern.")


def register(app: typer.Typer) -> None:
    """Add the exposure command to the application."""
    app.command("exposure")(exposure)


def exposure(
    as_of: Annotated[str | None, typer.Option("--as-of", help="Day to evaluate (default: today, UTC).")] = None,
    site: Annotated[str | None, typer.Option("--site", help="Only this site.")] = None,
    json_out: Annotated[bool, typer.Option("--json", help="Print JSON.")] = False,
) -> None:
    """List systems that may no longer be serviced with virgin (or any) refrigerant of their
    kind, from which day, with the charge and t CO2e at stake and what a retrofit saves.

    Example: refledger exposure --as-of 2026-12-01 --site GB-BRS
    """
    from datetime import UTC, datetime

    from ledger.cli.render import print_json, table
    from ledger.exports.common import gwp_text
    from ledger.inputs import parse_day
    from ledger.services.exposure import exposure_view

    day = parse_day(as_of, field="--as-of") if as_of else datetime.now(UTC).date()
    view = exposure_view(context.open_db(), as_of=day, site_code=site)
    if json_out:
        print_json(view)
        return
    if not view["rows"]:
        typer.echo(f"no system is caught by a servicing prohibition as of {day}")
    else:
        table(
            ["system", "regime", "from", "status", "may not use", "refrigerant", "GWP", "charge kg",
             "t CO2e", "retrofit to", "t CO2e saved", "basis"],
            [
                [f"{r['site']}/{r['system']}", r["regime"], r["from_on"],
                 "in force" if r["in_force"] else "coming", _use(r["refrigerant_use"]), r["refrigerant"],
                 gwp_text(r["gwp"]), r["charge_kg"], r["co2e_t"],
                 "" if r["retrofit_to"] is None else f"{r['retrofit_to']} (GWP {gwp_text(r['retrofit_gwp'])})",
                 "" if r["saved_t"] is None else r["saved_t"], f"{r['citation']} [{r['confidence']}]"]
                for r in view["rows"]
            ],
            title=f"Servicing prohibitions as of {day}",
        )
        for regime, t in view["totals"].items():
            typer.echo(f"{regime}: {t['systems']} system(s), {t['charge_kg']} kg, {t['co2e_t']} t CO2e "
                       f"at stake; retrofits named above save {t['saved_t']} t CO2e")
    typer.echo(CAUTION)


def _use(refrigerant_use: str) -> str:
    return {"virgin": "virgin gas", "any": "any gas", "reclaimed only": "non-reclaimed gas"}.get(
        refrigerant_use, refrigerant_use)
