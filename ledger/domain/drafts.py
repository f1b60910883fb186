"""Validated input on its way into the ledger, and the checks that decide whether it may go in.

A draft holds what the user asked for, already parsed (masses in integer ng, dates as ``date``).
``validate_event`` compares it with the system's state and returns findings: errors stop the
write, warnings are recorded with the event and shown.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from datetime import date
from decimal import Decimal

from ledger.domain.certificates import WorkFacts
from ledger.domain.certificates import certificate_findings as work_certificate_findings
from ledger.domain.records import (
    CheckResult,
    Cylinder,
    Destination,
    Event,
    EventKind,
    Finding,
    FollowUpResult,
    Severity,
    System,
    SystemState,
    Technician,
)
from ledger.domain.state import effective_events, state_of

NG_PER_KG = 10**12

# Event kinds that move refrigerant, and so may name a cylinder.
MASS_KINDS = frozenset({EventKind.ADD, EventKind.RECOVER, EventKind.RETIRE})


@dataclass(frozen=True, slots=True)
class EventDraft:
    """An event as requested, before it is checked against the system's state."""

    kind: EventKind
    performed_on: date
    mass_ng: int | None = None
    refrigerant: str | None = None  # in-service / retrofit; for add/recover an assertion
    charge_ng: int | None = None
    result: str | None = None
    location: str | None = None
    method: str | None = None
    destination: str | None = None
    cylinder_code: str | None = None
    cylinder_before_ng: int | None = None
    cylinder_after_ng: int | None = None
    technician: str | None = None
    recorded_by: str | None = None
    note: str = ""
    voids_id: int | None = None
    reason: str | None = None
    attachments: tuple[str, ...] = ()
    reclaimed: bool = False
    facility: str | None = None  # EU Art 6(c): recycling/reclamation/destruction facility
    facility_certificate: str | None = None  # ... its certificate number, where applicable


def error(field: str, message: str, source: str = "input") -> Finding:
    """An error finding about one field."""
    return Finding(source=source, message=f"{field}: {message}", severity=Severity.ERROR, field=field)


def _kg(ng: int) -> str:
    """A nanogram mass as exact kilograms for a message (``48.2 kg``)."""
    text = format(Decimal(ng) / NG_PER_KG, "f")
    return (text.rstrip("0").rstrip(".") if "." in text else text) + " kg"


def cylinder_mass_ng(draft: EventDraft) -> tuple[int | None, list[Finding]]:
    """The mass moved, from ``--mass`` or from cylinder weights before/after.

    Charging empties the cylinder (before > after); recovering fills it (after > before).
    """
    before, after = draft.cylinder_before_ng, draft.cylinder_after_ng
    if before is None and after is None:
        return draft.mass_ng, []
    if before is None or after is None:
        return None, [error("--before/--after", "give both cylinder weights, or --mass")]
    moved = before - after if draft.kind is EventKind.ADD else after - before
    if moved <= 0:
        if draft.kind is EventKind.ADD:
            return None, [error("--before", f"{_kg(before)} is not heavier than --after {_kg(after)}")]
        return None, [error("--after", f"{_kg(after)} is not heavier than --before {_kg(before)}")]
    if draft.mass_ng is not None and draft.mass_ng != moved:
        return None, [error("--mass", "disagrees with the cylinder weights; give one or the other")]
    return moved, []


def validate_event(
    draft: EventDraft,
    state: SystemState,
    *,
    today: date,
    same_refrigerant: bool | None,
    cylinder: Cylinder | None,
    cylinder_matches: bool | None,
    technician: Technician | None,
    placed_on: date | None,
    work: WorkFacts | None = None,
) -> list[Finding]:
    """Check a draft against the system's state on the event's date.

    Args:
        draft: the requested event.
        state: the system's state folded to the draft's date (``state_of``).
        today: the site-local date now (events cannot be in the future).
        same_refrigerant: for add/recover with ``--refrigerant``: whether it names the
            refrigerant the system holds (None when not given).
        cylinder: the named cylinder, if any.
        cylinder_matches: whether the cylinder holds the system's refrigerant.
        technician: the technician who did the work, if named.
        placed_on: the day the system was placed in service (from its whole history).
        work: the site, system and work facts a certificate is judged against; without them
            only the certificate's dates are checked.
    Returns:
        Findings; any with severity ERROR means the event must not be written.
    """
    found: list[Finding] = []
    on = draft.performed_on
    if on > today:
        found.append(error("--on", f"{on.isoformat()} is in the future (today is {today.isoformat()})"))
    if draft.kind is not EventKind.VOID:
        if placed_on is None:
            found.append(error("system", "has not been placed in service"))
        elif on < placed_on:
            found.append(
                error("--on", f"{on.isoformat()} is before the system was placed in service ({placed_on.isoformat()})")
            )
        if state.retired_on is not None and on >= state.retired_on:
            found.append(
                error(
                    "--on", f"{on.isoformat()} is on or after the system was retired ({state.retired_on.isoformat()})"
                )
            )
    kind = draft.kind
    if kind in (EventKind.ADD, EventKind.RECOVER) and draft.mass_ng is None:
        found.append(error("--mass", "is required (or --cylinder with --before and --after)"))
    if kind is EventKind.RETIRE and draft.mass_ng is None:
        found.append(error("--recovered", "is required (0 kg if nothing could be recovered)"))
    if same_refrigerant is False:
        found.append(
            error("--refrigerant", f"{draft.refrigerant!r} is not what the system holds ({state.refrigerant})")
        )
    if cylinder is not None and cylinder_matches is False:
        found.append(
            error(
                "--cylinder", f"{cylinder.id!r} holds {cylinder.refrigerant}, but the system holds {state.refrigerant}"
            )
        )
    if cylinder is not None and kind not in MASS_KINDS:
        found.append(error("--cylinder", f"does not apply to a {kind.value} event"))
    for flag, value in (("--facility", draft.facility), ("--facility-certificate", draft.facility_certificate)):
        if value is not None and kind not in MASS_KINDS:
            found.append(error(flag, f"does not apply to a {kind.value} event (only to add, recover, retire)"))
    if draft.facility_certificate is not None and not draft.facility:
        found.append(error("--facility-certificate", "needs --facility (the facility it certifies)"))
    if kind is EventKind.CHECK:
        if draft.result not in {r.value for r in CheckResult}:
            found.append(error("--result", f"{draft.result!r} is not one of no-leak, leak-found"))
    if kind is EventKind.FOLLOW_UP:
        if draft.result not in {r.value for r in FollowUpResult}:
            found.append(error("--result", f"{draft.result!r} is not one of pass, fail"))
    if draft.destination is not None and draft.destination not in {d.value for d in Destination}:
        allowed = ", ".join(d.value for d in Destination)
        found.append(error("--destination", f"{draft.destination!r} is not one of {allowed}"))
    if kind is EventKind.VOID and not (draft.reason or "").strip():
        found.append(error("--reason", "is required when voiding an event"))
    if work is not None:
        found.extend(work_certificate_findings(technician, work))
    elif technician is not None:
        found.extend(certificate_findings(technician, on))
    return found


def certificate_findings(technician: Technician, on: date) -> list[Finding]:
    """A warning when the technician holds no certificate valid on the day of the work."""
    if any(c.valid_on(on) for c in technician.certificates):
        return []
    if technician.certificates:
        latest = max(technician.certificates, key=lambda c: c.valid_to or date.max)
        until = latest.valid_to.isoformat() if latest.valid_to else "?"
        detail = f"certificate {latest.number} was not valid on {on.isoformat()} (valid to {until})"
    else:
        detail = "holds no certificate in the ledger"
    return [
        Finding(
            source=f"tech {technician.name}",
            message=f"warning: {technician.name} {detail}; the event is recorded as done",
            severity=Severity.WARNING,
            field="--tech",
        )
    ]


# --- plausibility: what asks for a confirmation -----------------------------------------------

# A single addition or recovery above this share of the system's full charge is more likely a
# typing slip (a unit, a decimal mark) than a fact: common practice, no source. Configurable
# per call (``charge_share``); 1 = the whole full charge.
DEFAULT_CHARGE_SHARE = Decimal(1)
SMALLEST_PLAUSIBLE_NG = 10**9  # 1 g: less is below what a service scale shows (common practice, no source)
_MOVING = frozenset({EventKind.ADD, EventKind.RECOVER, EventKind.RETIRE})
_MOVING_WORD = {EventKind.ADD: "addition", EventKind.RECOVER: "recovery", EventKind.RETIRE: "recovery at retirement"}


def _shown(ng: int, unit: str) -> str:
    from ledger.units import format_mass

    places = 2 if ng >= 10 * 10**9 else 4  # 1 g shows as 0.0010 kg
    return format_mass(ng, unit, places=places)


def confirmation_reasons(
    draft: EventDraft,
    history: Sequence[Event],
    system: System,
    *,
    unit: str = "kg",
    charge_share: Decimal = DEFAULT_CHARGE_SHARE,
) -> tuple[str, ...]:
    """The doubts about a valid draft that a person must confirm before it is recorded.

    Args:
        draft: the event to record (masses resolved, e.g. from cylinder weights).
        history: the system's events recorded so far (voids applied here).
        system: the system the event is for (named in the sentences).
        unit: the site's display unit (``kg`` or ``lb``).
        charge_share: a single mass above this share of the full charge asks (1 = 100 %).
    Returns:
        One sentence per doubt; empty when there is nothing to confirm.
    """
    reasons: list[str] = []
    mass = draft.mass_ng
    if draft.kind in _MOVING and mass is not None and mass > 0:
        word = _MOVING_WORD[draft.kind]
        full = state_of(history, draft.performed_on).full_charge_ng
        if full > 0 and mass > full * charge_share:
            share = f"{(charge_share * 100).normalize():f} % of "
            limit = "its full charge" if charge_share == 1 else f"{share}its full charge"
            reasons.append(
                f"The {word} of {_shown(mass, unit)} is more than {limit} ({_shown(full, unit)}) of {system.tag}."
            )
        if mass < SMALLEST_PLAUSIBLE_NG:
            reasons.append(f"The {word} of {_shown(mass, unit)} is less than 1 g.")
    if draft.kind is not EventKind.VOID:
        for e in effective_events(history):
            if (
                e.kind is draft.kind
                and e.performed_on == draft.performed_on
                and e.mass_ng == mass
                and (e.technician or None) == (draft.technician or None)
            ):
                who = f" by {e.technician}" if e.technician else " with no technician"
                what = f" of {_shown(mass, unit)}" if mass is not None else ""
                reasons.append(
                    f"Event {e.id} already records the same {draft.kind.value}{what} on {system.tag} on "
                    f"{draft.performed_on.isoformat()}{who}."
                )
                break
    return tuple(reasons)
