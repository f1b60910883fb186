"""Regime ``us-ca``: California refrigerant management program, 17 CCR 95380 ff.

Implements, for systems holding more than 50 lb of a refrigerant with GWP 150 or more (AR4),
see docs/rules/us-ca.md for sources, marks and what is left out:

* 95385 leak inspections by system size: 2 000 lb or more quarterly with an automatic leak
  detection system, monthly without; 200 to under 2 000 lb quarterly; over 50 to under 200 lb
  annually. Read as one inspection per calendar month / quarter / year, due on its last day.
* 95386 repair within 14 days of finding a leak (the 45-day extensions are not modelled).
* Annual report by 1 March for large (largest system 2 000 lb or more) and medium (200 to
  1 999 lb) facilities; section number 95388 and the date are not checked (from memory).
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
    ObligationStatus,
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
REGIME_VERSION = "us-ca-1"  # bump when a rule or constant here changes
TITLE = "California refrigerant management program (17 CCR 95380 ff.)"
GWP_BASIS = "ar4"

B_SCOPE = Basis("17 CCR 95380 ff.", Confidence.SECONDARY,
                "systems with more than 50 lb of a refrigerant with GWP 150 or more (AR4)")
B_START = Basis("17 CCR 95380 ff.", Confidence.MEMORY,
                "program in force from 2011; earlier periods are not listed")
B_SIZE = Basis("17 CCR 95380 ff.", Confidence.SECONDARY,
               "facility size by its largest system: large 2 000 lb or more, medium 200 to "
               "1 999 lb, small over 50 to under 200 lb")
B_INSPECTION = Basis("17 CCR 95385", Confidence.CHECKED,
                     "2 000 lb or more quarterly with automatic leak detection, monthly without; "
                     "200 to under 2 000 lb quarterly; over 50 to under 200 lb annually "
                     "(calendar-period reading is ours)")
B_REPAIR = Basis("17 CCR 95386", Confidence.CHECKED,
                 "repair within 14 days of detection (45-day extensions not modelled)")
B_REPORT = Basis("17 CCR 95388", Confidence.MEMORY,
                 "annual report by 1 March for large and medium facilities; section number "
                 "and date not checked against the text")

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
    Constant("system charge over", SYSTEM_OVER_LB, "lb", B_SCOPE),
    Constant("medium size from", MEDIUM_LB, "lb", B_SIZE),
    Constant("large size from", LARGE_LB, "lb", B_SIZE),
    Constant("inspection, ≥ 2 000 lb with automatic leak detection", 3, "months (calendar "
             "quarter)", B_INSPECTION),
    Constant("inspection, ≥ 2 000 lb without automatic leak detection", 1, "months (calendar "
             "month)", B_INSPECTION),
    Constant("inspection, 200 to < 2 000 lb", 3, "months (calendar quarter)", B_INSPECTION),
    Constant("inspection, > 50 to < 200 lb", 12, "months (calendar year)", B_INSPECTION),
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


def cadence_of(reference: ReferenceLike, state: SystemState) -> Cadence | None:
    """The inspection cadence of a system in a state, or None when not covered (95385)."""
    if not state.in_service or _excluded(reference, state) is not None:
        return None
    if at_least_lb(state.full_charge_ng, LARGE_LB):
        if state.detection_system:
            return Cadence("quarterly leak inspection (≥ 2 000 lb, automatic leak detection)",
                           B_INSPECTION, period=QUARTER)
        return Cadence("monthly leak inspection (≥ 2 000 lb, no automatic leak detection)",
                       B_INSPECTION, period=MONTH)
    if at_least_lb(state.full_charge_ng, MEDIUM_LB):
        return Cadence("quarterly leak inspection (200 to < 2 000 lb)", B_INSPECTION,
                       period=QUARTER)
    return Cadence("annual leak inspection (> 50 to < 200 lb)", B_INSPECTION, period=YEAR)


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
    assert cadence is not None and cadence.period is not None
    size = size_of(state.full_charge_ng)
    band = {"large": "≥ 2 000 lb", "medium": "200–2 000 lb", "small": "50–200 lb"}[size]
    designation = resolve(reference, state.refrigerant)
    return Tier(REGIME, band, _MONTHS[cadence.period], B_INSPECTION,
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
        if leak.performed_on < PROGRAM_FROM or cadence_at(leak.performed_on) is None:
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


def _report_obligations(site_code: str, histories: Sequence[SystemHistory],
                        reference: ReferenceLike, as_of: date) -> list[Obligation]:
    # Only the next report is listed; a filing recorded with `refledger report filed` meets it
    # (services.obligations.apply_filings).
    month, day = REPORT_DAY
    year = as_of.year - 1 if as_of <= date(as_of.year, month, day) else as_of.year
    if year < PROGRAM_FROM.year:
        return []
    largest = _largest_in_year(histories, reference, year, as_of)
    if largest is None or size_of(largest[0]) == "small":
        return []
    due = date(year + 1, month, day)
    return [Obligation(REGIME, ObligationKind.REPORT, due, B_REPORT, ObligationStatus.OPEN, None,
                       site_code, None, None, None,
                       f"annual report for {year} ({size_of(largest[0])} facility: largest system "
                       f"{largest[1]}, {fmt_lb(largest[0])}); record the filing with "
                       "`refledger report filed`")]


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
