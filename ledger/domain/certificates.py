"""Which personal certificate covers a piece of work on a system on a day (pure: facts in).

A certificate carries a *scope* (the regime family it was issued under) and a *category*
(or type). Work is covered when the certificate is valid on the day, was issued under a
scope that applies at the site, and its category covers the kind of work on a system of
that size and pressure class. Certificates recorded before scopes were kept (scope "")
are taken as valid by date only, as they always were.

Sources and marks (docs/errors.md and docs/rules/README.md repeat them):
- EU: Reg. (EU) 2024/573 Art 10 requires certified natural persons; the categories I-IV
  for stationary equipment are those of Implementing Reg. (EU) 2015/2067 Art 3, which
  Implementing Reg. (EU) 2024/2215 repealed while keeping existing certificates valid
  (its Art 10, title read; wording from memory). Category I: every activity; II: leak
  checks without breaking into the circuit on any equipment, other work on equipment with
  less than 3 kg (hermetically sealed: 6 kg); III: recovery from that small equipment;
  IV: leak checks without breaking into the circuit. Thresholds from memory; the 2024/2215
  certificates A1/A2/B/C/D/E are not modelled yet.
- GB: retained 517/2014 Art 10 with the retained 2015/2067 categories, the same I-IV
  (from memory). A GB certificate is not taken on an EU site, nor the reverse (from memory).
- US: 40 CFR 82.161(a): Type I small appliances; Type II high- or very high-pressure
  appliances except small appliances; Type III low-pressure appliances; Universal all
  (a trade handbook page lists the same four types; section wording from memory). Small
  appliance (82.152, from memory): factory-sealed with 5 lb or less. Low-pressure
  refrigerants (82.152: saturation pressure below 45 psia at 104 degF) are listed in
  ``LOW_PRESSURE``; the test checks them against CoolProp.
"""

from __future__ import annotations

import enum
from dataclasses import dataclass
from datetime import date

from ledger.domain.records import Certificate, Event, EventKind, Finding, Severity, Technician
from ledger.units import NG_PER_KG, NG_PER_LB


class Scope(enum.StrEnum):
    """The regime family a certificate was issued under."""

    EU = "eu"  # Reg. (EU) 2024/573 Art 10 (or 517/2014), any member state (mutual recognition)
    GB = "gb"  # retained F-gas certification in Great Britain
    US_608 = "us-608"  # Clean Air Act section 608 technician certification, 40 CFR 82.161


class Work(enum.StrEnum):
    """What a kind of event asks of the person doing it."""

    LEAK_CHECK = "leak-check"  # checking for leaks without breaking into the circuit
    SERVICE = "service"  # installation, repair, maintenance, charging
    RECOVERY = "recovery"  # recovery, decommissioning


# Regimes (site) in which a certificate of each scope is valid, for callers that give regime codes
# only (the pure tests). Services pass the scopes the site's regimes declare themselves
# (`ledger.rules.site_profile(...).certificate_scopes`, `WorkFacts.site_scopes`), so a new regime
# names its certificates in its own module.
SCOPE_REGIMES: dict[Scope, frozenset[str]] = {
    Scope.EU: frozenset({"eu"}),
    Scope.GB: frozenset({"gb"}),
    Scope.US_608: frozenset({"us-82f", "us-84c", "us-ca"}),
}

# Categories (types) each scope issues, as stored.
CATEGORIES: dict[Scope, tuple[str, ...]] = {
    Scope.EU: ("I", "II", "III", "IV"),
    Scope.GB: ("I", "II", "III", "IV"),
    Scope.US_608: ("Type I", "Type II", "Type III", "Universal"),
}

# The work each kind of event is; kinds not listed need no certificate (void, charge revised).
WORK_OF: dict[EventKind, Work] = {
    EventKind.CHECK: Work.LEAK_CHECK,
    EventKind.FOLLOW_UP: Work.LEAK_CHECK,
    EventKind.DETECTION_CHECK: Work.LEAK_CHECK,
    EventKind.IN_SERVICE: Work.SERVICE,
    EventKind.ADD: Work.SERVICE,
    EventKind.REPAIR: Work.SERVICE,
    EventKind.RETROFIT: Work.SERVICE,
    EventKind.DETECTION_ON: Work.SERVICE,
    EventKind.DETECTION_OFF: Work.SERVICE,
    EventKind.RECOVER: Work.RECOVERY,
    EventKind.RETIRE: Work.RECOVERY,
}

# EU/GB category II/III "small equipment": below 3 kg, hermetically sealed below 6 kg (from memory).
SMALL_KG = 3
SMALL_HERMETIC_KG = 6
# US small appliance: 5 lb or less, factory-sealed (40 CFR 82.152, from memory).
SMALL_APPLIANCE_LB = 5
# Refrigerants of US low-pressure appliances (below 45 psia at 104 degF, 40 CFR 82.152).
LOW_PRESSURE: frozenset[str] = frozenset({"R-11", "R-113", "R-123", "R-245fa", "R-1233zd(E)", "R-1336mzz(Z)",
                                          "R-514A"})


@dataclass(frozen=True, slots=True)
class WorkFacts:
    """The facts a certificate is judged against: where, on what, which work, which day."""

    kind: EventKind
    on: date
    site_regimes: tuple[str, ...]
    charge_ng: int
    hermetic: bool
    refrigerant: str | None
    site_scopes: frozenset[str] | None = None  # scopes the site's regimes accept (else SCOPE_REGIMES)


def normal_category(scope: str, category: str) -> str | None:
    """A category as stored ("I".."IV"; "Type I".."Universal"), or None if the scope has no such one."""
    text = category.strip().lower().removeprefix("category").removeprefix("cat").removeprefix("type").strip(" .")
    for known in CATEGORIES.get(Scope(scope), ()) if scope in Scope._value2member_map_ else ():
        if text == known.lower().removeprefix("type").strip():
            return known
    return None


def _small(facts: WorkFacts) -> bool:
    limit = SMALL_HERMETIC_KG if facts.hermetic else SMALL_KG
    return facts.charge_ng < limit * NG_PER_KG


def why_not(cert: Certificate, facts: WorkFacts) -> str | None:
    """Why a certificate does not cover the work, or None when it does."""
    if not cert.valid_on(facts.on):
        if cert.valid_to is not None and facts.on > cert.valid_to:
            return f"{cert.number} was not valid on {facts.on.isoformat()} (valid to {cert.valid_to.isoformat()})"
        return f"{cert.number} is valid only from {cert.valid_from.isoformat() if cert.valid_from else '?'}"
    work = WORK_OF.get(facts.kind)
    if not cert.scope or work is None:
        return None
    scope = Scope(cert.scope)
    valid_here = (scope.value in facts.site_scopes if facts.site_scopes is not None
                  else bool(SCOPE_REGIMES[scope] & set(facts.site_regimes)))
    if not valid_here:
        regimes = ", ".join(facts.site_regimes) or "no regime"
        return f"{cert.number} is a {scope.value} certificate, not valid at a site under {regimes}"
    cat = cert.category
    if scope is Scope.US_608:
        # whole units, as a typed "5 lb" is stored (exact once masses are exact in every unit)
        small = facts.hermetic and facts.charge_ng <= round(SMALL_APPLIANCE_LB * NG_PER_LB)
        low = facts.refrigerant in LOW_PRESSURE
        if cat == "Universal" or (cat == "Type I" and small) or (cat == "Type II" and not small and not low) or (
            cat == "Type III" and not small and low
        ):
            return None
        what = "a small appliance" if small else ("a low-pressure appliance" if low else "a high-pressure appliance")
        return f"{cert.number} ({cat}) does not cover {what}"
    if cat == "I" or (cat in ("II", "IV") and work is Work.LEAK_CHECK) or (
        cat == "II" and _small(facts)) or (cat == "III" and work is Work.RECOVERY and _small(facts)):
        return None
    return f"{cert.number} (category {cat}) does not cover {work.value} work on this system"


def certificate_for(technician: Technician | None, facts: WorkFacts) -> tuple[Certificate | None, list[str]]:
    """The first of the technician's certificates that covers the work, and why each other does not."""
    if technician is None:
        return None, []
    reasons: list[str] = []
    for cert in technician.certificates:
        reason = why_not(cert, facts)
        if reason is None:
            return cert, []
        reasons.append(reason)
    return None, reasons


def certificate_findings(technician: Technician | None, facts: WorkFacts) -> list[Finding]:
    """A warning when nobody certified for the work is named (the event is still recorded)."""
    if facts.kind not in WORK_OF:
        return []
    if technician is None:
        return [Finding(source="input", severity=Severity.WARNING, field="--tech", message=(
            f"warning: no technician named for {facts.kind.value} work on {facts.on.isoformat()}; "
            "recorded as done by an uncertified person (it does not meet a check duty)"))]
    cert, reasons = certificate_for(technician, facts)
    if cert is not None:
        return []
    detail = "; ".join(reasons) if reasons else "holds no certificate in the ledger"
    return [Finding(source=f"tech {technician.name}", severity=Severity.WARNING, field="--tech", message=(
        f"warning: {technician.name} holds no certificate valid for this work on {facts.on.isoformat()} "
        f"({detail}); the event is recorded as done by an uncertified person"))]


# Kinds `system add` records for plant already running; without a named technician they are an
# office entry, not work, and carry no warning.
OFFICE_ENTRY_KINDS = frozenset({EventKind.IN_SERVICE, EventKind.DETECTION_ON})


def uncertified_work(event: Event) -> bool:
    """True when an event is work recorded without a certificate valid for it (shown with a warning)."""
    if event.kind not in WORK_OF or event.certified:
        return False
    return bool(event.technician) or event.kind not in OFFICE_ENTRY_KINDS
