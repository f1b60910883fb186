"""Properties every regime keeps, checked on generated histories (hypothesis).

* no obligation falls due before the event that caused it, and none opens after it is due;
* adding a later (no-leak) check never moves the earliest outstanding periodic due date
  earlier, and leaves every obligation due before that check as it was;
* results do not depend on the order events are given in.

These follow from the definitions in design.md §4 and conventions.md §10; the generated
data are arbitrary, not regulatory examples.
"""

from __future__ import annotations

import random
from dataclasses import replace
from datetime import date, timedelta

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from ledger.domain.records import (
    Application,
    Event,
    EventKind,
    ObligationKind,
    ObligationStatus,
    SystemHistory,
)
from ledger.domain.state import state_of
from ledger.rules import REGIMES, compute_all
from ledger.rules.common import Timeline, events_until
from tests.domain import D, kg, lb, site, system
from tests.rules import REF

SITES = {
    "eu": site("DE1", "DE", ("eu",)),
    "gb": site("GB1", "GB", ("gb",)),
    "us-82f": site("US1", "US", ("us-82f", "us-84c")),
    "us-84c": site("US2", "US", ("us-82f", "us-84c"), method="rolling"),
    "us-ca": site("CA1", "US", ("us-82f", "us-84c", "us-ca"), subdivision="US-CA"),
    "us-wa": site("WA1", "US", ("us-82f", "us-84c", "us-wa"), subdivision="US-WA"),
}
REFRIGERANTS = {
    "eu": ("TEST-1000", "R-455A", "R-404A", "R-744"),
    "gb": ("TEST-1000", "R-22", "TEST-HCFC-MIX"),
    "us-82f": ("R-22", "TEST-HCFC-MIX"),
    "us-84c": ("R-404A", "R-134a"),
    "us-ca": ("R-404A", "TEST-150"),
    "us-wa": ("R-404A", "TEST-150", "R-455A"),
}
CHARGES = {
    "eu": (kg(3), kg(20), kg(60), kg(150), kg(520)),
    "gb": (kg(3), kg(20), kg(60), kg(400), kg(520)),
    "us-82f": (lb(40), lb(60), lb(300), lb(700)),
    "us-84c": (lb(20), lb(300), lb(1600)),
    "us-ca": (lb(60), lb(300), lb(2500)),
    "us-wa": (lb(50), lb(300), lb(1600)),
}
BASES = {"eu": D(2023, 9, 1), "gb": D(2014, 6, 1), "us-82f": D(2020, 1, 1),
         "us-84c": D(2025, 6, 1), "us-ca": D(2024, 11, 1),
         "us-wa": D(2023, 10, 1)}
PERIODIC = (ObligationKind.LEAK_CHECK, ObligationKind.LEAK_INSPECTION)


@st.composite
def histories(draw):
    """(regime, history, as_of): a system with an in-service event and random later events."""
    code = draw(st.sampled_from(sorted(REGIMES)))
    start = BASES[code] + timedelta(days=draw(st.integers(0, 400)))
    refrigerants, charges = REFRIGERANTS[code], CHARGES[code]
    events = [Event(1, 1, EventKind.IN_SERVICE, start, refrigerant=draw(st.sampled_from(
        refrigerants)), charge_ng=draw(st.sampled_from(charges)))]
    kinds = st.sampled_from([
        EventKind.CHECK, EventKind.CHECK, EventKind.CHECK, EventKind.REPAIR, EventKind.FOLLOW_UP,
        EventKind.ADD, EventKind.ADD, EventKind.DETECTION_ON, EventKind.DETECTION_OFF,
        EventKind.DETECTION_CHECK, EventKind.CHARGE_REVISED, EventKind.RETROFIT, EventKind.RETIRE,
    ])
    for i in range(draw(st.integers(0, 12))):
        kind = draw(kinds)
        on = start + timedelta(days=draw(st.integers(0, 900)))
        fields = {}
        if kind is EventKind.CHECK:
            fields["result"] = draw(st.sampled_from(["no-leak", "leak-found"]))
        elif kind is EventKind.FOLLOW_UP:
            fields["result"] = draw(st.sampled_from(["pass", "fail"]))
        elif kind is EventKind.ADD:
            fields["mass_ng"] = charges[-1] * draw(st.integers(1, 60)) // 100
        elif kind is EventKind.CHARGE_REVISED:
            fields["charge_ng"] = draw(st.sampled_from(charges))
        elif kind is EventKind.RETROFIT:
            fields["refrigerant"] = draw(st.sampled_from(refrigerants))
            fields["charge_ng"] = draw(st.sampled_from(charges))
        events.append(Event(i + 2, 1, kind, on, **fields))
    application = draw(st.sampled_from(list(Application)))
    the_site = SITES[code]
    history = SystemHistory(the_site, system(1, the_site.code, application=application,
                                             hermetic=draw(st.booleans())), tuple(events))
    as_of = start + timedelta(days=draw(st.integers(0, 1200)))
    return code, history, as_of


def _compute(history, as_of):
    return compute_all([history], REF, as_of)


PROPS = settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])


@PROPS
@given(histories())
def test_no_obligation_falls_due_before_its_cause(case):
    _, history, as_of = case
    by_id = {e.id: e for e in history.events}
    obligations, _ = _compute(history, as_of)
    for o in obligations:
        if o.caused_by is not None:
            assert o.due_on >= by_id[o.caused_by].performed_on, o
        if o.earliest_on is not None:
            assert o.earliest_on <= o.due_on, o
        if o.met_by is not None:
            assert by_id[o.met_by].performed_on <= as_of, o
        if o.status is ObligationStatus.OVERDUE:
            assert o.due_on < as_of, o


def _earliest_unmet(obligations) -> date | None:
    dues = [o.due_on for o in obligations
            if o.kind in PERIODIC and o.status is not ObligationStatus.MET]
    return min(dues, default=None)


@PROPS
@given(histories(), st.integers(1, 400))
def test_a_later_check_never_moves_a_due_date_earlier(case, gap):
    _, history, as_of = case
    last = max(e.performed_on for e in history.events)
    on = last + timedelta(days=gap)
    as_of = max(as_of, on)
    before, _ = _compute(history, as_of)
    check = Event(999, 1, EventKind.CHECK, on, result="no-leak")
    after, _ = _compute(replace(history, events=(*history.events, check)), as_of)
    old, new = _earliest_unmet(before), _earliest_unmet(after)
    if old is not None and new is not None:
        assert new >= old
    assert [o for o in before if o.due_on < on] == [o for o in after if o.due_on < on]


@PROPS
@given(histories(), st.randoms(use_true_random=False))
def test_results_do_not_depend_on_event_order(case, rnd: random.Random):
    _, history, as_of = case
    shuffled = list(history.events)
    rnd.shuffle(shuffled)
    assert _compute(replace(history, events=tuple(shuffled)), as_of) == _compute(history, as_of)


@PROPS
@given(histories())
def test_results_are_sorted_earliest_due_first(case):
    _, history, as_of = case
    obligations, _ = _compute(history, as_of)
    assert [o.due_on for o in obligations] == sorted(o.due_on for o in obligations)


@PROPS
@given(histories(), st.integers(-5, 1300))
def test_timeline_agrees_with_the_state_fold(case, offset):
    # Timeline folds once for speed; it must give exactly what ledger.domain.state does
    _, history, _ = case
    events = events_until(history, D(2100, 1, 1))
    day = history.events[0].performed_on + timedelta(days=offset)
    assert Timeline(events).state(day) == state_of(history.events, day)
