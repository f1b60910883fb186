"""The state fold (ledger.domain.state): events up to a day folded into a system's state."""

from __future__ import annotations

import random

from hypothesis import given
from hypothesis import strategies as st

from ledger.domain.state import effective_events, state_of
from tests.domain import D, Log, kg


def _log() -> Log:
    log = Log()
    log.in_service(D(2024, 1, 10), "R-404A", kg("30"))
    log.check(D(2024, 6, 1), leak=True, location="valve")
    log.repair(D(2024, 6, 3))
    log.detection_on(D(2024, 7, 1))
    log.revise(D(2024, 9, 1), kg("32.5"))
    log.retrofit(D(2025, 2, 1), "R-448A", kg("28"))
    log.detection_off(D(2025, 3, 1))
    return log


def test_state_before_anything_is_not_in_service():
    st_ = state_of(_log().events, D(2024, 1, 9))
    assert not st_.in_service and st_.refrigerant is None and st_.full_charge_ng == 0


def test_in_service_sets_refrigerant_charge_and_dates():
    st_ = state_of(_log().events, D(2024, 1, 10))
    assert st_.in_service and st_.refrigerant == "R-404A" and st_.full_charge_ng == kg("30")
    assert st_.in_service_on == D(2024, 1, 10) and st_.refrigerant_since == D(2024, 1, 10)


def test_leak_found_stays_open_until_a_repair():
    events = _log().events
    assert state_of(events, D(2024, 6, 2)).open_leaks == (2,)
    after = state_of(events, D(2024, 6, 3))
    assert after.open_leaks == () and after.last_repair_on == D(2024, 6, 3)
    assert after.last_check_on == D(2024, 6, 1)


def test_charge_revision_detection_and_retrofit():
    events = _log().events
    assert state_of(events, D(2024, 9, 1)).full_charge_ng == kg("32.5")
    assert state_of(events, D(2024, 9, 1)).detection_system
    later = state_of(events, D(2025, 3, 1))
    assert later.refrigerant == "R-448A" and later.full_charge_ng == kg("28")
    assert later.refrigerant_since == D(2025, 2, 1) and not later.detection_system


def test_retirement_ends_service_and_keeps_the_charge():
    log = _log()
    log.retire(D(2025, 6, 1))
    st_ = state_of(log.events, D(2025, 6, 1))
    assert not st_.in_service and st_.retired_on == D(2025, 6, 1)
    assert st_.full_charge_ng == kg("28")


def test_void_removes_the_voided_event():
    log = Log()
    log.in_service(D(2024, 1, 10), "R-404A", kg("30"))
    wrong = log.check(D(2024, 6, 1), leak=True)
    log.void(D(2024, 6, 2), wrong)
    st_ = state_of(log.events, D(2024, 12, 31))
    assert st_.open_leaks == () and st_.last_check_on is None
    assert [e.id for e in effective_events(log.events)] == [1]


@given(st.randoms(use_true_random=False))
def test_state_does_not_depend_on_the_order_events_are_given_in(rnd: random.Random):
    events = list(_log().events)
    rnd.shuffle(events)
    for day in (D(2024, 6, 2), D(2024, 12, 31), D(2025, 3, 1)):
        assert state_of(events, day) == state_of(_log().events, day)
