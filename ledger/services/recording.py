"""Recording use cases: sites, systems, people, cylinders and events.

Each function validates everything first and then writes in one transaction, so a
rejected command leaves no trace.
"""

from __future__ import annotations

import hashlib
from collections.abc import Sequence
from dataclasses import dataclass, field, replace
from datetime import date, datetime
from decimal import Decimal
from pathlib import Path
from typing import Any
from zoneinfo import ZoneInfo, ZoneInfoNotFoundError

from ledger.domain.certificates import WorkFacts
from ledger.domain.drafts import (
    DEFAULT_CHARGE_SHARE,
    EventDraft,
    confirmation_reasons,
    cylinder_mass_ng,
    validate_event,
)
from ledger.domain.records import (
    Application,
    Certificate,
    CylinderKind,
    EquipmentForm,
    Event,
    EventKind,
    Finding,
    Severity,
    Site,
    System,
    SystemState,
)
from ledger.domain.state import state_of
from ledger.errors import Conflict, InputError, LedgerError, NeedsConfirmation, Rejected
from ledger.reference import load_reference
from ledger.services import places
from ledger.store import repository as repo
from ledger.store.db import Database


@dataclass(frozen=True, slots=True)
class Logged:
    """What a write produced: the new event, its chain hash and any warnings."""

    event_id: int
    chain_hash: str
    warnings: tuple[Finding, ...] = field(default=())
    site_code: str = ""
    tag: str = ""
    mass_ng: int | None = None  # the mass stored with the event (resolved from cylinder weights)
    unit: str = "kg"  # the site's display unit
    leak_rate: dict[str, Any] | None = None  # US sites, additions: the rate at this addition


def site_today(timezone: str) -> date:
    """Today's date at the site (events cannot be dated after it)."""
    return datetime.now(ZoneInfo(timezone)).date()


def _raise_first_error(findings: Sequence[Finding]) -> None:
    for f in findings:
        if f.severity is Severity.ERROR:
            raise Rejected(f.message)


def _enum(enum_type, value: str, fld: str):
    try:
        return enum_type(value)
    except ValueError:
        allowed = ", ".join(m.value for m in enum_type)
        raise InputError(fld, value, f"is not one of {allowed}") from None


# ---- sites and systems --------------------------------------------------------------------


def site_values(
    *,
    code: str,
    name: str,
    country: str,
    subdivision: str | None = None,
    timezone: str | None = None,
    regimes: Sequence[str] = (),
    leak_rate_method: str | None = None,
    mass_unit: str | None = None,
) -> dict[str, object]:
    """Check a site's fields and return its column values; regimes default from the country.

    Raises:
        InputError: naming the field and value that is wrong.
    """
    from ledger.inputs import parse_code
    from ledger.rules import REGIMES, default_regimes, site_profile

    code = parse_code(code, field="CODE")
    if not name.strip():
        raise InputError("--name", name, "must not be empty")
    country = country.strip().upper()
    if country == "UK":
        country = "GB"
    if country not in places.countries():
        raise InputError("--country", country, "is not an ISO 3166-1 alpha-2 country code")
    if subdivision is not None:
        subdivision = subdivision.strip().upper()
        if not subdivision.startswith(country + "-") or len(subdivision) < len(country) + 2:
            raise InputError("--subdivision", subdivision, f"must look like {country}-XX")
    zone = timezone or places.default_timezone(country, subdivision)
    try:
        ZoneInfo(zone)
    except (ZoneInfoNotFoundError, ValueError):
        raise InputError("--timezone", zone, "is not an IANA time zone (e.g. Europe/Berlin)") from None
    chosen = tuple(regimes) or default_regimes(country, subdivision)
    for code_ in chosen:
        if code_ not in REGIMES:
            raise InputError("--regime", code_, f"is not one of {', '.join(REGIMES)}")
    method = leak_rate_method or "annualizing"
    if method not in ("annualizing", "rolling"):
        raise InputError("--leak-rate-method", method, "is not one of annualizing, rolling")
    unit = mass_unit or site_profile(chosen).mass_unit
    if unit not in ("kg", "lb"):
        raise InputError("--unit", unit, "is not one of kg, lb")
    return {
        "code": code,
        "name": name.strip(),
        "country": country,
        "subdivision": subdivision,
        "timezone": zone,
        "regimes": ",".join(chosen),
        "leak_rate_method": method,
        "mass_unit": unit,
    }


def add_site(db: Database, **fields: Any) -> Site:
    """Add a site (fields as ``site_values``); a duplicate code is a Conflict."""
    values = site_values(**fields)
    with db.write() as conn:
        repo.insert_site(conn=conn, values=values)
        return repo.get_site(str(values["code"]), conn=conn)


def add_system(
    db: Database,
    *,
    site_code: str,
    tag: str,
    refrigerant: str,
    charge_ng: int,
    application: str,
    in_service_on: date,
    hermetic: bool = False,
    residential: bool = False,
    detection_system: bool = False,
    equipment_form: str = "other",
    description: str = "",
    location: str = "",
    maker: str = "",
    model: str = "",
    serial: str = "",
    technician: str | None = None,
    recorded_by: str | None = None,
    note: str = "",
) -> Logged:
    """Add a system and its placed-in-service event (plus detection-on when it has one)."""
    ref = load_reference().lookup(refrigerant)
    app = _enum(Application, application, "--application")
    form = _enum(EquipmentForm, equipment_form, "--form")
    with db.write() as conn:
        the_site = repo.get_site(site_code, conn=conn)
        today = site_today(the_site.timezone)
        if in_service_on > today:
            raise InputError("--in-service", in_service_on.isoformat(), f"is in the future (today is {today})")
        from ledger.rules import site_profile

        facts = WorkFacts(EventKind.IN_SERVICE, in_service_on, the_site.regimes, charge_ng, hermetic, ref.designation,
                          site_profile(the_site.regimes).certificate_scopes)
        tech_id, cert_id, warnings = _technician_for(technician, facts, conn=conn)
        system_id = repo.insert_system(
            conn=conn,
            site_id=the_site.id,
            values={
                "tag": tag,
                "description": description,
                "application": app.value,
                "equipment_form": form.value,
                "hermetic": hermetic,
                "residential": residential,
                "location": location,
                "maker": maker,
                "model": model,
                "serial": serial,
            },
        )
        common = {
            "system_id": system_id,
            "performed_on": in_service_on,
            "technician_id": tech_id,
            "certificate_id": cert_id,
            "recorded_by": recorded_by,
        }
        event_id, head = repo.append_event(
            conn=conn,
            values={
                **common,
                "kind": EventKind.IN_SERVICE.value,
                "refrigerant": ref.designation,
                "charge_ng": charge_ng,
                "note": note,
            },
        )
        if detection_system:
            event_id, head = repo.append_event(conn=conn, values={**common, "kind": EventKind.DETECTION_ON.value})
    return Logged(event_id, head, tuple(warnings), site_code, tag)


def set_system(db: Database, *, site_code: str, tag: str, defrost_every_hours: float | None) -> System:
    """Record static facts about a system that are not events (e.g. its defrost interval)."""
    from sqlalchemy import update

    from ledger.store.records import seal
    from ledger.store.tables import system as system_table

    if defrost_every_hours is not None and not (0 < defrost_every_hours <= 24 * 7):
        raise InputError("--defrost-every", defrost_every_hours, "must be between 0 and 168 hours")
    with db.write() as conn:
        _, sys_ = repo.get_system(site_code, tag, conn=conn)
        conn.execute(
            update(system_table).where(system_table.c.id == sys_.id).values(defrost_every_hours=defrost_every_hours)
        )
        seal("system", [sys_.id], conn=conn)
        return replace(sys_, defrost_every_hours=defrost_every_hours)


# ---- people and cylinders -----------------------------------------------------------------


def certificate_of(
    *,
    number: str,
    scheme: str,
    scope: str = "",
    category: str = "",
    valid_from: date | None = None,
    valid_to: date | None = None,
    issuer: str = "",
) -> Certificate:
    """Check a personal certificate's fields; the category must be one the scope issues.

    Raises:
        InputError: naming the field and value that is wrong.
    """
    from ledger.domain.certificates import CATEGORIES, Scope, normal_category

    if not number.strip():
        raise InputError("--certificate", number, "must not be empty")
    if valid_from and valid_to and valid_to < valid_from:
        raise InputError("--valid-to", valid_to.isoformat(), "is before --valid-from")
    scope = scope.strip().lower()
    if scope:
        if scope not in {s.value for s in Scope}:
            raise InputError("--scope", scope, f"is not one of {', '.join(s.value for s in Scope)}")
        known = normal_category(scope, category)
        if known is None:
            raise InputError("--category", category, f"is not one of {', '.join(CATEGORIES[Scope(scope)])} "
                             f"for a {scope} certificate")
        category = known
    return Certificate(scheme.strip(), number.strip(), category.strip(), valid_from, valid_to, scope, issuer.strip())


def add_technician(
    db: Database, *, name: str, certificate: str, company: str | None = None, **fields: Any
) -> None:
    """Add a technician with one certificate (``certificate`` is its number; other fields as
    ``certificate_of``)."""
    if not name.strip():
        raise InputError("NAME", name, "must not be empty")
    cert = certificate_of(number=certificate, **fields)
    with db.write() as conn:
        repo.insert_technician(conn=conn, name=name.strip(), company_name=company, certificates=[cert])


def add_certificate(db: Database, *, name: str, certificate: str, **fields: Any) -> Certificate:
    """Add a certificate (a renewal, another category) to a technician already in the ledger."""
    cert = certificate_of(number=certificate, **fields)
    with db.write() as conn:
        tech, _ = repo.get_technician(name.strip(), conn=conn)
        repo.add_certificate(conn=conn, technician_id=tech.id, cert=cert)
    return cert


def add_company_certificate(
    db: Database,
    *,
    company: str,
    number: str,
    scope: str,
    issuer: str = "",
    valid_from: date | None = None,
    valid_to: date | None = None,
) -> None:
    """Record a company (undertaking) certificate; the company is added on first mention."""
    from ledger.domain.certificates import Scope
    from ledger.domain.records import CompanyCertificate

    if not company.strip():
        raise InputError("COMPANY", company, "must not be empty")
    cert = certificate_of(number=number, scheme="", valid_from=valid_from, valid_to=valid_to)
    scope = scope.strip().lower()
    if scope not in {s.value for s in Scope}:
        raise InputError("--scope", scope, f"is not one of {', '.join(s.value for s in Scope)}")
    with db.write() as conn:
        repo.add_company_certificate(conn=conn, cert=CompanyCertificate(
            company.strip(), scope, cert.number, issuer.strip(), cert.valid_from, cert.valid_to))


def add_cylinder(db: Database, *, code: str, refrigerant: str, kind: str, tare_ng: int | None) -> None:
    """Add a refrigerant cylinder."""
    ref = load_reference().lookup(refrigerant)
    the_kind = _enum(CylinderKind, kind, "--kind")
    with db.write() as conn:
        repo.insert_cylinder(
            conn=conn,
            values={"code": code, "refrigerant": ref.designation, "kind": the_kind.value, "tare_ng": tare_ng},
        )


# ---- events -------------------------------------------------------------------------------


def attachment_digest(path: Path) -> str:
    """SHA-256 of a service report file, so the logbook can prove which document it was."""
    try:
        return hashlib.sha256(path.read_bytes()).hexdigest()
    except OSError as exc:
        raise InputError("--attach", str(path), f"cannot be read ({exc.strerror})") from None


def _technician_for(name: str | None, facts: WorkFacts, *, conn) -> tuple[int | None, int | None, list[Finding]]:
    """The technician's row id, the id of the certificate that covers the work, and warnings."""
    from ledger.domain.certificates import certificate_findings, certificate_for

    if not name:
        return None, None, []
    tech, cert_ids = repo.get_technician(name, conn=conn)
    cert, _ = certificate_for(tech, facts)
    return tech.id, (cert_ids[cert.number] if cert else None), certificate_findings(tech, facts)


def _prepared(draft: EventDraft, reference: Any) -> EventDraft:
    """The draft with its mass worked out (``--mass`` or cylinder weights) and its gas named."""
    mass_ng, weight_findings = cylinder_mass_ng(draft)
    _raise_first_error(weight_findings)
    draft = replace(draft, mass_ng=mass_ng)
    if draft.kind in (EventKind.RETROFIT,) and draft.refrigerant:
        draft = replace(draft, refrigerant=reference.lookup(draft.refrigerant).designation)
    return draft


def _append_checked(conn, the_site: Site, sys_: System, draft: EventDraft, reference: Any, *,
                    confirm: bool, charge_share: Decimal = DEFAULT_CHARGE_SHARE) -> tuple[int, str, list[Finding]]:
    """Check one prepared draft against the system's state inside the caller's transaction and
    append it: the one step every event-recording use case goes through.

    Raises:
        Rejected: the first error finding (the caller's transaction rolls back).
        NeedsConfirmation: the draft looks like a mistake and ``confirm`` is False.
    """
    events = repo.load_events([sys_.id], conn=conn).get(sys_.id, ())
    state = state_of(events, draft.performed_on)
    cylinder = cyl_id = None
    cylinder_matches = None
    if draft.cylinder_code:
        cyl_id, cylinder = repo.get_cylinder(draft.cylinder_code, conn=conn)
        cylinder_matches = cylinder.refrigerant == state.refrigerant
    same = None
    if draft.refrigerant and draft.kind in (EventKind.ADD, EventKind.RECOVER):
        same = reference.lookup(draft.refrigerant).designation == state.refrigerant
    tech = None
    if draft.technician:
        tech, _ = repo.get_technician(draft.technician, conn=conn)
    facts = work_facts(draft, state, the_site, sys_)
    findings = validate_event(
        draft,
        state,
        today=site_today(the_site.timezone),
        same_refrigerant=same,
        cylinder=cylinder,
        cylinder_matches=cylinder_matches,
        technician=tech,
        placed_on=placed_on(events),
        work=facts,
    )
    _raise_first_error(findings)
    if not confirm:
        reasons = confirmation_reasons(draft, events, sys_, unit=the_site.mass_unit, charge_share=charge_share)
        if reasons:
            raise NeedsConfirmation(reasons)
    tech_id, cert_id, _ = _technician_for(draft.technician, facts, conn=conn)
    reclaimed = draft.reclaimed or (cylinder is not None and cylinder.kind is CylinderKind.RECLAIMED)
    values = {
        "system_id": sys_.id,
        "kind": draft.kind.value,
        "performed_on": draft.performed_on,
        "mass_ng": draft.mass_ng,
        "refrigerant": draft.refrigerant if draft.kind is EventKind.RETROFIT else None,
        "charge_ng": draft.charge_ng,
        "result": draft.result,
        "location": draft.location,
        "method": draft.method,
        "destination": draft.destination,
        "cylinder_id": cyl_id,
        "cylinder_before_ng": draft.cylinder_before_ng,
        "cylinder_after_ng": draft.cylinder_after_ng,
        "technician_id": tech_id,
        "certificate_id": cert_id,
        "recorded_by": draft.recorded_by,
        "note": draft.note,
        "attachments": " ".join(draft.attachments),
        "reclaimed": reclaimed,
        "facility": draft.facility,
        "facility_certificate": draft.facility_certificate,
    }
    findings = [*findings, *servicing_warnings(reference, the_site, sys_, state, draft.kind,
                                               draft.performed_on, reclaimed)]
    event_id, head = repo.append_event(conn=conn, values=values)
    return event_id, head, findings


def _warnings(findings: Sequence[Finding]) -> tuple[Finding, ...]:
    return tuple(f for f in findings if f.severity is Severity.WARNING)


def log_event(
    db: Database,
    *,
    site_code: str,
    tag: str,
    draft: EventDraft,
    confirm: bool = False,
    charge_share: Decimal = DEFAULT_CHARGE_SHARE,
) -> Logged:
    """Validate an event against the system's state and append it.

    Args:
        confirm: record it even when ``confirmation_reasons`` has doubts about it.
        charge_share: a single addition or recovery above this share of the full charge asks
            for confirmation (1 = 100 %).
    Raises:
        InputError: the first error finding; nothing is written.
        NeedsConfirmation: doubts and ``confirm`` is False; nothing is written.
        NotFound: unknown site, system, technician or cylinder.
    """
    reference = load_reference()
    draft = _prepared(draft, reference)
    with db.write() as conn:
        the_site, sys_ = repo.get_system(site_code, tag, conn=conn)
        event_id, head, findings = _append_checked(conn, the_site, sys_, draft, reference, confirm=confirm,
                                                   charge_share=charge_share)
        rate = _leak_rate_at(conn, the_site, sys_, draft, event_id)
    return Logged(event_id, head, _warnings(findings), site_code, tag, draft.mass_ng, the_site.mass_unit, rate)


def record_visit(
    db: Database, *, site_code: str, tag: str, drafts: Sequence[EventDraft], confirm: bool = False,
    charge_share: Decimal = DEFAULT_CHARGE_SHARE,
) -> tuple[Logged, ...]:
    """Record one visit to a system (e.g. leak check, repair, top-up, follow-up) as one unit.

    The drafts are checked and appended in the order given, each against the state the earlier
    ones left, all in one transaction: an error in any of them writes none.

    Raises:
        Rejected / InputError: the first error finding; nothing is written.
        NotFound: unknown site, system, technician or cylinder.
        NeedsConfirmation: one of the drafts looks like a duplicate and ``confirm`` is False.
    Each error carries ``visit_part``: the kind of the draft it is about.
    """
    if not drafts:
        raise InputError("visit", "", "records nothing: fill in at least one part of the visit")
    reference = load_reference()
    prepared = []
    for d in drafts:
        try:
            prepared.append(_prepared(d, reference))
        except LedgerError as exc:
            exc.visit_part = d.kind  # type: ignore[attr-defined]  # read back by the web form, on this one error
            raise
    logged: list[Logged] = []
    with db.write() as conn:
        the_site, sys_ = repo.get_system(site_code, tag, conn=conn)
        for draft in prepared:
            try:
                event_id, head, findings = _append_checked(conn, the_site, sys_, draft, reference,
                                                           confirm=confirm, charge_share=charge_share)
            except LedgerError as exc:
                exc.visit_part = draft.kind  # type: ignore[attr-defined]  # which part, for the form
                raise
            rate = _leak_rate_at(conn, the_site, sys_, draft, event_id)
            logged.append(Logged(event_id, head, _warnings(findings), site_code, tag, draft.mass_ng,
                                 the_site.mass_unit, rate))
    return tuple(logged)


def servicing_warnings(reference: Any, site: Site, system: System, state: SystemState, kind: EventKind,
                       on: date, reclaimed: bool) -> list[Finding]:
    """Warnings for a top-up that a servicing prohibition of the site's regimes forbids.

    The event is recorded all the same (the ledger records what was done); the warning shows
    on the command line, in the logbook and in the annual summary.
    """
    if kind is not EventKind.ADD:
        return []
    from ledger.reference.servicing import load_servicing
    from ledger.rules.servicing import top_up_findings

    probe = Event(id=0, system_id=system.id, kind=kind, performed_on=on, reclaimed=reclaimed)
    return top_up_findings(system, site.regimes, state, probe, reference, load_servicing(),
                           f"{site.code}/{system.tag} {on.isoformat()}")


def work_facts(draft: EventDraft, state: SystemState, site: Site, system: System) -> WorkFacts:
    """What a certificate is judged against for this draft on this system (see domain.certificates)."""
    charge = draft.charge_ng if draft.kind is EventKind.IN_SERVICE and draft.charge_ng else state.full_charge_ng
    from ledger.rules import site_profile

    return WorkFacts(draft.kind, draft.performed_on, site.regimes, charge or 0, system.hermetic, state.refrigerant,
                     site_profile(site.regimes).certificate_scopes)


def _leak_rate_at(conn, site: Site, sys_: System, draft: EventDraft, event_id: int) -> dict[str, Any] | None:
    """Additions at a site whose regimes judge leak rates (US): the leak rate at the addition
    just appended (shown after saving)."""
    from ledger.rules import site_profile

    if not site_profile(site.regimes).leak_rates or draft.kind is not EventKind.ADD:
        return None
    from ledger.domain.leak_rate import leak_rates_json

    history = repo.load_histories(conn=conn, system_id=sys_.id)[0]
    return next((r for r in leak_rates_json(history, date.max) if r["event_id"] == event_id), None)


def placed_on(events: Sequence[Event]) -> date | None:
    """The day a system was placed in service, from its whole history."""
    return min((e.performed_on for e in events if e.kind is EventKind.IN_SERVICE), default=None)


def _void_target(event_id: int, site_code: str | None, tag: str | None, *, conn) -> tuple[int, str, Event]:
    """The event to void, checked: it exists, belongs to SITE/TAG (when named) and may be voided."""
    system_id, kind, ref = repo.event_system(event_id, conn=conn)
    if site_code is not None and ref != f"{site_code}/{tag}":
        raise Conflict(f"event: {event_id} belongs to {ref}, not to {site_code}/{tag}; nothing was voided")
    events = repo.load_events([system_id], conn=conn)[system_id]
    if kind == EventKind.VOID.value:
        raise Conflict(f"event: {event_id} is itself a void; void cannot be voided")
    if kind == EventKind.IN_SERVICE.value:
        raise Conflict(f"event: {event_id} places the system in service and cannot be voided")
    if any(e.voids_id == event_id for e in events):
        raise Conflict(f"event: {event_id} is already voided")
    return system_id, ref, next(e for e in events if e.id == event_id)


def void_preview(db: Database, *, event_id: int, site_code: str, tag: str) -> dict[str, Any]:
    """The event ``void_event`` would void, as plain data to show before asking (read only).

    Raises:
        NotFound: unknown event; Conflict: another system's event, or one that cannot be voided.
    """
    from ledger.services.rows import event_json

    with db.read() as conn:
        the_site, _ = repo.get_system(site_code, tag, conn=conn)
        _, ref, target = _void_target(event_id, site_code, tag, conn=conn)
    return {"system": ref, "unit": the_site.mass_unit, **event_json(target, {})}


def void_event(
    db: Database,
    *,
    event_id: int,
    reason: str,
    recorded_by: str | None = None,
    site_code: str | None = None,
    tag: str | None = None,
) -> Logged:
    """Void an earlier event (it stays in the ledger, marked, with the reason).

    Args:
        site_code, tag: the system the event must belong to (the CLI always names it).
        recorded_by: who voids it; required.
    Raises:
        InputError: no reason or no one recording it; Conflict: the event is another system's
            or cannot be voided; NotFound: unknown event. Nothing is written.
    """
    if not reason.strip():
        raise InputError("--reason", reason, "must say why the event is voided")
    if not (recorded_by or "").strip():
        raise InputError("--by", recorded_by or "", "is required: who is voiding the event")
    with db.write() as conn:
        if site_code is not None:
            repo.get_system(site_code, tag or "", conn=conn)  # an unknown system says so first
        system_id, ref, target = _void_target(event_id, site_code, tag, conn=conn)
        new_id, head = repo.append_event(
            conn=conn,
            values={
                "system_id": system_id,
                "kind": EventKind.VOID.value,
                "performed_on": target.performed_on,
                "voids_id": event_id,
                "reason": reason.strip(),
                "recorded_by": (recorded_by or "").strip(),
            },
        )
    site_part, _, tag_part = ref.partition("/")
    return Logged(new_id, head, (), site_part, tag_part)


def record_filing(
    db: Database,
    *,
    site_code: str,
    regime: str,
    period_year: int,
    filed_on: date,
    tag: str | None = None,
    reference: str = "",
    recorded_by: str | None = None,
) -> None:
    """Record that a report was filed with an authority (it meets the matching report duty)."""
    from ledger.rules import REGIMES

    if regime not in REGIMES:
        raise InputError("--regime", regime, f"is not one of {', '.join(REGIMES)}")
    if not 1990 <= period_year <= filed_on.year:
        raise InputError("--year", period_year, f"must be a year up to the filing's ({filed_on.year})")
    with db.write() as conn:
        site = repo.get_site(site_code, conn=conn)
        if regime not in site.regimes:
            raise InputError("--regime", regime, f"does not apply to site {site_code} ({', '.join(site.regimes)})")
        today = site_today(site.timezone)
        if filed_on > today:
            raise InputError("--on", filed_on.isoformat(), f"is in the future (today is {today})")
        system_id = repo.get_system(site_code, tag, conn=conn)[1].id if tag else None
        repo.insert_filing(conn=conn, site_id=site.id, values={
            "system_id": system_id, "regime": regime, "period_year": period_year, "filed_on": filed_on,
            "reference": reference.strip(), "recorded_by": recorded_by,
        })
