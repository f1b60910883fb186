"""Regime ``us-ca``: California refrigerant management program, 17 CCR 95380 ff.

Implements, for systems holding more than 50 lb of a refrigerant with GWP 150 or more (AR4),
see docs/rules/us-ca.md for sources, marks and what is left out:

* 95385 leak inspections by system size: 2 000 lb or more monthly (95385(a)(1)(A), which
  names year-round systems inside an enclosed building; outdoor systems fall under (a)(3),
  not read), waived where an automatic leak detection system is used ((a)(1)(B)); 200 to
  under 2 000 lb quarterly, also waived with automatic leak detection (95385(b)); over 50 to
  under 200 lb annually (95385(c)). Read as one inspection per calendar month / quarter /
  year, due on its last day. (Until us-ca-2 a quarterly duty was listed for 2 000 lb or more
  with automatic leak detection; no such duty was found in the text, so it is gone.)
* 95386 repair within 14 days of finding a leak (the 45-day extensions are not modelled).
* Annual report by 1 March for large (largest system 2 000 lb or more) and medium (200 to
  1 999 lb) facilities, one per calendar year from the first year the ledger holds a record
  of the site; an unfiled report stays overdue when the next one falls due (date from a
  secondary source; the section number is not confirmed).
"""

from __future__ import annotations

from collections.abc import Sequence
from datetime import date, timedelta
from decimal import Decimal
from itertools import groupby

from ledger.domain.records import (
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
from ledger.domain.state import state_of
from ledger.rules.common import (
    BELOW_THRESHOLD,
    MONTH,
    NG_PER_LB,
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

REGIME = "us-ca"
REGIME_VERSION = "us-ca-2"  # bump when a rule or constant here changes
TITLE = "California refrigerant management program (17 CCR 95380 ff.)"
GWP_BASIS = "ar4"

# Where the regime applies, and how a site under it is shown (`ledger.rules.site_profile`).
SUBDIVISIONS: frozenset[str] = frozenset({"US-CA"})
MASS_UNIT = "lb"
LEAK_RATES = True  # shown with the federal regimes of a US site

B_SCOPE = Basis("17 CCR 95380 ff.", Confidence.SECONDARY,
                "systems with more than 50 lb of a refrigerant with GWP 150 or more (AR4)")
B_OVER = Basis("17 CCR 95385(c)", Confidence.CHECKED,
               "\"full charge greater than 50, but less than 200 pounds\" (justia, read Dec 2026)")
B_START = Basis("17 CCR 95385", Confidence.CHECKED,
                "\"after January 1, 2011, the owner or operator … must conduct a leak "
                "inspection\" (justia, read Dec 2026); earlier periods are not listed")
B_SIZE = Basis("17 CCR 95383(a)-(b), 95385(a)-(b)", Confidence.CHECKED,
               "facility size by its largest system: large 2 000 lb or more, medium 200 to "
               "1 999 lb, small over 50 to under 200 lb (\"greater than or equal to 2,000 "
               "pounds\"; justia, read Dec 2026)")
B_INSPECTION_LARGE = Basis("17 CCR 95385(a)(1)(A)", Confidence.CHECKED,
                           "2 000 lb or more: monthly, for a refrigerant circuit \"located "
                           "entirely within an enclosed building\"; outdoor systems fall under "
                           "(a)(3), which was not read (calendar-month reading is ours)")
B_ALD_WAIVER_LARGE = Basis("17 CCR 95385(a)(1)(B)", Confidence.CHECKED,
                           "\"A monthly leak inspection … is not required … if an automatic leak "
                           "detection system … is used\" (casetext / justia, read Dec 2026)")
B_INSPECTION_MEDIUM = Basis("17 CCR 95385(b)", Confidence.CHECKED,
                            "200 to under 2 000 lb: \"once every three months\" (calendar-quarter "
                            "reading is ours)")
B_ALD_WAIVER_MEDIUM = Basis("17 CCR 95385(b)", Confidence.CHECKED,
                            "\"A leak inspection … is not required pursuant to this subsection (b) "
                            "if an automatic leak detection system … is used\" (justia, read Dec 2026)")
B_INSPECTION_SMALL = Basis("17 CCR 95385(c)", Confidence.CHECKED,
                           "over 50 to under 200 lb: \"must annually conduct a leak inspection\"")
B_INSPECTION = B_INSPECTION_LARGE  # the basis of the section as a whole, for findings
B_REPAIR = Basis("17 CCR 95386", Confidence.CHECKED,
                 "repair within 14 days of detection (45-day extensions not modelled; CARB "
                 "RMP page: \"leak repair within 14 days of detection\")")
B_REPORT = Basis("17 CCR 95380 ff. (annual report)", Confidence.SECONDARY,
                 "annual report by 1 March for large and medium facilities (CARB list-serve "
                 "2011 and CARB 2014 notice); the section number is not confirmed")

PROGRAM_FROM = date(2011, 1, 1)
GWP_FROM = Decimal(150)
SYSTEM_OVER_LB = Decimal(50)  # strictly more than 50 lb
MEDIUM_LB = Decimal(200)
LARGE_LB = Decimal(2000)
REPAIR_DAYS = 14
REPORT_DAY = (3, 1)  # 1 March, for the previous calendar year

CONSTANTS: tuple[Constant, ...] = (
    Constant("program in force from", PROGRAM_FROM, "date", B_START),
    Constant("refrigerant GWP from (AR4)", GWP_FROM, "", B_SCOPE),
    Constant("system charge over", SYSTEM_OVER_LB, "lb", B_OVER),
    Constant("medium size from", MEDIUM_LB, "lb", B_SIZE),
    Constant("large size from", LARGE_LB, "lb", B_SIZE),
    Constant("inspection, ≥ 2 000 lb without automatic leak detection (inside a building)", 1,
             "months (calendar month)", B_INSPECTION_LARGE),
    Constant("inspection, ≥ 2 000 lb with automatic leak detection", "none (waived)", "",
             B_ALD_WAIVER_LARGE),
    Constant("inspection, 200 to < 2 000 lb without automatic leak detection", 3,
             "months (calendar quarter)", B_INSPECTION_MEDIUM),
    Constant("inspection, 200 to < 2 000 lb with automatic leak detection", "none (waived)", "",
             B_ALD_WAIVER_MEDIUM),
    Constant("inspection, > 50 to < 200 lb", 12, "months (calendar year)", B_INSPECTION_SMALL),
    Constant("repair within", REPAIR_DAYS, "days of detection", B_REPAIR),
    Constant("annual report due", "1 March (large and medium facilities)", "", B_REPORT),
)


def _over_lb(mass_ng: int, pounds: Decimal) -> bool:
    return Decimal(mass_ng) > pounds * NG_PER_LB


def _excluded(reference: ReferenceLike, state: SystemState) -> tuple[str, str] | None:
    designation = resolve(reference, state.refrigerant)
    if designation is None:
        return (UNKNOWN_REFRIGERANT,
                f"refrigerant {state.refrigerant!r} is not in the reference data")
    figure = reference.gwp(designation, GWP_BASIS)
    gwp = Decimal(figure.value)
    if gwp < GWP_FROM:
        unlisted = getattr(figure, "unlisted", ())
        note = f" ({', '.join(unlisted)} not listed in AR4, counted as 0)" if unlisted else ""
        return OUT_OF_SCOPE, f"{designation} has GWP {gwp.normalize():f}{note}, under 150"
    if not _over_lb(state.full_charge_ng, SYSTEM_OVER_LB):
        return BELOW_THRESHOLD, (f"{designation}, {fmt_lb(state.full_charge_ng)}: not over 50 lb")
    return None


def size_of(full_charge_ng: int) -> str:
    """Size class of a covered system (or of a facility, by its largest system)."""
    if at_least_lb(full_charge_ng, LARGE_LB):
        return "large"
    if at_least_lb(full_charge_ng, MEDIUM_LB):
        return "medium"
    return "small"


def covered(reference: ReferenceLike, state: SystemState) -> bool:
    """Whether the program covers a system in a state (in service, GWP ≥ 150, over 50 lb)."""
    return state.in_service and _excluded(reference, state) is None


def cadence_of(reference: ReferenceLike, state: SystemState) -> Cadence | None:
    """The inspection cadence of a system in a state (95385).

    None when the program does not cover the system, and when an automatic leak detection
    system waives the inspections of a system of 200 lb or more (95385(a)(1)(B), (b)).
    """
    if not covered(reference, state):
        return None
    if at_least_lb(state.full_charge_ng, LARGE_LB):
        if state.detection_system:
            return None
        return Cadence("monthly leak inspection (≥ 2 000 lb, no automatic leak detection; "
                       "applies to a circuit inside an enclosed building)", B_INSPECTION_LARGE,
                       period=MONTH)
    if at_least_lb(state.full_charge_ng, MEDIUM_LB):
        if state.detection_system:
            return None
        return Cadence("quarterly leak inspection (200 to < 2 000 lb, no automatic leak "
                       "detection)", B_INSPECTION_MEDIUM, period=QUARTER)
    return Cadence("annual leak inspection (> 50 to < 200 lb)", B_INSPECTION_SMALL, period=YEAR)


_MONTHS = {MONTH: 1, QUARTER: 3, YEAR: 12}


def tier_of(history: SystemHistory, reference: ReferenceLike, as_of: date) -> Tier:
    """The system's size band and inspection interval on ``as_of`` (95385).

    Args:
        history: the system and its events.
        reference: the refrigerant tables.
        as_of: the day.
    """
    state = state_of(events_until(history, as_of), as_of)
    idle = tier_for_state(REGIME, state, B_SCOPE)
    if idle is not None:
        return idle
    excluded = _excluded(reference, state)
    if excluded is not None:
        return Tier(REGIME, excluded[0], None, B_SCOPE, excluded[1])
    cadence = cadence_of(reference, state)
    size = size_of(state.full_charge_ng)
    band = {"large": "≥ 2 000 lb", "medium": "200–2 000 lb", "small": "50–200 lb"}[size]
    designation = resolve(reference, state.refrigerant)
    if cadence is None:
        waiver = B_ALD_WAIVER_LARGE if size == "large" else B_ALD_WAIVER_MEDIUM
        return Tier(REGIME, band, None, waiver,
                    f"{designation}, {fmt_lb(state.full_charge_ng)}: automatic leak detection "
                    f"used, periodic inspections waived ({waiver.citation})")
    assert cadence.period is not None
    return Tier(REGIME, band, _MONTHS[cadence.period], cadence.basis,
                f"{designation}, {fmt_lb(state.full_charge_ng)}: {cadence.label}")


def _system_obligations(history: SystemHistory, reference: ReferenceLike,
                        as_of: date) -> list[Obligation]:
    events = events_until(history, as_of)
    if not any(e.kind is EventKind.IN_SERVICE for e in events):
        return []
    timeline = Timeline(events)
    system_id, site_code = history.system.id, history.site.code
    out: list[Obligation] = []

    def cadence_at(day: date) -> Cadence | None:
        return cadence_of(reference, timeline.state(day))

    checks = [e for e in events if e.kind is EventKind.CHECK]
    for seg in service_segments(events):
        start = max(seg.start_on, PROGRAM_FROM)
        if seg.end_on is not None and start >= seg.end_on:
            continue
        for w in calendar_windows(spans=[(start, None, seg.cause)], stop_on=seg.end_on,
                                  cadence_at=cadence_at,
                                  change_dates=[*timeline.dates, PROGRAM_FROM],
                                  checks=checks, as_of=as_of):
            detail = w.cadence.label
            if w.missed:
                detail += (f"; missed: no inspection from {w.opens_on.isoformat()} "
                           f"to {w.due_on.isoformat()}")
            out.append(Obligation(REGIME, ObligationKind.LEAK_INSPECTION, w.due_on, w.cadence.basis,
                                  w.status, system_id, site_code, w.opens_on, w.cause,
                                  None if w.met_by is None else w.met_by.id, detail))

    for leak in leak_found_events(events):
        if leak.performed_on < PROGRAM_FROM or not covered(reference, timeline.state(leak.performed_on)):
            continue
        due = leak.performed_on + timedelta(days=REPAIR_DAYS)
        met = first_event(events, (EventKind.REPAIR,), on_or_after=leak.performed_on)
        if met is None and retired_between(events, leak.performed_on, due):
            continue
        where = f" at {leak.location}" if leak.location else ""
        out.append(Obligation(REGIME, ObligationKind.REPAIR, due, B_REPAIR,
                              status_of(due, met, as_of), system_id, site_code, None, leak.id,
                              None if met is None else met.id,
                              f"repair the leak found{where} on {leak.performed_on.isoformat()} "
                              f"within {REPAIR_DAYS} days{late_note(due, met)}"))
    return out


def _largest_in_year(histories: Sequence[SystemHistory], reference: ReferenceLike, year: int,
                     as_of: date) -> tuple[int, str] | None:
    """(charge, tag) of the largest covered system in service at some time in ``year``."""
    start, end = date(year, 1, 1), min(date(year, 12, 31), as_of)
    best: tuple[int, str] | None = None
    for h in histories:
        events = events_until(h, end)
        st = state_of(events, end)
        if not st.in_service:
            if st.retired_on is None or st.retired_on <= start:
                continue
            st = state_of(events, st.retired_on - timedelta(days=1))
            if not st.in_service:
                continue
        if _excluded(reference, st) is not None:
            continue
        if best is None or st.full_charge_ng > best[0]:
            best = (st.full_charge_ng, h.system.tag)
    return best


def first_record_year(histories: Sequence[SystemHistory]) -> int | None:
    """The first calendar year the ledger holds a record of these systems, placement included.

    Every year from then on has its report (from the program's start). A later record never
    removes an earlier year's duty: a system placed in service long before its records were
    moved into the ledger has those years' reports listed until their filings are recorded.
    """
    years = [e.performed_on.year for h in histories for e in h.events]
    return min(years) if years else None


def _report_obligations(site_code: str, histories: Sequence[SystemHistory],
                        reference: ReferenceLike, as_of: date) -> list[Obligation]:
    # One report per calendar year of a large or medium facility, from the first year the
    # ledger holds records of the site; an unfiled one stays overdue after the next falls due
    # (as the 125 % report of 82.157(j) does). A filing recorded with `refledger report filed`
    # meets it (services.obligations.apply_filings).
    month, day = REPORT_DAY
    last = as_of.year - 1 if as_of <= date(as_of.year, month, day) else as_of.year
    first = first_record_year(histories)
    if first is None:
        return []
    out: list[Obligation] = []
    for year in range(max(first, PROGRAM_FROM.year), last + 1):
        largest = _largest_in_year(histories, reference, year, as_of)
        if largest is None or size_of(largest[0]) == "small":
            continue
        due = date(year + 1, month, day)
        out.append(Obligation(REGIME, ObligationKind.REPORT, due, B_REPORT,
                              status_of(due, None, as_of), None, site_code, None, None, None,
                              f"annual report for {year} ({size_of(largest[0])} facility: largest "
                              f"system {largest[1]}, {fmt_lb(largest[0])}); record the filing "
                              "with `refledger report filed`"))
    return out


def compute_obligations(
    histories: Sequence[SystemHistory], reference: ReferenceLike, as_of: date
) -> tuple[list[Obligation], list[Finding]]:
    """Leak inspections, repairs and facility reports under 17 CCR 95380 ff.

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
    by_site = sorted(histories, key=lambda h: h.site.code)
    for code, group in groupby(by_site, key=lambda h: h.site.code):
        obligations.extend(_report_obligations(code, list(group), reference, as_of))
    obligations.sort(key=obligation_sort_key)
    return obligations, findings
