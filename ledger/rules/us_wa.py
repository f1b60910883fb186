"""Regime ``us-wa``: Washington refrigerant management program, chapter 173-443 WAC Part II.

Owner and operator duties for systems holding 50 lb or more of a refrigerant with GWP 150 or
more (WAC 173-443-020(4)); see docs/rules/us-wa.md for the quotes, marks and what is left
out (technician service practices of 173-443-205 among them):

* 145 periodic leak inspections by band, one per calendar period: 1 500 lb or more monthly
  from 2024 unless automatic leak detection is used (145(1)(b)(i)); 200 to under 1 500 lb
  quarterly from 2026, also waived with automatic leak detection, and 50 to under 200 lb
  yearly from 2028 (both from memory);
* 145(2)(a)(i) automatic leak detection on refrigeration systems of 1 500 lb or more by
  1 January 2025 (from placement for later systems);
* 165 repair within 14 days of finding a leak (read from 195(1)(c)), from 2024;
* 115 registration of each system by 15 March of its band's year, or of the year after it
  begins operating; 185 annual report by 15 March (from memory).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from datetime import date, timedelta
from decimal import Decimal
from itertools import groupby

from ledger.domain.records import (
    Application,
    Basis,
    Confidence,
    EventKind,
    Finding,
    Obligation,
    ObligationKind,
    SystemHistory,
    SystemState,
    Tier,
)
from ledger.rules.common import (
    BELOW_THRESHOLD,
    MONTH,
    OUT_OF_SCOPE,
    QUARTER,
    UNKNOWN_REFRIGERANT,
    YEAR,
    Cadence,
    Constant,
    ReferenceLike,
    Timeline,
    at_least_lb,
    calendar_windows,
    cause_on,
    detection_triggers,
    events_until,
    first_event,
    fmt_lb,
    history_findings,
    late_note,
    leak_found_events,
    obligation_sort_key,
    resolve,
    retired_between,
    service_segments,
    status_of,
    tier_for_state,
)

REGIME = "us-wa"
REGIME_VERSION = "us-wa-1"  # bump when a rule or constant here changes
TITLE = "Washington refrigerant management program (chapter 173-443 WAC, Part II)"
GWP_BASIS = "ar4"
SUBDIVISIONS: frozenset[str] = frozenset({"US-WA"})
MASS_UNIT = "lb"
LEAK_RATES = True  # shown with the federal regimes of a US site

_W = "WAC 173-443-"
B_SCOPE = Basis(f"{_W}020(4)", Confidence.CHECKED,
                "\"a full charge of 50 or more pounds and that uses a refrigerant with a global "
                "warming potential (GWP) of 150 or more\" (justia, read Dec 2026)")
B_GWP = Basis(f"{_W}030", Confidence.MEMORY,
              "definitions not read; AR4 as for us-ca and us-84c (Ecology's GHG rules use AR4: "
              "\"the GWP of HFCs ranges from 12 to 14,800\", 2021 bill report)")
B_LARGE = Basis(f"{_W}145(1)(b)(i)", Confidence.CHECKED,
                "\"Beginning January 1, 2024, … Conduct a leak inspection of the full system each "
                "month … unless an automatic leak detection system … is installed and "
                "functioning correctly on the full system\" (calendar months are our reading)")
B_MID = Basis(f"{_W}145", Confidence.MEMORY,
              "200 to under 1 500 lb quarterly from 1 January 2026 unless automatic leak "
              "detection is used; the date matches 115(2) (\"By March 15, 2026\")")
B_SMALL = Basis(f"{_W}145", Confidence.MEMORY,
                "50 to under 200 lb once a year from 1 January 2028; the date matches 115(3)")
B_DETECTION = Basis(f"{_W}145(2)(a)(i)", Confidence.CHECKED,
                    "refrigeration systems of 1 500 lb or more: \"By January 1, 2025, install an "
                    "automatic leak detection system\"; later systems from placement (our "
                    "reading); the replace-by-2027 plan of (2)(a)(ii) is not recorded")
B_REPAIR = Basis(f"{_W}165", Confidence.CHECKED,
                 "14 days from detection, as 195(1)(c) cites it: \"conditions allowing more than "
                 "14 days to repair a refrigerant leak after detection under WAC 173-443-165 (3) "
                 "or (4)\" (those longer periods are not modelled)")
B_REGISTER = Basis(f"{_W}115", Confidence.CHECKED,
                   "\"By March 15, 2024\" (1 500 lb or more), 2026 (200 to 1,499), 2028 (50 to "
                   "199) for systems operating on 1 January of that year; later ones \"By March "
                   "15th of the calendar year after the year in which the … system begins "
                   "operations\"")
B_REPORT = Basis(f"{_W}185", Confidence.MEMORY,
                 "annual report by 15 March for the previous year, from the band's first year "
                 "(2024, 2026, 2028); text not read")
B_RECORDS = Basis(f"{_W}195(1)", Confidence.CHECKED,
                  "\"Beginning January 1, 2024, … must maintain the following records for a "
                  "minimum of five years\"")

GWP_FROM = Decimal(150)
REPAIR_DAYS = 14
REPAIR_FROM = date(2024, 1, 1)
DETECTION_BY = date(2025, 1, 1)
DETECTION_APPLICATIONS = frozenset({Application.COMMERCIAL_REFRIGERATION,
                                    Application.INDUSTRIAL_PROCESS,
                                    Application.TRANSPORT_REFRIGERATION})
FILING_DAY = (3, 15)  # registration and annual report: 15 March


@dataclass(frozen=True, slots=True)
class Band:
    """A size band of 173-443-115 / -145: its inspection and the year its duties start."""

    label: str
    from_lb: Decimal
    period: str  # calendar period of the periodic inspection
    starts_on: date  # inspections (and registration and reports) of the band from this day
    basis: Basis
    waived_by_detection: bool


BANDS = (  # largest first
    Band("≥ 1 500 lb", Decimal(1500), MONTH, date(2024, 1, 1), B_LARGE, True),
    Band("200–1 500 lb", Decimal(200), QUARTER, date(2026, 1, 1), B_MID, True),
    Band("50–200 lb", Decimal(50), YEAR, date(2028, 1, 1), B_SMALL, False),
)
_MONTHS = {MONTH: 1, QUARTER: 3, YEAR: 12}
_WORD = {MONTH: "monthly", QUARTER: "quarterly", YEAR: "annual"}

CONSTANTS: tuple[Constant, ...] = (
    Constant("system full charge from", BANDS[-1].from_lb, "lb", B_SCOPE),
    Constant("refrigerant GWP from (AR4)", GWP_FROM, "", B_GWP),
    *(c for b in BANDS for c in (
        Constant(f"inspection, {b.label}", _MONTHS[b.period],
                 f"months (calendar {b.period})" + ("; none with automatic leak detection"
                                                    if b.waived_by_detection else ""), b.basis),
        Constant(f"inspections and registration, {b.label}, from", b.starts_on, "date", b.basis))),
    Constant("automatic leak detection, refrigeration ≥ 1 500 lb, by", DETECTION_BY, "date",
             B_DETECTION),
    Constant("repair within", REPAIR_DAYS, "days of detection", B_REPAIR),
    Constant("registration due", "15 March", "", B_REGISTER),
    Constant("annual report due", "15 March (previous calendar year)", "", B_REPORT),
    Constant("records kept", 5, "years (from 1 January 2024)", B_RECORDS),
)


def _excluded(reference: ReferenceLike, state: SystemState) -> tuple[str, str] | None:
    designation = resolve(reference, state.refrigerant)
    if designation is None:
        return UNKNOWN_REFRIGERANT, f"refrigerant {state.refrigerant!r} is not in the reference data"
    gwp = Decimal(reference.gwp(designation, GWP_BASIS).value)
    if gwp < GWP_FROM:
        return OUT_OF_SCOPE, f"{designation} has GWP {gwp.normalize():f} (AR4), under 150"
    if band_of(state.full_charge_ng) is None:
        return BELOW_THRESHOLD, f"{designation}, {fmt_lb(state.full_charge_ng)}: under 50 lb"
    return None


def band_of(full_charge_ng: int) -> Band | None:
    """The size band of a full charge, or None under 50 lb."""
    return next((b for b in BANDS if at_least_lb(full_charge_ng, b.from_lb)), None)


def covered(reference: ReferenceLike, state: SystemState) -> bool:
    """Whether Part II covers a system in a state (in service, GWP ≥ 150, 50 lb or more)."""
    return state.in_service and _excluded(reference, state) is None


def cadence_of(reference: ReferenceLike, state: SystemState, day: date) -> Cadence | None:
    """The inspection due on ``day`` (173-443-145), or None (not covered, band not yet
    started, or waived by automatic leak detection)."""
    band = band_of(state.full_charge_ng) if covered(reference, state) else None
    if band is None or day < band.starts_on or (band.waived_by_detection and state.detection_system):
        return None
    return Cadence(f"{_WORD[band.period]} leak inspection ({band.label})", band.basis,
                   period=band.period)


def tier_of(history: SystemHistory, reference: ReferenceLike, as_of: date) -> Tier:
    """The system's band and inspection interval on ``as_of`` (173-443-145)."""
    state = Timeline(events_until(history, as_of)).state(as_of)
    idle = tier_for_state(REGIME, state, B_SCOPE)
    if idle is not None:
        return idle
    excluded = _excluded(reference, state)
    if excluded is not None:
        return Tier(REGIME, excluded[0], None, B_SCOPE, excluded[1])
    band = band_of(state.full_charge_ng)
    assert band is not None
    what = f"{resolve(reference, state.refrigerant)}, {fmt_lb(state.full_charge_ng)}"
    if band.waived_by_detection and state.detection_system:
        return Tier(REGIME, band.label, None, band.basis,
                    f"{what}: automatic leak detection used, periodic inspections waived")
    when = "" if as_of >= band.starts_on else f"; from {band.starts_on.isoformat()}"
    return Tier(REGIME, band.label, _MONTHS[band.period], band.basis,
                f"{what}: {_WORD[band.period]} leak inspection{when}")


def _system_obligations(history: SystemHistory, reference: ReferenceLike,
                        as_of: date) -> list[Obligation]:
    events = events_until(history, as_of)
    timeline = Timeline(events)
    sid, code = history.system.id, history.site.code

    def ob(kind: ObligationKind, due: date, basis: Basis, met, cause, detail: str,
           opens: date | None = None) -> Obligation:
        return Obligation(REGIME, kind, due, basis, status_of(due, met, as_of), sid, code, opens,
                          cause, None if met is None else met.id, detail + late_note(due, met))

    out: list[Obligation] = []
    checks = [e for e in events if e.kind is EventKind.CHECK]
    starts = [b.starts_on for b in BANDS]
    for seg in service_segments(events):
        for w in calendar_windows(
                spans=[(seg.start_on, None, seg.cause)], stop_on=seg.end_on,
                cadence_at=lambda d: cadence_of(reference, timeline.state(d), d),
                change_dates=[*timeline.dates, *starts], checks=checks, as_of=as_of):
            missed = f"; missed: none from {w.opens_on} to {w.due_on}" if w.missed else ""
            out.append(ob(ObligationKind.LEAK_INSPECTION, w.due_on, w.cadence.basis, w.met_by,
                          w.cause, w.cadence.label + missed, w.opens_on))

    for leak in leak_found_events(events):
        day = leak.performed_on
        if day < REPAIR_FROM or not covered(reference, timeline.state(day)):
            continue
        due = day + timedelta(days=REPAIR_DAYS)
        met = first_event(events, (EventKind.REPAIR,), on_or_after=day)
        if met is None and retired_between(events, day, due):
            continue
        out.append(ob(ObligationKind.REPAIR, due, B_REPAIR, met, leak.id,
                      f"repair the leak found on {day} within {REPAIR_DAYS} days"))

    def needs_detection(d: date) -> bool:
        st = timeline.state(d)
        return (history.system.application in DETECTION_APPLICATIONS and covered(reference, st)
                and at_least_lb(st.full_charge_ng, BANDS[0].from_lb))

    ons = [e for e in events if e.kind is EventKind.DETECTION_ON]
    for trigger, lapse in detection_triggers([*timeline.dates, DETECTION_BY], needs_detection,
                                             lambda d: timeline.state(d).detection_system):
        due = max(trigger, DETECTION_BY)
        met = next((e for e in reversed(ons) if e.performed_on <= trigger), None) \
            if timeline.state(trigger).detection_system else \
            first_event(ons, (EventKind.DETECTION_ON,), on_or_after=trigger, before=lapse)
        if met is None and ((lapse is not None and lapse <= due) or retired_between(events, trigger, due)):
            continue
        out.append(ob(ObligationKind.DETECTION_SYSTEM, due, B_DETECTION, met,
                      cause_on(events, trigger), "fit automatic leak detection (refrigeration, "
                      "≥ 1 500 lb)"))

    begun = next((d for d in timeline.dates if covered(reference, timeline.state(d))), None)
    if begun is not None:
        band = band_of(timeline.state(begun).full_charge_ng)
        assert band is not None
        month, day = FILING_DAY
        due = (date(band.starts_on.year, month, day) if begun <= band.starts_on
               else date(begun.year + 1, month, day))
        out.append(ob(ObligationKind.REPORT, due, B_REGISTER, None, cause_on(events, begun),
                      f"register the system with Ecology ({band.label}, operating from {begun}); "
                      "record it with `refledger report filed`"))
    return out


def _largest_in_year(histories: Sequence[SystemHistory], reference: ReferenceLike, year: int,
                     as_of: date) -> tuple[int, str] | None:
    """(charge, tag) of the largest system covered on some day of ``year`` up to ``as_of``."""
    first, last = date(year, 1, 1), min(date(year, 12, 31), as_of)
    best: tuple[int, str] | None = None
    for h in histories:
        timeline = Timeline(events_until(h, last))
        for d in (first, *(d for d in timeline.dates if first < d <= last)):
            st = timeline.state(d)
            if covered(reference, st) and (best is None or st.full_charge_ng > best[0]):
                best = (st.full_charge_ng, h.system.tag)
    return best


def _report_obligations(site_code: str, histories: Sequence[SystemHistory],
                        reference: ReferenceLike, as_of: date) -> list[Obligation]:
    # One report per calendar year from the band's first year, due 15 March after it; an
    # unfiled one stays overdue (a filing recorded with `refledger report filed` meets it).
    month, day = FILING_DAY
    last = as_of.year - 1 if as_of <= date(as_of.year, month, day) else as_of.year
    out: list[Obligation] = []
    for year in range(BANDS[0].starts_on.year, last + 1):
        largest = _largest_in_year(histories, reference, year, as_of)
        band = None if largest is None else band_of(largest[0])
        if largest is None or band is None or year < band.starts_on.year:
            continue
        due = date(year + 1, month, day)
        out.append(Obligation(REGIME, ObligationKind.REPORT, due, B_REPORT,
                              status_of(due, None, as_of), None, site_code, None, None, None,
                              f"annual report for {year} (largest system {largest[1]}, "
                              f"{fmt_lb(largest[0])}); record the filing with `refledger "
                              "report filed`"))
    return out


def compute_obligations(
    histories: Sequence[SystemHistory], reference: ReferenceLike, as_of: date
) -> tuple[list[Obligation], list[Finding]]:
    """Inspections, leak detection, repairs, registrations and reports under WAC 173-443.

    Args:
        histories: systems (of one or several sites) with their events.
        reference: the refrigerant tables.
        as_of: the day of evaluation; later events are ignored.
    Returns:
        (obligations earliest due first, findings about the data).
    """
    obligations: list[Obligation] = []
    findings: list[Finding] = []
    for history in histories:
        findings.extend(history_findings(history, reference, as_of))
        obligations.extend(_system_obligations(history, reference, as_of))
    for code, group in groupby(sorted(histories, key=lambda h: h.site.code),
                               key=lambda h: h.site.code):
        obligations.extend(_report_obligations(code, list(group), reference, as_of))
    obligations.sort(key=obligation_sort_key)
    return obligations, findings
