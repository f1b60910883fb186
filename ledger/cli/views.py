"""Human-readable renderings of service views (JSON is in render.print_json)."""

from __future__ import annotations

from decimal import Decimal
from typing import Any

import typer

from ledger.cli.render import LOCAL_RULES_NOTE, table


def num(value: Any, places: int = 2) -> str:
    """A number rounded half-up for display ('' for None)."""
    if value is None:
        return ""
    from ledger.reference import round_half_up

    return str(round_half_up(Decimal(value), places))


def mass_in(kg: Any, unit: str) -> Decimal | None:
    """A mass given in kg, in the display unit (kg or lb)."""
    from ledger.exports.common import in_unit

    return in_unit(kg, unit)


def print_system(view: dict[str, Any]) -> None:
    """A system's state, tiers, obligations, leak rates and events as text tables."""
    status = "in service" if view["in_service"] else f"retired {view['retired_on'] or ''}".strip()
    from ledger.exports.common import TONNES, fmt, gwp_text

    typer.echo(f"{view['site']}/{view['tag']}  {view['description']}".rstrip())
    unit = view["unit"]
    other = "kg" if unit == "lb" else "lb"
    charge = (f"{num(mass_in(view['full_charge_kg'], unit))} {unit} "
              f"({num(mass_in(view['full_charge_kg'], other))} {other})")
    typer.echo(
        f"  {view['refrigerant']} ({view['safety_class']}), full charge {charge}, "
        f"{fmt(view['co2e_t'], TONNES)} t CO2e (GWP {gwp_text(view['gwp'])}, basis {view['gwp_basis']})"
    )
    typer.echo(
        f"  {view['application']}, {status}, detection system: "
        f"{'yes' if view['detection_system'] else 'no'}; as of {view['as_of']}"
    )
    for code, tier in view["tier"].items():
        interval = f"every {tier['interval_months']} months" if tier["interval_months"] else "no periodic check"
        typer.echo(f"  {code}: {tier['band']}, {interval} ({tier['basis']}) {tier['reason']}".rstrip())
    pending = [o for o in view["obligations"] if o["status"] != "met"]
    if pending:
        table(
            ["due", "earliest", "kind", "status", "regime", "basis", "detail"],
            [
                [o["due_on"], o["earliest_on"], o["kind"], o["status"], o["regime"], o["basis"], o["detail"]]
                for o in pending
            ],
            title="Open and overdue obligations",
        )
    if view["leak_rates"]:
        table(
            ["added on", unit, "annualizing %", "rolling %", "threshold %", "exceeded"],
            [
                [
                    r["on"],
                    num(mass_in(r["added_kg"], unit)),
                    num(r["annualizing_percent"]),
                    num(r["rolling_percent"]),
                    num(r["threshold_percent"], 0),
                    "yes" if r["exceeded"] else "",
                ]
                for r in view["leak_rates"]
            ],
            title="Leak rate at each addition",
        )
    table(
        ["id", "on", "kind", unit, "result", "by", "certificate", "note"],
        [
            [
                e["id"],
                e["performed_on"],
                e["kind"] + (f" (voided by {e['voided_by']}: {e['void_reason']})" if e["voided_by"] else ""),
                num(mass_in(e["mass_kg"] if e["mass_kg"] is not None else e["charge_kg"], unit)),
                e["result"] or e["location"] or (f"voids {e['voids']}: {e['reason']}" if e["voids"] else ""),
                e["technician"],
                e["certificate"] or ("none valid: done by an uncertified person" if e.get("uncertified") else ""),
                e["note"],
            ]
            for e in view["events"]
        ],
        title="History",
    )
    for f in view["findings"]:
        typer.echo(f"{f['severity']}: {f['message']}")
    typer.echo(LOCAL_RULES_NOTE)
