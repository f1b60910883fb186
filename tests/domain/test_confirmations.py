"""confirmation_reasons: the doubts that ask a person to confirm an event (pure).

The thresholds are ours (common practice, no source): a single addition or recovery above
the full charge (or a chosen share of it), below 1 g, or equal in system, kind, day, mass and
technician to an event already recorded. Pound figures: 1 lb = 0.45359237 kg (1959).
"""

from __future__ import annotations

from decimal import Decimal

from ledger.domain.drafts import EventDraft, confirmation_reasons
from ledger.domain.records import EventKind
from ledger.units import parse_mass_ng
from tests.domain import D, Log, system

SYS = system()


def _log() -> Log:
    log = Log()
    log.in_service(D(2024, 1, 1), "R-404A", parse_mass_ng("11.5 kg"))
    return log


def _add(mass: str, on=D(2024, 3, 1), tech: str | None = None) -> EventDraft:  # type: ignore[no-untyped-def]
    return EventDraft(kind=EventKind.ADD, performed_on=on, mass_ng=parse_mass_ng(mass), technician=tech)


def test_nothing_to_confirm_for_an_ordinary_top_up() -> None:
    assert confirmation_reasons(_add("2 kg"), _log().events, SYS) == ()


def test_above_the_full_charge_or_a_share_of_it() -> None:
    log = _log()
    (reason,) = confirmation_reasons(_add("99999 kg"), log.events, SYS)
    assert reason == "The addition of 99999.00 kg is more than its full charge (11.50 kg) of SYS1."
    assert confirmation_reasons(_add("11.5 kg"), log.events, SYS) == ()  # exactly the charge
    assert confirmation_reasons(_add("6 kg"), log.events, SYS, charge_share=Decimal("0.5"))
    assert confirmation_reasons(_add("5.75 kg"), log.events, SYS, charge_share=Decimal("0.5")) == ()
    (reason,) = confirmation_reasons(_add("30 lb"), log.events, SYS, unit="lb")
    assert reason == "The addition of 30.00 lb is more than its full charge (25.35 lb) of SYS1."


def test_below_one_gram() -> None:
    (reason,) = confirmation_reasons(_add("0.5 g"), _log().events, SYS)
    assert reason == "The addition of 0.0005 kg is less than 1 g."
    assert confirmation_reasons(_add("1 g"), _log().events, SYS) == ()


def test_the_same_event_again_unless_voided() -> None:
    log = _log()
    first = log.add(EventKind.ADD, D(2024, 3, 1), mass_ng=parse_mass_ng("2 kg"), technician="Ada")
    (reason,) = confirmation_reasons(_add("2 kg", tech="Ada"), log.events, SYS)
    assert reason == f"Event {first.id} already records the same add of 2.00 kg on SYS1 on 2024-03-01 by Ada."
    assert confirmation_reasons(_add("2 kg", tech="Bo"), log.events, SYS) == ()
    assert confirmation_reasons(_add("2 kg", on=D(2024, 3, 2), tech="Ada"), log.events, SYS) == ()
    assert confirmation_reasons(_add("2001 g", tech="Ada"), log.events, SYS) == ()
    log.void(D(2024, 3, 1), first)
    assert confirmation_reasons(_add("2 kg", tech="Ada"), log.events, SYS) == ()


def test_several_doubts_are_all_given() -> None:
    log = _log()
    log.add(EventKind.ADD, D(2024, 3, 1), mass_ng=parse_mass_ng("0.5 g"))
    reasons = confirmation_reasons(_add("0.5 g"), log.events, SYS)
    assert len(reasons) == 2 and "less than 1 g" in reasons[0] and "already records" in reasons[1]
