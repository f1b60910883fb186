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
from ledger.domain.leak_rate import NG_PER_KG, NG_PER_LB
from ledger.domain.records import (
    Basis,
    Confidence,
    Event,
    EventId,
    EventKind,
    Finding,
    Obligation,
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
    "Cadence",
    "Constant",
    "ReferenceLike",
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
    "leak_found_events",
    "obligation_sort_key",
    "period_end",
    "resolve",
    "retired_between",
    "service_segments",
    "status_of",
    "system_source",
    "tier_for_state",
]

# The confidence marks, short, for the tables of bases the regime modules declare.
CHECKED, SECONDARY, MEMORY, POLICY = Confidence.CHECKED, Confidence.SECONDARY, Confidence.MEMORY, Confidence.POLICY

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
    cause: EventId | None
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
    history: SystemHistory, reference: ReferenceLike, as_of: date,
    events: Sequence[Event] | None = None,
) -> list[Finding]:
    """Data problems that stop a schedule being computed; worded without a regime so that
    `compute_all` can drop the copies several regimes of one site produce.

    ``events``: the effective events up to ``as_of`` when already booked."""
    if events is None:
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
