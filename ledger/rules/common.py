"""Helpers every regime shares: constants, masses, schedule walkers, obligation building.

Nothing here knows a regulation; the regime modules pass in their thresholds and citations.
Two schedule shapes exist (see docs/rules/README.md for the arithmetic):

* **interval schedules** (EU, GB): a check is due a number of calendar months after the
  last one (or after the system was placed in service or retrofitted). Each interval is one
  obligation: met by the first check that falls in it, otherwise overdue once past its due
  date, after which the next interval runs from that due date. A check done early restarts
  the interval from its own day.
* **calendar schedules** (California, US inspections after an exceedance): one check per
  calendar month, quarter or year, due on the period's last day.
"""

from __future__ import annotations

import calendar
from bisect import bisect_right
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass, replace
from datetime import date, timedelta
from decimal import ROUND_DOWN, ROUND_HALF_UP, Decimal
from typing import Any, Protocol

from ledger.domain.booking import Timeline, book
from ledger.domain.dates import add_months, quarter_end
from ledger.domain.leak_rate import ANNUALIZING, METHODS, NG_PER_KG, NG_PER_LB, LeakRate, leak_rates
from ledger.domain.records import (
    Application,
    Basis,
    Event,
    EventId,
    EventKind,
    Finding,
    FollowUpResult,
    Obligation,
    ObligationKind,
    ObligationStatus,
    Severity,
    SystemHistory,
    SystemState,
    Tier,
)
from ledger.domain.state import finds_leak
from ledger.errors import LedgerError

__all__ = [
    "BELOW_THRESHOLD",
    "EXEMPT",
    "NG_PER_KG",
    "NG_PER_LB",
    "MONTH",
    "NOT_IN_SERVICE",
    "OUT_OF_SCOPE",
    "QUARTER",
    "RETIRED",
    "UNKNOWN_REFRIGERANT",
    "YEAR",
    "Assessment",
    "Cadence",
    "Constant",
    "DetectionRule",
    "LeakRateRule",
    "ReferenceLike",
    "RegimeModule",
    "Segment",
    "Timeline",
    "Window",
    "at_least_lb",
    "calendar_windows",
    "cause_on",
    "detection_triggers",
    "events_until",
    "first_event",
    "fmt_kg",
    "fmt_lb",
    "fmt_t",
    "history_findings",
    "interval_windows",
    "kg_of",
    "late_note",
    "leak_rate_obligations",
    "leak_found_events",
    "obligation_sort_key",
    "period_end",
    "periodic_check_obligations",
    "resolve",
    "retired_between",
    "service_segments",
    "status_of",
    "system_source",
    "tier_for_state",
]

# Tier bands that are not a band of any rule; `compute_all` uses OUT_OF_SCOPE to tell that no
# regime of a site covers a system.
OUT_OF_SCOPE = "out of scope"
EXEMPT = "exempt"
BELOW_THRESHOLD = "below threshold"
NOT_IN_SERVICE = "not in service"
RETIRED = "retired"
UNKNOWN_REFRIGERANT = "unknown refrigerant"

# Calendar periods of calendar schedules.
MONTH = "month"
QUARTER = "quarter"
YEAR = "year"


@dataclass(frozen=True, slots=True)
class Constant:
    """One threshold, interval or date a regime uses, with where it comes from.

    `refledger rules` prints these, so every number a rule uses is visible with its basis.
    """

    name: str  # e.g. "leak-check threshold (Annex I gases)"
    value: Decimal | int | str | date
    unit: str  # e.g. "t CO2e", "months", "lb", "%", "date"
    basis: Basis


class ReferenceLike(Protocol):
    """What the rules use of `ledger.reference.Reference` (tests may pass a small one)."""

    @property
    def components(self) -> Mapping[str, Any]: ...

    def lookup(self, name: str) -> Any: ...

    def gwp(self, designation: str, basis: str) -> Any: ...

    def mass_fraction_where(self, designation: str, eu_annex: str) -> Decimal: ...

    def chem_classes(self, designation: str) -> frozenset[str]: ...


class RegimeModule(Protocol):
    """The surface every `ledger.rules.<regime>` module offers."""

    REGIME_VERSION: str
    TITLE: str
    GWP_BASIS: str
    CONSTANTS: tuple[Constant, ...]

    def tier_of(self, history: SystemHistory, reference: Any, as_of: date) -> Tier: ...

    def compute_obligations(
        self, histories: Sequence[SystemHistory], reference: Any, as_of: date
    ) -> tuple[list[Obligation], list[Finding]]: ...


# --- masses ---------------------------------------------------------------------------------


def kg_of(mass_ng: int) -> Decimal:
    """Exact kilograms of a nanogram mass."""
    return Decimal(mass_ng) / NG_PER_KG


def at_least_lb(mass_ng: int, pounds: Decimal | int) -> bool:
    """True when a mass is at least ``pounds`` lb, compared exactly in nanograms.

    50 lb is 22 679 618 500 000 ng, so 22 679 618 499 999 ng is below it.
    """
    return Decimal(mass_ng) >= Decimal(pounds) * NG_PER_LB


def _truncate(value: Decimal, places: int) -> str:
    # Truncated, never rounded up, so a value just under a threshold never prints as the
    # threshold itself (4.9999 t shows as 4.999 t, not 5.000 t).
    return str(value.quantize(Decimal(1).scaleb(-places), rounding=ROUND_DOWN))


def fmt_t(tonnes: Decimal) -> str:
    """Tonnes CO2e for a sentence: three decimals, truncated."""
    return f"{_truncate(tonnes, 3)} t CO2e"


def fmt_kg(kilograms: Decimal) -> str:
    """Kilograms for a sentence: three decimals, truncated."""
    return f"{_truncate(kilograms, 3)} kg"


def fmt_lb(mass_ng: int) -> str:
    """Pounds of a nanogram mass for a sentence: two decimals, truncated.

    A mass typed in pounds is exact, but one recorded before migration 0004 was kept to the
    nearest milligram (half a milligram is about 1.1e-6 lb), so the value is first rounded to
    5 decimals: 620 lb shows as 620.00 lb, not
    619.99 lb, while a mass really below a threshold still never shows as the threshold.
    """
    pounds = (Decimal(mass_ng) / NG_PER_LB).quantize(Decimal("0.00001"), rounding=ROUND_HALF_UP)
    return f"{_truncate(pounds, 2)} lb"


# --- reference ------------------------------------------------------------------------------


def resolve(reference: ReferenceLike, name: str | None) -> str | None:
    """The reference designation of a refrigerant name, or None if unknown or missing."""
    if not name:
        return None
    try:
        return str(reference.lookup(name).designation)
    except (LedgerError, LookupError, ValueError):
        return None


# --- events and state -----------------------------------------------------------------------


def events_until(history: SystemHistory, as_of: date) -> tuple[Event, ...]:
    """The events that count (voids applied) up to and including ``as_of``, in date order
    (``book(history).until(as_of).events``; kept for callers that want only the events)."""
    return book(history).until(as_of).events


@dataclass(frozen=True, slots=True)
class Segment:
    """A stretch of service with one refrigerant: from placing in service or a retrofit to
    the next retrofit, retirement or re-commissioning (``end_on``, exclusive), or open."""

    start_on: date
    cause: EventId
    end_on: date | None


def service_segments(events: Sequence[Event]) -> list[Segment]:
    """Split a system's effective events into service segments (see `Segment`)."""
    segments: list[Segment] = []
    current: tuple[date, EventId] | None = None
    for e in events:
        if e.kind in (EventKind.IN_SERVICE, EventKind.RETROFIT):
            if e.kind is EventKind.RETROFIT and current is None:
                continue  # a retrofit of a system not in service starts nothing
            if current is not None:
                segments.append(Segment(current[0], current[1], e.performed_on))
            current = (e.performed_on, e.id)
        elif e.kind is EventKind.RETIRE and current is not None:
            segments.append(Segment(current[0], current[1], e.performed_on))
            current = None
    if current is not None:
        segments.append(Segment(current[0], current[1], None))
    return segments


def first_event(
    events: Iterable[Event],
    kinds: Iterable[EventKind],
    *,
    on_or_after: date | None = None,
    after: Event | None = None,
    before: date | None = None,
) -> Event | None:
    """The first event (date order) of some kinds in a window.

    Args:
        events: effective events in date order.
        kinds: the kinds that count.
        on_or_after: earliest day that counts.
        after: only events after this one in (date, id) order.
        before: only events strictly before this day.
    """
    wanted = frozenset(kinds)
    for e in events:
        if e.kind not in wanted:
            continue
        if on_or_after is not None and e.performed_on < on_or_after:
            continue
        if after is not None and (e.performed_on, e.id) <= (after.performed_on, after.id):
            continue
        if before is not None and e.performed_on >= before:
            continue
        return e
    return None


def cause_on(events: Sequence[Event], day: date) -> EventId | None:
    """The last event on a day (the one that changed things), or None if nothing happened."""
    found = None
    for e in events:
        if e.performed_on == day:
            found = e.id
        elif e.performed_on > day:
            break
    return found


def leak_found_events(events: Iterable[Event]) -> list[Event]:
    """Checks that found a leak, and follow-up checks that failed (the repair did not hold)."""
    return [e for e in events if finds_leak(e)]


def retired_between(events: Sequence[Event], start: date, due: date) -> date | None:
    """The first retirement on or after ``start`` and on or before ``due``, if any.

    An obligation still unmet when its system is retired on or before its due date is
    dropped: a retired system owes nothing after its retirement.
    """
    for e in events:
        if e.kind is EventKind.RETIRE and start <= e.performed_on <= due:
            return e.performed_on
    return None


# --- statuses -------------------------------------------------------------------------------


def status_of(due_on: date, met: Event | None, as_of: date) -> ObligationStatus:
    """MET when an event met it; else OVERDUE once ``as_of`` is past the due date; else OPEN.

    An obligation due on ``as_of`` itself is still open that day.
    """
    if met is not None:
        return ObligationStatus.MET
    return ObligationStatus.OVERDUE if due_on < as_of else ObligationStatus.OPEN


def late_note(due_on: date, met: Event | None) -> str:
    """A clause saying the meeting event came after the due date, or an empty string."""
    if met is None or met.performed_on <= due_on:
        return ""
    days = (met.performed_on - due_on).days
    return f"; done {met.performed_on.isoformat()}, {days} day{'s' if days != 1 else ''} late"


# --- schedule walkers -----------------------------------------------------------------------


@dataclass(frozen=True, slots=True)
class Cadence:
    """How often a periodic duty recurs while a rule applies, and how to describe it.

    Exactly one of ``months`` (interval from the last check) or ``period`` (calendar period:
    MONTH, QUARTER, YEAR) is set.
    """

    label: str  # sentence used as the obligation's detail, e.g. "12-month leak check (...)"
    basis: Basis
    months: int | None = None
    period: str | None = None


@dataclass(frozen=True, slots=True)
class Window:
    """One required occurrence of a periodic duty."""

    opens_on: date  # first day a meeting event counts
    due_on: date
    status: ObligationStatus
    met_by: Event | None
    cause: EventId | None
    cadence: Cadence
    missed: bool  # past due without a meeting event in the window
    carried_from: date | None = None  # due date under earlier law, carried to emit_from


def _next_applicable(
    changes: Sequence[date],
    after: date,
    limit: date | None,
    as_of: date,
    cadence_at: Callable[[date], Cadence | None],
    want_months: bool,
) -> date | None:
    for d in changes:
        if d <= after:
            continue
        if d > as_of or (limit is not None and d >= limit):
            return None
        c = cadence_at(d)
        if c is not None and (c.months is not None if want_months else c.period is not None):
            return d
    return None


def interval_windows(
    *,
    segments: Sequence[Segment],
    cadence_at: Callable[[date], Cadence | None],
    change_dates: Iterable[date],
    checks: Sequence[Event],
    events: Sequence[Event],
    as_of: date,
    emit_from: date | None = None,
) -> list[Window]:
    """Walk an interval schedule ("every N months from the last check") through segments.

    Within a segment the first interval runs from the segment's start. The interval in
    force is taken from ``cadence_at``; a change of cadence inside a running interval
    (detection system installed or removed, full charge revised) recomputes its due date
    from the same starting day, and a cadence of None (exempt, out of scope) ends it without
    an obligation. A window is met by the first check strictly after its start and on or
    before its due date. An unmet window past due is overdue and the next one runs from its
    due date. Windows still unmet at the end of the segment (retrofit, retirement) are
    dropped, as is anything after the open window that ``as_of`` falls in.

    Windows due before ``emit_from`` belong to earlier law and are not returned, except
    one: when the system was already behind on that day (its last earlier window missed and
    no check since), that window is returned due on ``emit_from`` with ``carried_from`` set,
    so a system in arrears does not look up to date under the new rule.

    Args:
        segments: service segments (or any stretches during which the duty can apply).
        cadence_at: the cadence on a day, or None when the duty does not apply that day.
        change_dates: days on which the cadence may change.
        checks: the events that meet the duty, in date order.
        events: all effective events (for naming the cause of a window).
        as_of: the day of evaluation; events after it must already be left out.
        emit_from: windows due before this day are walked but not returned (earlier law).
    Returns:
        The windows in date order.
    """
    changes = sorted(set(change_dates))
    out: list[Window] = []
    for seg in segments:
        walked = _walk_segment(seg, cadence_at, changes, checks, events, as_of)
        if emit_from is None:
            out.extend(walked)
            continue
        earlier = [w for w in walked if w.due_on < emit_from]
        last = earlier[-1] if earlier else None
        if (
            last is not None
            and last.missed
            and (seg.end_on is None or seg.end_on > emit_from)
            and cadence_at(emit_from) is not None
            and not any(last.due_on < c.performed_on < emit_from for c in checks)
        ):
            status = status_of(emit_from, None, as_of)
            out.append(replace(last, due_on=emit_from, status=status,
                               missed=status is ObligationStatus.OVERDUE,
                               carried_from=last.due_on))
        out.extend(w for w in walked if w.due_on >= emit_from)
    return out


def _walk_segment(
    seg: Segment,
    cadence_at: Callable[[date], Cadence | None],
    changes: Sequence[date],
    checks: Sequence[Event],
    events: Sequence[Event],
    as_of: date,
) -> list[Window]:
    out: list[Window] = []
    anchor, cause, end = seg.start_on, seg.cause, seg.end_on
    check_days = [c.performed_on for c in checks]  # both lists are in date order: bisect into them
    while anchor <= as_of:
        cadence = cadence_at(anchor)
        if cadence is None or cadence.months is None:
            nxt = _next_applicable(changes, anchor, end, as_of, cadence_at, True)
            if nxt is None:
                break
            anchor, cause = nxt, cause_on(events, nxt)
            continue
        months: int = cadence.months
        due = add_months(anchor, months)
        lost: date | None = None
        for d in changes[bisect_right(changes, anchor):]:
            if d > due or (end is not None and d >= end):
                break
            changed = cadence_at(d)
            if changed is None or changed.months is None:
                lost = d
                break
            if changed.months != months:
                due = add_months(anchor, changed.months)
            cadence, months = changed, changed.months
        met = None
        for c in checks[bisect_right(check_days, anchor):]:
            if (
                c.performed_on > due
                or (lost is not None and c.performed_on >= lost)
                or (end is not None and c.performed_on >= end)
            ):
                break
            met = c
            break
        opens = anchor + timedelta(days=1)
        if met is not None:
            out.append(Window(opens, due, ObligationStatus.MET, met, cause, cadence, False))
            anchor, cause = met.performed_on, met.id
            continue
        if lost is not None:
            anchor, cause = lost, cause_on(events, lost)
            continue
        if end is not None and due >= end:
            break
        if due < as_of:
            out.append(Window(opens, due, ObligationStatus.OVERDUE, None, cause, cadence, True))
            anchor = due
            continue
        out.append(Window(opens, due, ObligationStatus.OPEN, None, cause, cadence, False))
        break
    return out


def period_end(day: date, period: str) -> date:
    """Last day of the calendar month, quarter or year holding ``day``."""
    if period == MONTH:
        return date(day.year, day.month, calendar.monthrange(day.year, day.month)[1])
    if period == QUARTER:
        return quarter_end(day)
    if period == YEAR:
        return date(day.year, 12, 31)
    raise ValueError(f"unknown calendar period {period!r}")


def calendar_windows(
    *,
    spans: Sequence[tuple[date, date | None, EventId | None]],
    stop_on: date | None,
    cadence_at: Callable[[date], Cadence | None],
    change_dates: Iterable[date],
    checks: Sequence[Event],
    as_of: date,
) -> list[Window]:
    """Walk a calendar schedule: one check per calendar period while a duty applies.

    The first window runs from the span's first day to the end of its calendar period; each
    next window is the following whole period, its cadence read on its first day. A window
    is met by the first check inside it, is overdue once its last day is past, and is
    dropped if still unmet when ``stop_on`` (retrofit, retirement) falls inside it. When the
    period holding ``as_of`` is already met, the next period is listed too (open).

    Args:
        spans: (first day, last day a window may start or None, cause) while the duty
            applies; sorted and non-overlapping.
        stop_on: end of the service segment (exclusive), if any.
        cadence_at: the cadence on a day (its ``period``), or None when the duty lapses.
        change_dates: days on which the cadence may change.
        checks: the events that meet the duty, in date order.
        as_of: the day of evaluation.
    Returns:
        The windows in date order.
    """
    changes = sorted(set(change_dates))
    out: list[Window] = []
    next_free: date | None = None
    ahead = False  # one window starting after as_of is shown, so the next duty is visible
    for start, last_start, cause in spans:
        s = start if next_free is None else max(start, next_free)
        while True:
            if last_start is not None and s > last_start:
                break
            if s > as_of:
                if ahead:
                    break
                ahead = True
            if stop_on is not None and s >= stop_on:
                break
            cadence = cadence_at(s)
            if cadence is None or cadence.period is None:
                limit = stop_on
                if last_start is not None:
                    limit = last_start + timedelta(days=1) if limit is None else min(
                        limit, last_start + timedelta(days=1)
                    )
                nxt = _next_applicable(changes, s, limit, as_of, cadence_at, False)
                if nxt is None:
                    break
                s = nxt
                continue
            e = period_end(s, cadence.period)
            met = next((c for c in checks if s <= c.performed_on <= e), None)
            if met is not None and stop_on is not None and met.performed_on >= stop_on:
                met = None
            if met is not None:
                status = ObligationStatus.MET
            elif stop_on is not None and e >= stop_on:
                break
            elif e < as_of:
                status = ObligationStatus.OVERDUE
            else:
                status = ObligationStatus.OPEN
            missed = status is ObligationStatus.OVERDUE
            out.append(Window(s, e, status, met, cause, cadence, missed))
            next_free = e + timedelta(days=1)
            if status is ObligationStatus.OPEN:
                break
            s = next_free
    return out


def detection_triggers(
    checkpoints: Iterable[date],
    required_at: Callable[[date], bool],
    present_at: Callable[[date], bool],
) -> list[tuple[date, date | None]]:
    """When a leak detection system becomes due, and when the need lapses.

    A trigger is a day on which the system starts to need a detection system, or on which a
    needed one is removed. Its lapse is the next checkpoint on which the need ends.

    Args:
        checkpoints: days on which need or presence may change, any order.
        required_at: whether the rule asks for a detection system on a day.
        present_at: whether one is fitted on a day.
    Returns:
        (trigger day, lapse day or None) pairs in date order.
    """
    days = sorted(set(checkpoints))
    out: list[tuple[date, date | None]] = []
    prev_req = prev_pres = False
    for d in days:
        req, pres = required_at(d), present_at(d)
        if req and (not prev_req or (prev_pres and not pres)):
            out.append((d, None))
        if not req and prev_req and out and out[-1][1] is None:
            out[-1] = (out[-1][0], d)
        prev_req, prev_pres = req, pres
    return out


# --- findings, tiers, sorting ---------------------------------------------------------------


def system_source(history: SystemHistory) -> str:
    """How findings name a system: ``site/tag``."""
    return f"{history.site.code}/{history.system.tag}"


def history_findings(
    history: SystemHistory, reference: ReferenceLike, as_of: date
) -> list[Finding]:
    """Data problems that stop a schedule being computed; worded without a regime so that
    `compute_all` can drop the copies several regimes of one site produce."""
    events = events_until(history, as_of)
    source = system_source(history)
    found: list[Finding] = []
    if events and not any(e.kind is EventKind.IN_SERVICE for e in events):
        found.append(Finding(source, "no in-service event recorded: no schedule can be computed",
                             Severity.WARNING, "events"))
    seen: set[str] = set()
    for e in events:
        if e.kind not in (EventKind.IN_SERVICE, EventKind.RETROFIT):
            continue
        if e.refrigerant and e.refrigerant not in seen:
            seen.add(e.refrigerant)
            if resolve(reference, e.refrigerant) is None:
                found.append(Finding(
                    source,
                    f"refrigerant {e.refrigerant!r} (event {e.id}) is not in the reference "
                    "data: no regime can tier this system",
                    Severity.WARNING, "refrigerant"))
        if e.kind is EventKind.IN_SERVICE and not e.charge_ng:
            found.append(Finding(source, f"full charge not recorded (event {e.id}): the system "
                                 "is tiered as holding nothing", Severity.WARNING, "charge"))
    return found


def tier_for_state(
    regime: str, state: SystemState, basis: Basis
) -> Tier | None:
    """The tier of a system that is not in service (never placed, or retired), else None."""
    if state.in_service:
        return None
    if state.retired_on is not None:
        return Tier(regime, RETIRED, None, basis,
                    f"retired on {state.retired_on.isoformat()}: no further duties; history kept")
    return Tier(regime, NOT_IN_SERVICE, None, basis, "not placed in service on this day")


def obligation_sort_key(o: Obligation) -> tuple[Any, ...]:
    """Earliest due first, then a total order so results never depend on input order."""
    return (
        o.due_on,
        o.site_code or "",
        -1 if o.system_id is None else o.system_id,
        o.regime,
        o.kind.value,
        -1 if o.caused_by is None else o.caused_by,
        o.detail,
    )


# --- the periodic-check engine shared by the EU and GB regimes ------------------------------


@dataclass(frozen=True, slots=True)
class Assessment:
    """What a periodic-check regime concludes about a system on one day."""

    band: str  # e.g. "5–50 t CO2e", EXEMPT, OUT_OF_SCOPE
    reason: str  # one sentence with the figures behind the band
    basis: Basis  # where the band comes from
    cadence: Cadence | None  # the periodic leak check, None where none applies
    in_scope: bool = True  # False: the refrigerant is not covered at all (no repair duty)
    detection_required: bool = False
    repair_days: int = 14
    repair_basis: Basis | None = None
    repair_rule: str = ""  # how the repair deadline reads in a sentence
    follow_up_basis: Basis | None = None


@dataclass(frozen=True, slots=True)
class DetectionRule:
    """How a periodic-check regime handles leak detection systems."""

    basis: Basis  # where the duty to fit one comes from
    due_from: date  # fitting is never due before this day (the rule's date of application)
    check_months: int  # the detection system itself is checked this often
    check_basis: Basis


def periodic_check_obligations(
    history: SystemHistory,
    as_of: date,
    *,
    regime: str,
    assess: Callable[[SystemState, date], Assessment],
    emit_from: date,
    extra_change_dates: Iterable[date],
    follow_up_earliest_days: int,
    detection: DetectionRule,
) -> list[Obligation]:
    """Leak checks, repairs, follow-up checks and detection-system duties of one system.

    Args:
        history: the system and its events.
        as_of: the day of evaluation.
        regime: the regime code put on each obligation.
        assess: the regime's verdict on an in-service state on a day.
        emit_from: periodic windows due before this day are not returned (earlier law).
        extra_change_dates: days on which the verdict may change without an event (a rule
            taking effect).
        follow_up_earliest_days: days after a repair before a follow-up check counts.
        detection: the detection-system rule.
    Returns:
        The obligations, unsorted.
    """
    events = events_until(history, as_of)
    if not any(e.kind is EventKind.IN_SERVICE for e in events):
        return []
    timeline = Timeline(events)
    cache: dict[date, Assessment | None] = {}

    def assessment_at(day: date) -> Assessment | None:
        if day not in cache:
            st = timeline.state(day)
            cache[day] = assess(st, day) if st.in_service else None
        return cache[day]

    extras = [d for d in extra_change_dates if d <= as_of]
    changes = [*timeline.dates, *extras]
    system_id, site_code = history.system.id, history.site.code
    out: list[Obligation] = []
    by_id = {e.id: e for e in events}
    # A check recorded without a certificate valid for the work does not meet a duty (EU
    # 2024/573 Art 4(5), 517/2014 Art 3(3) and 10: checks by certified persons); it is named
    # on the duty it did not meet.
    checks = [e for e in events if e.kind is EventKind.CHECK and e.certified]
    follow_ups = [e for e in events if e.kind is EventKind.FOLLOW_UP and e.certified]
    uncertified = [e for e in events if e.kind in (EventKind.CHECK, EventKind.FOLLOW_UP) and not e.certified]

    def add(kind: ObligationKind, due: date, basis: Basis, met: Event | None, cause: EventId | None,
            detail: str, earliest: date | None = None, opens: date | None = None) -> None:
        if met is None and uncertified:
            detail += uncertified_note(uncertified, kind, opens or earliest, max(due, as_of))
        if due < emit_from:
            # Due under the earlier law: listed only if still outstanding when this rule
            # applied (not met, system in service, no leak check since that re-examined the
            # system), and then due on that day.
            if met is not None and met.performed_on < emit_from:
                return
            if not timeline.state(emit_from).in_service:
                return
            caused_on = by_id[cause].performed_on if cause in by_id else due
            if any(caused_on < c.performed_on < emit_from for c in checks):
                return
            detail += (f"; due {due.isoformat()} under the earlier law, still outstanding on "
                       f"{emit_from.isoformat()}")
            due = emit_from
        detail += late_note(due, met)
        out.append(Obligation(regime, kind, due, basis, status_of(due, met, as_of), system_id,
                              site_code, earliest, cause, None if met is None else met.id, detail))

    def window_detail(w: Window, what: str) -> str:
        detail = w.cadence.label
        if w.missed:
            detail += f"; missed: no {what} from {w.opens_on.isoformat()} to {w.due_on.isoformat()}"
        if w.carried_from is not None:
            detail += (f"; due {w.carried_from.isoformat()} under the earlier law and still "
                       "outstanding when this rule took effect")
        return detail

    # Periodic leak checks.
    def check_cadence(day: date) -> Cadence | None:
        a = assessment_at(day)
        return None if a is None else a.cadence

    for w in interval_windows(segments=service_segments(events), cadence_at=check_cadence,
                              change_dates=changes, checks=checks, events=events, as_of=as_of,
                              emit_from=emit_from):
        add(ObligationKind.LEAK_CHECK, w.due_on, w.cadence.basis, w.met_by, w.cause,
            window_detail(w, "leak check"), opens=w.opens_on)

    # Repairs of found leaks.
    for leak in leak_found_events(events):
        a = assessment_at(leak.performed_on)
        if a is None or not a.in_scope or a.repair_basis is None:
            continue
        due = leak.performed_on + timedelta(days=a.repair_days)
        met = first_event(events, (EventKind.REPAIR,), on_or_after=leak.performed_on)
        if met is None and retired_between(events, leak.performed_on, due):
            continue
        what = "leak check" if leak.kind is EventKind.CHECK else "failed follow-up check"
        where = f" at {leak.location}" if leak.location else ""
        add(ObligationKind.REPAIR, due, a.repair_basis, met, leak.id,
            f"repair the leak found{where} by the {what} of {leak.performed_on.isoformat()} "
            f"({a.repair_rule or f'within {a.repair_days} days'})")

    # Follow-up checks after repairs: only for equipment that must be leak-checked (2024/573
    # Art 4(5) "für die gemäß Artikel 5 Absatz 1 eine Dichtheitskontrolle vorgeschrieben ist";
    # 517/2014 Art 3(3) "Cuando un aparato deba someterse a control de fugas"). The repair duty
    # above covers every in-scope system.
    for repair in (e for e in events if e.kind is EventKind.REPAIR):
        a = assessment_at(repair.performed_on)
        if a is None or not a.in_scope or a.follow_up_basis is None or a.cadence is None:
            continue
        earliest = repair.performed_on + timedelta(days=follow_up_earliest_days)
        due = add_months(repair.performed_on, 1)
        met = first_event(follow_ups, (EventKind.FOLLOW_UP,), on_or_after=earliest, after=repair)
        if met is None and retired_between(events, repair.performed_on, due):
            continue
        add(ObligationKind.FOLLOW_UP_CHECK, due, a.follow_up_basis, met, repair.id,
            f"follow-up check of the repair of {repair.performed_on.isoformat()}", earliest)

    # Leak detection system: fitted where required, and checked.
    def required_at(day: date) -> bool:
        a = assessment_at(day)
        return a is not None and a.detection_required

    def present_at(day: date) -> bool:
        return timeline.state(day).detection_system

    ons = [e for e in events if e.kind is EventKind.DETECTION_ON]
    for trigger, lapse in detection_triggers(changes, required_at, present_at):
        due = max(trigger, detection.due_from)
        if present_at(trigger):
            met = [e for e in ons if e.performed_on <= trigger][-1]
        else:
            met = first_event(ons, (EventKind.DETECTION_ON,), on_or_after=trigger, before=lapse)
        if met is None and (
            (lapse is not None and lapse <= due) or retired_between(events, trigger, due)
        ):
            continue
        add(ObligationKind.DETECTION_SYSTEM, due, detection.basis, met, cause_on(events, trigger),
            f"fit a leak detection system (required from {trigger.isoformat()})")

    def detection_check_cadence(day: date) -> Cadence | None:
        if not (required_at(day) and present_at(day)):
            return None
        return Cadence(f"{detection.check_months}-month check of the leak detection system",
                       detection.check_basis, months=detection.check_months)

    spans: list[Segment] = []
    for on in ons:
        off = first_event(events, (EventKind.DETECTION_OFF, EventKind.RETIRE), after=on)
        if spans and spans[-1].end_on is None:
            continue  # already fitted: a second "installed" event does not restart anything
        spans.append(Segment(on.performed_on, on.id, None if off is None else off.performed_on))
    detection_checks = [e for e in events if e.kind is EventKind.DETECTION_CHECK]
    for w in interval_windows(segments=_merge_spans(spans), cadence_at=detection_check_cadence,
                              change_dates=changes, checks=detection_checks, events=events,
                              as_of=as_of, emit_from=emit_from):
        add(ObligationKind.DETECTION_SYSTEM_CHECK, w.due_on, w.cadence.basis, w.met_by, w.cause,
            window_detail(w, "check"))
    return out


UNCERTIFIED = "done by an uncertified person"


def uncertified_note(uncertified: Sequence[Event], kind: ObligationKind, opens: date | None, until: date) -> str:
    """A clause naming the checks in a duty's window that were done without a valid certificate.

    Only leak-check and follow-up-check duties are met by checks; the window runs from the
    day it opens to ``until`` (its due date, or the day of evaluation for one overdue).
    """
    wanted = EventKind.CHECK if kind is ObligationKind.LEAK_CHECK else EventKind.FOLLOW_UP
    if kind not in (ObligationKind.LEAK_CHECK, ObligationKind.FOLLOW_UP_CHECK):
        return ""
    hits = [e for e in uncertified if e.kind is wanted and (opens is None or e.performed_on >= opens)
            and e.performed_on <= until]
    if not hits:
        return ""
    days = ", ".join(f"{e.performed_on.isoformat()} (event {e.id})" for e in hits)
    return f"; {UNCERTIFIED} on {days}: it does not count"


def _merge_spans(spans: Sequence[Segment]) -> list[Segment]:
    # Drop spans that start inside an earlier one (several "installed" events in a row).
    merged: list[Segment] = []
    for s in spans:
        if merged and (merged[-1].end_on is None or s.start_on < merged[-1].end_on):
            continue
        merged.append(s)
    return merged


# --- the leak-rate engine shared by the US regimes ------------------------------------------


@dataclass(frozen=True, slots=True)
class LeakRateRule:
    """What a US regime does when a leak rate exceeds its threshold."""

    regime: str
    applies_from: date  # additions before this day open nothing
    in_scope: Callable[[SystemState, date], bool]  # the appliance is covered on a day
    threshold_basis: Basis
    repair_days: int
    repair_basis: Basis
    verification_days: int  # follow-up verification test within this many days
    initial_basis: Basis
    follow_up_basis: Basis
    inspection_basis: Basis
    inspection_quarterly_lb: Decimal  # commercial / IPR at or above this: quarterly
    inspection_months: int  # inspections continue this long after the last exceedance
    report_percent: Decimal  # this share of the full charge added in a calendar year
    report_basis: Basis


_FIXES = (EventKind.REPAIR, EventKind.RETROFIT, EventKind.RETIRE)
_QUARTERLY_APPLICATIONS = frozenset(
    {Application.COMMERCIAL_REFRIGERATION, Application.INDUSTRIAL_PROCESS}
)


def leak_rate_obligations(
    history: SystemHistory, as_of: date, rule: LeakRateRule
) -> tuple[list[Obligation], list[Finding]]:
    """Repairs, verification tests, inspections and reports opened by leak-rate exceedances.

    Each addition's leak rate is computed by the site's method (`ledger.domain.leak_rate`).
    An exceedance opens a repair due ``repair_days`` later; exceedances before that repair
    (or a retrofit or retirement, which also end the duty) belong to the same episode. A
    repair is followed by an initial verification test (due by the repair deadline) and,
    once that passes, a follow-up verification test within ``verification_days``. Leak
    inspections are due each calendar quarter (commercial refrigeration and industrial
    process refrigeration at or above ``inspection_quarterly_lb``) or calendar year (others)
    from the exceedance until ``inspection_months`` after the last one. Additions reaching
    ``report_percent`` of the full charge in a calendar year call for a report by 1 March of
    the next year.

    Args:
        history: the system, its site (which names the leak-rate method) and events.
        as_of: the day of evaluation.
        rule: the regime's constants and citations.
    Returns:
        (obligations unsorted, findings).
    """
    events = events_until(history, as_of)
    if not any(e.kind is EventKind.IN_SERVICE for e in events):
        return [], []
    source = system_source(history)
    findings: list[Finding] = []
    method = history.site.leak_rate_method
    if method not in METHODS:
        findings.append(Finding(source, f"site {history.site.code}: leak-rate method {method!r} "
                                f"is not one of {', '.join(METHODS)}; annualizing used",
                                Severity.WARNING, "leak_rate_method"))
        method = ANNUALIZING
    timeline = Timeline(events)
    system_id, site_code = history.system.id, history.site.code
    out: list[Obligation] = []

    def covered(day: date) -> bool:
        st = timeline.state(day)
        return st.in_service and day >= rule.applies_from and rule.in_scope(st, day)

    def add(kind: ObligationKind, due: date, basis: Basis, met: Event | None, cause: EventId | None,
            detail: str, earliest: date | None = None) -> None:
        out.append(Obligation(rule.regime, kind, due, basis, status_of(due, met, as_of), system_id,
                              site_code, earliest, cause, None if met is None else met.id, detail))

    rows = [r for r in leak_rates(SystemHistory(history.site, history.system, events), method)
            if r.counted and covered(r.added_on)]
    exceeded = [r for r in rows if r.exceeded]

    # Episodes: exceedances until the next repair, retrofit or retirement.
    episodes: list[list[LeakRate]] = []
    for r in exceeded:
        if episodes:
            start = episodes[-1][0].added_on
            if first_event(events, _FIXES, on_or_after=start, before=r.added_on) is None:
                episodes[-1].append(r)
                continue
        episodes.append([r])
    for episode in episodes:
        first = episode[0]
        x = first.added_on
        due = x + timedelta(days=rule.repair_days)
        fix = first_event(events, _FIXES, on_or_after=x)
        said = (f"leak rate {_pct(first.percent)} % over the "
                f"{first.threshold_percent.normalize():f} % "
                f"threshold at the addition of {x.isoformat()} ({method} method)")
        how = "" if fix is None or fix.kind is EventKind.REPAIR else f" (ended by {fix.kind.value})"
        add(ObligationKind.REPAIR, due, rule.repair_basis, fix, first.event_id,
            f"repair: {said}{how}{late_note(due, fix)}")
        if fix is not None and fix.kind is not EventKind.REPAIR:
            continue
        initial = None if fix is None else first_event(events, (EventKind.FOLLOW_UP,), after=fix)
        if initial is None and retired_between(events, x, due):
            continue
        add(ObligationKind.VERIFICATION_TEST, due, rule.initial_basis, initial, first.event_id,
            f"initial verification test of the repair after the exceedance of {x.isoformat()}"
            f"{late_note(due, initial)}", x)
        if initial is None:
            continue
        if initial.result == FollowUpResult.FAIL:
            findings.append(Finding(source, f"initial verification test {initial.id} of "
                                    f"{initial.performed_on.isoformat()} failed: the repair is "
                                    "not verified; repair again and re-test",
                                    Severity.WARNING, "result"))
            continue
        follow_due = initial.performed_on + timedelta(days=rule.verification_days)
        follow = first_event(events, (EventKind.FOLLOW_UP,), after=initial)
        if follow is None and retired_between(events, initial.performed_on, follow_due):
            continue
        add(ObligationKind.VERIFICATION_TEST, follow_due, rule.follow_up_basis, follow, initial.id,
            f"follow-up verification test, within {rule.verification_days} days of the initial "
            f"test of {initial.performed_on.isoformat()}{late_note(follow_due, follow)}",
            initial.performed_on)

    # Leak inspections after exceedances, by calendar period.
    def inspection_cadence(day: date) -> Cadence | None:
        st = timeline.state(day)
        if not st.in_service:
            return None
        if (history.system.application in _QUARTERLY_APPLICATIONS
                and at_least_lb(st.full_charge_ng, rule.inspection_quarterly_lb)):
            return Cadence("quarterly leak inspection after a leak-rate exceedance (commercial "
                           "or industrial process refrigeration, "
                           f"≥ {rule.inspection_quarterly_lb} lb)",
                           rule.inspection_basis, period=QUARTER)
        return Cadence("annual leak inspection after a leak-rate exceedance",
                       rule.inspection_basis, period=YEAR)

    checks = [e for e in events if e.kind is EventKind.CHECK]
    for seg in service_segments(events):
        spans: list[tuple[date, date | None, EventId | None]] = []
        for r in exceeded:
            if r.added_on < seg.start_on or (seg.end_on is not None and r.added_on >= seg.end_on):
                continue
            last = add_months(r.added_on, rule.inspection_months)
            if spans and spans[-1][1] is not None and r.added_on <= spans[-1][1]:
                spans[-1] = (spans[-1][0], max(last, spans[-1][1]), spans[-1][2])
            else:
                spans.append((r.added_on, last, r.event_id))
        for w in calendar_windows(spans=spans, stop_on=seg.end_on, cadence_at=inspection_cadence,
                                  change_dates=timeline.dates, checks=checks, as_of=as_of):
            detail = w.cadence.label
            if w.missed:
                detail += (f"; missed: no inspection from {w.opens_on.isoformat()} "
                           f"to {w.due_on.isoformat()}")
            add(ObligationKind.LEAK_INSPECTION, w.due_on, w.cadence.basis, w.met_by, w.cause,
                detail, w.opens_on)

    # Chronic leaks: a report when a calendar year's additions reach report_percent.
    totals: dict[int, int] = {}
    reported: set[int] = set()
    for r in rows:
        year = r.added_on.year
        totals[year] = totals.get(year, 0) + r.added_ng
        if year in reported or r.full_charge_ng <= 0:
            continue
        if Decimal(totals[year]) * 100 >= rule.report_percent * r.full_charge_ng:
            reported.add(year)
            share = Decimal(totals[year]) * 100 / r.full_charge_ng
            add(ObligationKind.REPORT, date(year + 1, 3, 1), rule.report_basis, None, r.event_id,
                f"report a chronically leaking appliance: {_pct(share)} % of the full charge "
                f"added in {year} (≥ {rule.report_percent.normalize():f} %); record the filing "
                "with `refledger report filed`")
    return out, findings


def _pct(value: Decimal | None) -> str:
    return "?" if value is None else _truncate(value, 2)
