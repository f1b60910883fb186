"""`refledger log KIND SITE/TAG --on DATE ...`: record what was done to a system.

Every subcommand appends one event (events are never edited; `log void` corrects). After
writing, the command prints the event id and any warning, e.g. a lapsed certificate.
"""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING, Annotated, Any

import typer

from ledger.cli import context

if TYPE_CHECKING:
    from ledger.store.db import Database

app = typer.Typer(no_args_is_help=True, help="Record an event on a system (append-only).")

Ref = Annotated[str, typer.Argument(metavar="SITE/TAG", help="The system, as SITE/TAG.")]
On = Annotated[str, typer.Option("--on", help="Day the work was done (site-local), YYYY-MM-DD.")]
Tech = Annotated[str | None, typer.Option("--tech", help="Technician who did the work.")]
Note = Annotated[str, typer.Option("--note", help="Free text.")]
By = Annotated[str | None, typer.Option("--by", help="Who is recording this (default: --tech).")]
Attach = Annotated[
    list[Path] | None,
    typer.Option("--attach", help="Service report file; its SHA-256 is stored (repeatable)."),
]
Mass = Annotated[str | None, typer.Option("--mass", help="Mass, e.g. 2.5kg, 5 lb 8 oz, 850 g.")]
Cylinder = Annotated[str | None, typer.Option("--cylinder", help="Cylinder id.")]
Before = Annotated[str | None, typer.Option("--before", help="Cylinder weight before.")]
After = Annotated[str | None, typer.Option("--after", help="Cylinder weight after.")]
Confirm = Annotated[
    bool,
    typer.Option("--confirm", help="Record it although it looks like a mistake (the command says why it asks)."),
]
Facility = Annotated[
    str | None,
    typer.Option("--facility", help="EU Art 6(c): recycling, reclamation or destruction facility, name and address."),
]
FacilityCert = Annotated[
    str | None, typer.Option("--facility-certificate", help="EU Art 6(c): that facility's certificate number.")
]
# A single addition or recovery above this percentage of the full charge asks for --confirm.
SHARE_ENV = "REFLEDGER_CONFIRM_ABOVE_PERCENT"


def _mass(text: str | None, field: str, *, allow_zero: bool = False) -> int | None:
    from ledger.units import parse_mass_ng

    return parse_mass_ng(text, field=field, allow_zero=allow_zero) if text is not None else None


def _text(value: str | None) -> str | None:
    """Stripped text, or None when nothing was given."""
    return value.strip() or None if value is not None else None


def _charge_share() -> Any:
    import os
    from decimal import Decimal, InvalidOperation

    from ledger.domain.drafts import DEFAULT_CHARGE_SHARE
    from ledger.errors import InputError

    text = os.environ.get(SHARE_ENV, "").strip()
    if not text:
        return DEFAULT_CHARGE_SHARE
    try:
        percent = Decimal(text)
    except InvalidOperation:
        percent = Decimal(-1)
    if not percent.is_finite() or percent <= 0:
        raise InputError(SHARE_ENV, text, "must be a positive percentage such as 100")
    return percent / 100


def _log(
    kind: str,
    ref: str,
    on: str,
    tech: str | None,
    note: str,
    by: str | None,
    attach: list[Path] | None,
    *,
    confirm: bool = False,
    **fields: Any,
) -> None:
    from ledger.cli.render import warn
    from ledger.domain.drafts import EventDraft
    from ledger.domain.records import EventKind
    from ledger.inputs import parse_day, parse_system_ref
    from ledger.services.recording import attachment_digest, log_event

    site_code, tag = parse_system_ref(ref)
    draft = EventDraft(
        kind=EventKind(kind),
        performed_on=parse_day(on),
        technician=tech,
        recorded_by=by or tech,
        note=note,
        attachments=tuple(attachment_digest(p) for p in attach or ()),
        **fields,
    )
    db = context.open_db()  # one engine (and connection) for the write and the look ahead
    logged = log_event(db, site_code=site_code, tag=tag, draft=draft, confirm=confirm, charge_share=_charge_share())
    for w in logged.warnings:
        warn(w.message)
    typer.echo(f"event {logged.event_id} recorded: {kind} on {site_code}/{tag} {draft.performed_on}{_stored(logged)}")
    if logged.leak_rate is not None:
        typer.echo(f"  leak rate: {_rate_line(logged.leak_rate)}")
    _print_next(db, site_code, tag)


def _stored(logged: Any) -> str:
    """The stored mass in the site's unit, as the ledger now holds it."""
    from ledger.units import format_mass

    if logged.mass_ng is None:
        return ""
    # to the mg (kg) or 1e-6 lb, trailing zeros dropped down to two decimals: 2.494758 kg,
    # 10.00 lb, 0.0005 kg
    number, unit = format_mass(logged.mass_ng, logged.unit, places=6).split()
    whole, _, decimals = number.partition(".")
    return f": {whole}.{decimals.rstrip('0').ljust(2, '0')} {unit} stored"


def _rate_line(rate: dict[str, Any]) -> str:
    """One line on the leak rate at this addition (US sites)."""
    if not rate["counted"] or rate["percent"] is None:
        return f"not counted ({rate['note'] or 'initial charge'})"
    verdict = "exceeds" if rate["exceeded"] else "does not exceed"
    return (
        f"{rate['percent']:.2f} % ({rate['method']}), {verdict} the {rate['threshold_percent']:g} % threshold "
        "(40 CFR 82.157(c)(2))"
    )


def _print_next(db: Database, site_code: str, tag: str) -> None:
    """Show what the ledger now expects next of the system (the technician's question)."""
    from ledger.services.queries import next_due

    for line in next_due(db, site_code=site_code, tag=tag):
        typer.echo(f"  next: {line}")


@app.command("add")
def add(
    ref: Ref,
    on: On,
    mass: Mass = None,
    cylinder: Cylinder = None,
    before: Before = None,
    after: After = None,
    refrigerant: Annotated[str | None, typer.Option("--refrigerant", help="Assert the gas added.")] = None,
    reclaimed: Annotated[bool, typer.Option("--reclaimed", help="Recycled or reclaimed gas.")] = False,
    facility: Facility = None,
    facility_certificate: FacilityCert = None,
    tech: Tech = None,
    note: Note = "",
    by: By = None,
    attach: Attach = None,
    confirm: Confirm = False,
) -> None:
    """Refrigerant added: by --mass, or by cylinder weights --before/--after.

    Example: refledger log add DE-HAM/RACK-1 --on 2025-03-14 --mass 2.5kg --tech "Ada Novak"
    """
    _log(
        "add",
        ref,
        on,
        tech,
        note,
        by,
        attach,
        confirm=confirm,
        facility=_text(facility),
        facility_certificate=_text(facility_certificate),
        mass_ng=_mass(mass, "--mass"),
        cylinder_code=cylinder,
        cylinder_before_ng=_mass(before, "--before"),
        cylinder_after_ng=_mass(after, "--after"),
        refrigerant=refrigerant,
        reclaimed=reclaimed,
    )


@app.command("recover")
def recover(
    ref: Ref,
    on: On,
    mass: Mass = None,
    cylinder: Cylinder = None,
    before: Before = None,
    after: After = None,
    destination: Annotated[
        str | None, typer.Option("--destination", help="reuse, reclaim, destruction, returned, unknown.")
    ] = None,
    facility: Facility = None,
    facility_certificate: FacilityCert = None,
    tech: Tech = None,
    note: Note = "",
    by: By = None,
    attach: Attach = None,
    confirm: Confirm = False,
) -> None:
    """Refrigerant recovered from a system that stays in service.

    Example: refledger log recover DE-HAM/RACK-1 --on 2025-03-14 --mass 4kg --destination reclaim
    """
    _log(
        "recover",
        ref,
        on,
        tech,
        note,
        by,
        attach,
        confirm=confirm,
        facility=_text(facility),
        facility_certificate=_text(facility_certificate),
        mass_ng=_mass(mass, "--mass"),
        cylinder_code=cylinder,
        cylinder_before_ng=_mass(before, "--before"),
        cylinder_after_ng=_mass(after, "--after"),
        destination=destination,
    )


@app.command("check")
def check(
    ref: Ref,
    on: On,
    result: Annotated[str, typer.Option("--result", help="no-leak or leak-found.")],
    where: Annotated[str | None, typer.Option("--where", help="Where the leak is.")] = None,
    method: Annotated[str | None, typer.Option("--method", help="How it was checked.")] = None,
    tech: Tech = None,
    note: Note = "",
    by: By = None,
    attach: Attach = None,
    confirm: Confirm = False,
) -> None:
    """Leak check and its result.

    Example: refledger log check DE-HAM/RACK-1 --on 2025-03-14 --result leak-found --where "LT suction header"
    """
    _log("check", ref, on, tech, note, by, attach, confirm=confirm, result=result, location=where, method=method)


@app.command("repair")
def repair(
    ref: Ref,
    on: On,
    where: Annotated[str | None, typer.Option("--where", help="What was repaired.")] = None,
    tech: Tech = None,
    note: Note = "",
    by: By = None,
    attach: Attach = None,
    confirm: Confirm = False,
) -> None:
    """Leak repaired.

    Example: refledger log repair DE-HAM/RACK-1 --on 2025-03-15 --where "flare nut re-made"
    """
    _log("repair", ref, on, tech, note, by, attach, confirm=confirm, location=where)


@app.command("follow-up")
def follow_up(
    ref: Ref,
    on: On,
    result: Annotated[str, typer.Option("--result", help="pass or fail.")],
    method: Annotated[str | None, typer.Option("--method", help="How it was checked.")] = None,
    tech: Tech = None,
    note: Note = "",
    by: By = None,
    attach: Attach = None,
    confirm: Confirm = False,
) -> None:
    """Follow-up check (or verification test) after a repair.

    Example: refledger log follow-up DE-HAM/RACK-1 --on 2025-03-20 --result pass
    """
    _log("follow-up", ref, on, tech, note, by, attach, confirm=confirm, result=result, method=method)


@app.command("detection-on")
def detection_on(
    ref: Ref, on: On, tech: Tech = None, note: Note = "", by: By = None, attach: Attach = None,
    confirm: Confirm = False,
) -> None:
    """Leak detection system installed.

    Example: refledger log detection-on DE-HAM/RACK-1 --on 2025-01-10
    """
    _log("detection-on", ref, on, tech, note, by, attach, confirm=confirm)


@app.command("detection-off")
def detection_off(
    ref: Ref, on: On, tech: Tech = None, note: Note = "", by: By = None, attach: Attach = None,
    confirm: Confirm = False,
) -> None:
    """Leak detection system removed or out of use.

    Example: refledger log detection-off DE-HAM/RACK-1 --on 2025-01-10
    """
    _log("detection-off", ref, on, tech, note, by, attach, confirm=confirm)


@app.command("detection-check")
def detection_check(
    ref: Ref, on: On, tech: Tech = None, note: Note = "", by: By = None, attach: Attach = None,
    confirm: Confirm = False,
) -> None:
    """Leak detection system checked.

    Example: refledger log detection-check DE-HAM/RACK-1 --on 2025-06-01
    """
    _log("detection-check", ref, on, tech, note, by, attach, confirm=confirm)


@app.command("charge")
def charge(
    ref: Ref,
    on: On,
    charge_: Annotated[str, typer.Option("--charge", help="The revised full charge.")],
    tech: Tech = None,
    note: Note = "",
    by: By = None,
    attach: Attach = None,
    confirm: Confirm = False,
) -> None:
    """Full charge revised (re-determined by measurement, calculation or maker's data).

    Example: refledger log charge DE-HAM/RACK-1 --on 2025-02-01 --charge 310kg --note "by calculation"
    """
    _log("charge-revised", ref, on, tech, note, by, attach, confirm=confirm, charge_ng=_mass(charge_, "--charge"))


@app.command("retrofit")
def retrofit(
    ref: Ref,
    on: On,
    refrigerant: Annotated[str, typer.Option("--refrigerant", help="The new refrigerant.")],
    charge_: Annotated[str, typer.Option("--charge", help="The new full charge.")],
    tech: Tech = None,
    note: Note = "",
    by: By = None,
    attach: Attach = None,
    confirm: Confirm = False,
) -> None:
    """Retrofit to another refrigerant and charge.

    Example: refledger log retrofit DE-HAM/RACK-1 --on 2025-05-01 --refrigerant R-448A --charge 280kg
    """
    _log(
        "retrofit", ref, on, tech, note, by, attach,
        confirm=confirm, refrigerant=refrigerant, charge_ng=_mass(charge_, "--charge"),
    )


@app.command("retire")
def retire(
    ref: Ref,
    on: On,
    recovered: Annotated[str, typer.Option("--recovered", help="Mass recovered (0 kg allowed).")],
    destination: Annotated[
        str | None, typer.Option("--destination", help="reuse, reclaim, destruction, returned, unknown.")
    ] = None,
    cylinder: Cylinder = None,
    facility: Facility = None,
    facility_certificate: FacilityCert = None,
    tech: Tech = None,
    note: Note = "",
    by: By = None,
    attach: Attach = None,
    confirm: Confirm = False,
) -> None:
    """Taken out of service, with the refrigerant recovered and where it went.

    Example: refledger log retire DE-HAM/CAB-7 --on 2025-09-30 --recovered 1.2kg --destination reclaim
    """
    _log(
        "retire",
        ref,
        on,
        tech,
        note,
        by,
        attach,
        confirm=confirm,
        facility=_text(facility),
        facility_certificate=_text(facility_certificate),
        mass_ng=_mass(recovered, "--recovered", allow_zero=True),
        destination=destination,
        cylinder_code=cylinder,
    )


@app.command("void")
def void(
    ref: Ref,
    event_id: Annotated[int, typer.Argument(metavar="EVENT", help="Id of the event to void (of that system).")],
    reason: Annotated[str, typer.Option("--reason", help="Why it is wrong.")],
    by: Annotated[str | None, typer.Option("--by", help="Who is voiding it (required).")] = None,
    yes: Annotated[bool, typer.Option("--yes", help="Void without asking (needed when not at a terminal).")] = False,
    json_out: Annotated[bool, typer.Option("--json", help="Print the voided event and the void as JSON.")] = False,
) -> None:
    """Void an earlier event of SITE/TAG; it stays in the ledger, marked, with the reason.

    Shows the event and asks before voiding it (or give --yes). Record the corrected event
    afterwards with the matching `log` command.

    Example: refledger log void DE-HAM/RACK-1 1042 --reason "mass typed in lb, was kg" --by "Greta Lind"
    """
    import sys

    from ledger.cli.render import dumps, fail
    from ledger.inputs import parse_system_ref
    from ledger.services.recording import void_event, void_preview

    site_code, tag = parse_system_ref(ref)
    if not (by or "").strip():
        raise fail("--by: is required: who is voiding the event")
    db = context.open_db()
    target = void_preview(db, event_id=event_id, site_code=site_code, tag=tag)
    shown = _event_line(target)
    if not yes:
        if json_out or not sys.stdin.isatty():
            raise fail(f"log void: event {event_id} ({shown}) was not voided: add --yes to void it without asking")
        typer.echo(f"event {event_id} on {target['system']}: {shown}")
        if not typer.confirm("Void this event?", default=False):
            raise fail(f"log void: event {event_id} was not voided (declined)")
    logged = void_event(db, event_id=event_id, reason=reason, recorded_by=by, site_code=site_code, tag=tag)
    if json_out:
        typer.echo(dumps({"void_event_id": logged.event_id, "chain_hash": logged.chain_hash, "voided": target}))
        return
    where = f"{logged.site_code}/{logged.tag}"
    typer.echo(f"event {logged.event_id} recorded: void of event {event_id} ({shown}) on {where}")


def _event_line(e: dict[str, Any]) -> str:
    """One line describing an event: day, kind, mass in the site's unit, who."""
    from decimal import Decimal

    from ledger.units import NG_PER_KG, format_mass

    parts = [str(e["performed_on"]), e["kind"]]
    for key in ("mass_kg", "charge_kg"):
        if e.get(key) is not None:
            ng = int(Decimal(e[key]) * NG_PER_KG)
            parts.append(format_mass(ng, e["unit"], places=2 if ng >= 10 * 10**9 else 4))
    for key in ("result", "destination"):
        if e.get(key):
            parts.append(str(e[key]))
    if e.get("technician"):
        parts.append(f"by {e['technician']}")
    return " ".join(parts)
