"""One booking pass (ledger.domain.booking): a Booking gives exactly what the older folds gave.

The reference semantics are `ledger.domain.state.state_of` over all events, and
`rules.common.events_until` for the events that count up to a day; both are the rules of the
trade for a logbook (a voided entry does not count; the state on a day is what was done up to
that day's end: common practice, no source).
"""

from __future__ import annotations

from datetime import timedelta

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from ledger.domain.booking import EVENT_ORDER, Booking, Timeline, book
from ledger.domain.records import Event, EventKind, SystemHistory
from ledger.domain.state import EMPTY_STATE, effective_events, state_of
from tests.domain import D, Log, kg, site, system

START = D(2024, 1, 1)
KINDS = [EventKind.CHECK, EventKind.REPAIR, EventKind.FOLLOW_UP, EventKind.ADD,
         EventKind.DETECTION_ON, EventKind.DETECTION_OFF, EventKind.CHARGE_REVISED,
         EventKind.RETROFIT, EventKind.RETIRE, EventKind.IN_SERVICE, EventKind.VOID]


@st.composite
def histories(draw):
    """A system's events in random order, several on one day, some voided."""
    n = draw(st.integers(0, 14))
    events: list[Event] = []
    ids = draw(st.permutations(range(1, n + 1)))  # ids need not follow the dates
    for i in range(n):
        kind = draw(st.sampled_from(KINDS))
        on = START + timedelta(days=draw(st.integers(0, 60)))
        fields: dict[str, object] = {}
        if kind is EventKind.CHECK:
            fields["result"] = draw(st.sampled_from(["no-leak", "leak-found"]))
        elif kind is EventKind.FOLLOW_UP:
            fields["result"] = draw(st.sampled_from(["pass", "fail"]))
        elif kind is EventKind.ADD:
            fields["mass_ng"] = kg(draw(st.integers(1, 5)))
        elif kind in (EventKind.IN_SERVICE, EventKind.RETROFIT, EventKind.CHARGE_REVISED):
            fields["charge_ng"] = kg(draw(st.integers(1, 50)))
            if kind is not EventKind.CHARGE_REVISED:
                fields["refrigerant"] = draw(st.sampled_from(["R-404A", "R-32"]))
        elif kind is EventKind.VOID:
            if not events:
                continue
            fields["voids_id"] = draw(st.sampled_from(events)).id
            fields["reason"] = "entered in error"
        events.append(Event(ids[i], 1, kind, on, **fields))  # type: ignore[arg-type]
    draw(st.randoms()).shuffle(events)
    return SystemHistory(site(), system(), tuple(events))


PROPS = settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.too_slow])


@PROPS
@given(histories(), st.integers(-2, 64), st.integers(-2, 64))
def test_booking_state_equals_state_of(history, as_of_offset, day_offset):
    as_of, day = START + timedelta(days=as_of_offset), START + timedelta(days=day_offset)
    booked = book(history)
    # the whole history: same events, same state on every day
    assert booked.events == effective_events(history.events)
    assert booked.state(day) == state_of(history.events, day)
    # a view on as_of: the events up to it (old events_until) and the state of those events
    view = booked.until(as_of)
    until = tuple(e for e in effective_events(history.events) if e.performed_on <= as_of)
    assert view.events == until
    assert view.state(day) == state_of(until, day)
    assert view.state(day) == Timeline(until).state(day)
    assert view.dates == tuple(sorted({e.performed_on for e in until}))
    assert view.until(as_of + timedelta(days=5)).events == until  # a view never grows


def test_event_order_is_day_then_id():
    log = Log()
    late = log.in_service(D(2025, 2, 1), "R-404A", kg(10))
    early = log.check(D(2025, 1, 1))
    same_day = log.check(D(2025, 2, 1))
    assert sorted([same_day, late, early], key=EVENT_ORDER) == [early, late, same_day]
    assert book(log.history()).events == (early, late, same_day)


def test_a_booking_on_a_day_before_anything_happened_is_empty():
    log = Log()
    log.in_service(D(2025, 3, 1), "R-404A", kg(10))
    view = book(log.history()).until(D(2025, 2, 28))
    assert isinstance(view, Booking)
    assert view.events == () and view.dates == ()
    assert view.state(D(2025, 3, 5)) == EMPTY_STATE  # the later event is not in this view
    assert view.site.code == "S1" and view.system.id == 1


def test_voided_event_does_not_count_in_the_booking():
    log = Log()
    log.in_service(D(2025, 1, 1), "R-404A", kg(10))
    wrong = log.revise(D(2025, 2, 1), kg(99))
    log.void(D(2025, 2, 2), wrong)
    booked = book(log.history())
    assert booked.state(D(2025, 3, 1)).full_charge_ng == kg(10)
    assert [e.kind for e in booked.events] == [EventKind.IN_SERVICE]
