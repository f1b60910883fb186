"""Servicing prohibitions and transition exposure: which systems can no longer be topped up
with virgin (or any) refrigerant of their kind, from which day, under each regime.

Pure: the prohibitions and retrofit targets (ledger/reference/servicing.csv, retrofits.csv)
are passed in, as is ``as_of``. Sources and marks are in each prohibition row and in
docs/exposure.md; where a value could not be read it is marked "memory".

* EU Reg. (EU) 2024/573 Art 13(3): refrigerants with GWP 2 500 or more for servicing
  refrigeration equipment of 40 t CO2e or more, and from 1 January 2025 any refrigeration
  equipment; reclaimed or recycled gas allowed until 1 January 2030. GWP 750 from 2032 and the
  HCFC ban of the ODS rules from memory.
* GB: 517/2014 Art 13(3) as retained (2 500 / 40 t from 2020; reclaimed until 2030) and the
  retained ODS rules for HCFCs.
* US 40 CFR 84 Subpart C: reclaimed refrigerant only for servicing the named sectors from 2029.

The CO2e at stake is the full charge x GWP under the regime's own basis (AR4 for the US); the
CO2e a retrofit saves is full charge x (GWP now - GWP of the target) / 1000, assuming the same
charge (common practice, no source: a retrofit usually keeps a similar charge; the maker's
figure governs).
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from datetime import date
from decimal import Decimal

from ledger.domain.records import (
    Application,
    Event,
    EventKind,
    Finding,
    Severity,
    System,
    SystemHistory,
    SystemState,
)
from ledger.domain.state import state_of
from ledger.reference.servicing import RetrofitTarget, ServicingBan
from ledger.rules import eu, gb, us_84c
from ledger.rules.common import ReferenceLike, events_until, kg_of, resolve

RULES_VERSION = "servicing-1"  # bump when a prohibition or how it is matched changes

# The GWP basis each regime's prohibitions are read on (the regime's own).
BASIS_OF: dict[str, str] = {"eu": eu.GWP_BASIS, "gb": gb.GWP_BASIS, "us-84c": us_84c.GWP_BASIS}

# "refrigeration" in the texts: the application classes that are refrigeration equipment.
REFRIGERATION: frozenset[str] = frozenset({
    Application.COMMERCIAL_REFRIGERATION.value,
    Application.INDUSTRIAL_PROCESS.value,
    Application.TRANSPORT_REFRIGERATION.value,
})
ODS_CLASSES = frozenset({"HCFC", "CFC"})


@dataclass(frozen=True, slots=True)
class Exposure:
    """One system caught by one servicing prohibition."""

    site_code: str
    tag: str
    system_id: int
    regime: str
    ban: ServicingBan
    in_force: bool  # the prohibition applies on as_of (else it applies from ban.from_on)
    refrigerant: str
    gwp: Decimal  # regime basis, unrounded
    charge_kg: Decimal
    co2e_t: Decimal  # charge at stake
    retrofit: str | None  # a named lower-GWP refrigerant, if the table has one
    retrofit_gwp: Decimal | None
    saved_t: Decimal | None  # CO2e of the charge saved by that retrofit


def _applies_to(ban: ServicingBan, application: str) -> bool:
    if "all" in ban.applications:
        return True
    if "refrigeration" in ban.applications and application in REFRIGERATION:
        return True
    return application in ban.applications


def covers(ban: ServicingBan, reference: ReferenceLike, designation: str, application: str,
           charge_ng: int) -> tuple[Decimal, Decimal] | None:
    """(GWP, t CO2e) of the charge when ``ban`` covers this refrigerant and equipment, else None."""
    if not _applies_to(ban, application):
        return None
    basis = BASIS_OF.get(ban.regime, "ar4")
    gwp = Decimal(reference.gwp(designation, basis).value)
    tonnes = kg_of(charge_ng) * gwp / 1000
    is_ods = bool(reference.chem_classes(designation) & ODS_CLASSES)
    if ban.ods != is_ods:
        return None
    if ban.gwp_from is not None and gwp < ban.gwp_from:
        return None
    if ban.charge_from_t is not None and tonnes < ban.charge_from_t:
        return None
    return gwp, tonnes


def _retrofit(targets: Sequence[RetrofitTarget], reference: ReferenceLike, designation: str,
              application: str, gwp: Decimal, basis: str) -> tuple[str, Decimal] | None:
    for t in targets:
        if t.refrigerant != designation:
            continue
        if not ("all" in t.applications or application in t.applications
                or ("refrigeration" in t.applications and application in REFRIGERATION)):
            continue
        target_gwp = Decimal(reference.gwp(t.target, basis).value)
        if target_gwp < gwp:
            return t.target, target_gwp
    return None


def exposure(histories: Iterable[SystemHistory], reference: ReferenceLike,
             bans: Sequence[ServicingBan], targets: Sequence[RetrofitTarget],
             as_of: date) -> list[Exposure]:
    """Every in-service system a servicing prohibition of its site's regimes catches.

    For each system and regime only the latest prohibition in force on ``as_of`` is given,
    plus each one that starts later, up to the first that bans any gas of the kind; a system
    no prohibition catches is not listed.

    Args:
        histories: systems with their events.
        reference: the refrigerant tables.
        bans: the servicing prohibitions.
        targets: retrofit targets.
        as_of: the day.
    Returns:
        Exposures by site, system, regime and date.
    """
    out: list[Exposure] = []
    for h in histories:
        state = state_of(events_until(h, as_of), as_of)
        designation = resolve(reference, state.refrigerant) if state.in_service else None
        if designation is None:
            continue
        application = h.system.application.value
        for regime in h.site.regimes:
            found: list[Exposure] = []
            for ban in bans:
                if ban.regime != regime:
                    continue
                hit = covers(ban, reference, designation, application, state.full_charge_ng)
                if hit is None:
                    continue
                gwp, tonnes = hit
                basis = BASIS_OF.get(regime, "ar4")
                retro = _retrofit(targets, reference, designation, application, gwp, basis)
                saved = None if retro is None else kg_of(state.full_charge_ng) * (gwp - retro[1]) / 1000
                found.append(Exposure(h.site.code, h.system.tag, h.system.id, regime, ban,
                                      ban.from_on <= as_of, designation, gwp,
                                      kg_of(state.full_charge_ng), tonnes,
                                      None if retro is None else retro[0],
                                      None if retro is None else retro[1], saved))
            out.extend(_strictest(found))
    out.sort(key=lambda e: (e.site_code, e.tag, e.regime, e.ban.from_on))
    return out


def _strictest(found: list[Exposure]) -> list[Exposure]:
    """The latest prohibition in force, then each later one, up to the first banning any gas."""
    found = sorted(found, key=lambda e: e.ban.from_on)
    in_force = [e for e in found if e.in_force]
    keep = in_force[-1:]
    for e in found:
        if keep and keep[-1].ban.refrigerant_use == "any":
            break
        if not e.in_force:
            keep.append(e)
    return keep


def top_up_findings(system: System, regimes: Sequence[str], state: SystemState, event: Event,
                    reference: ReferenceLike, bans: Sequence[ServicingBan],
                    source: str) -> list[Finding]:
    """Warnings for a top-up a servicing prohibition forbids (recorded all the same).

    A recorded event is never refused: the ledger records what was done and says plainly
    that the law forbade it.

    Args:
        system: the system topped up.
        regimes: the site's regimes.
        state: the system's state on the day of the top-up.
        event: the ADD event (its ``reclaimed`` flag says recycled or reclaimed gas was used).
        reference: the refrigerant tables.
        bans: the servicing prohibitions.
        source: how the finding names the event (e.g. "GB-BRS/CU-22 2026-02-11").
    """
    if event.kind is not EventKind.ADD or not state.in_service:
        return []
    designation = resolve(reference, state.refrigerant)
    if designation is None:
        return []
    out: list[Finding] = []
    for ban in bans:
        if ban.regime not in regimes or event.performed_on < ban.from_on:
            continue
        if ban.refrigerant_use in ("virgin", "reclaimed only") and event.reclaimed:
            continue
        if covers(ban, reference, designation, system.application.value,
                  state.full_charge_ng) is None:
            continue
        gas = "recycled or reclaimed" if event.reclaimed else "virgin (not marked reclaimed)"
        out.append(Finding(source, f"servicing prohibited: {gas} {designation} added on "
                           f"{event.performed_on.isoformat()}; {ban.what}, not allowed from "
                           f"{ban.from_on.isoformat()} ({ban.citation} [{ban.confidence}]); "
                           "recorded as done", Severity.WARNING, "servicing"))
    return out


def prohibited_top_ups(history: SystemHistory, reference: ReferenceLike,
                       bans: Sequence[ServicingBan], start: date | None,
                       end: date) -> list[tuple[Event, Finding]]:
    """The system's top-ups from ``start`` to ``end`` that a servicing prohibition forbade.

    Voided events are left out; each comes with its warning (see `top_up_findings`).
    """
    from ledger.domain.state import effective_events

    out: list[tuple[Event, Finding]] = []
    events = tuple(history.events)
    for e in effective_events(events):
        if e.kind is not EventKind.ADD or e.performed_on > end:
            continue
        if start is not None and e.performed_on < start:
            continue
        state = state_of(events_until(history, e.performed_on), e.performed_on)
        source = f"{history.site.code}/{history.system.tag} {e.performed_on.isoformat()}"
        for f in top_up_findings(history.system, history.site.regimes, state, e, reference, bans,
                                 source):
            out.append((e, f))
    return out
