"""The state fold: a system's events up to a day, folded into its state."""

from __future__ import annotations

from bisect import bisect_right
from collections.abc import Iterable, Iterator
from datetime import date
from operator import attrgetter

from ledger.domain.records import CheckResult, Event, EventKind, FollowUpResult, SystemState

# The rules call these for every system several times per run (each regime, each tier), so
# they are kept lean: a C key function for the sort, no filtering pass when nothing is voided.
# EVENT_ORDER is THE event sort key (day, then id): `ledger.domain.booking` re-exports it.
EVENT_ORDER = attrgetter("performed_on", "id")
_DATE_ORDER = EVENT_ORDER
_PERFORMED_ON = attrgetter("performed_on")


def finds_leak(e: Event) -> bool:
    """A check that found a leak, or a follow-up check that failed (the repair did not hold):
    the events that open a leak until the next repair, for the fold and for the rules."""
    return ((e.kind is EventKind.CHECK and e.result == CheckResult.LEAK_FOUND)
            or (e.kind is EventKind.FOLLOW_UP and e.result == FollowUpResult.FAIL))


def effective_events(events: Iterable[Event]) -> tuple[Event, ...]:
    """Drop VOID events and the events they void; return the rest in date order.

    Args:
        events: a system's events in any order.
    Returns:
        The events that count, sorted by (performed_on, id) so the result does not depend
        on the order they were recorded in.
    """
    void = EventKind.VOID
    events = tuple(events)
    voided = {e.voids_id for e in events if e.kind is void}
    if voided:  # empty exactly when there is no VOID event
        return tuple(sorted((e for e in events if e.kind is not void and e.id not in voided), key=_DATE_ORDER))
    return tuple(sorted(events, key=_DATE_ORDER))


def fold_days(kept: tuple[Event, ...], *, every_day: bool = True) -> Iterator[tuple[int, SystemState]]:
    """Fold effective events (date order) once, yielding the state at the end of each day.

    Args:
        kept: effective events in date order (``effective_events``).
        every_day: False yields only the state after the last event: each state holds the
            events up to it, so building one per day costs time quadratic in the history.
    Yields:
        (index of the day's last event, state after it), one pair per distinct day (or just
        the last one).
    """
    in_service = False
    refrigerant: str | None = None
    charge_ng = 0
    detection = False
    in_service_on = retired_on = last_check = last_repair = since = None
    open_leaks: list[int] = []
    last = len(kept) - 1
    for i, e in enumerate(kept):
        match e.kind:
            case EventKind.IN_SERVICE:
                in_service, in_service_on, since = True, e.performed_on, e.performed_on
                refrigerant, charge_ng = e.refrigerant, e.charge_ng or 0
            case EventKind.RETROFIT:
                refrigerant, since = e.refrigerant, e.performed_on
                charge_ng = e.charge_ng or charge_ng
            case EventKind.CHARGE_REVISED:
                charge_ng = e.charge_ng or charge_ng
            case EventKind.CHECK:
                last_check = e.performed_on
                if finds_leak(e):
                    open_leaks.append(e.id)
            case EventKind.FOLLOW_UP:
                if finds_leak(e):
                    open_leaks.append(e.id)
            case EventKind.REPAIR:
                last_repair = e.performed_on
                open_leaks.clear()
            case EventKind.DETECTION_ON:
                detection = True
            case EventKind.DETECTION_OFF:
                detection = False
            case EventKind.RETIRE:
                in_service, retired_on = False, e.performed_on
            case _:
                pass
        if i == last or (every_day and kept[i + 1].performed_on != e.performed_on):
            yield i, SystemState(
                in_service=in_service,
                refrigerant=refrigerant,
                full_charge_ng=charge_ng,
                detection_system=detection,
                in_service_on=in_service_on,
                retired_on=retired_on,
                last_check_on=last_check,
                last_repair_on=last_repair,
                open_leaks=tuple(open_leaks),
                refrigerant_since=since,
                events=kept[: i + 1],
            )


EMPTY_STATE = SystemState(
    in_service=False, refrigerant=None, full_charge_ng=0, detection_system=False, in_service_on=None,
    retired_on=None, last_check_on=None, last_repair_on=None, open_leaks=(), refrigerant_since=None,
)


def state_of(events: Iterable[Event], as_of: date) -> SystemState:
    """Fold a system's events on or before ``as_of`` into its state.

    Args:
        events: all events of one system (voids included; they are applied here).
        as_of: the day to look at; events after it are ignored.
    Returns:
        The SystemState on that day.
    """
    kept = effective_events(events)
    if kept and kept[-1].performed_on > as_of:  # date order: the events that count are a prefix
        kept = kept[: bisect_right(kept, as_of, key=_PERFORMED_ON)]
    for _, state in fold_days(kept, every_day=False):
        return state
    return EMPTY_STATE
