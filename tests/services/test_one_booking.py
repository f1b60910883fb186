"""Consumers read the rules' fold (one Booking per system), so they cannot disagree with it.

Each case is a disagreement the services had before issue 15 (their own loops over events),
now resolved in favour of `ledger.domain.booking` (= `domain.state.state_of`, the fold the
rules read).
"""

from __future__ import annotations

from datetime import date

from ledger.domain import emissions as em
from ledger.domain.booking import book
from ledger.domain.records import Event, EventKind, Site, System, SystemHistory
from ledger.reference import load_reference
from ledger.services import reporting

KG = 10**12  # ng per kg
SITE = Site(1, "DE-1", "Store", "DE", None, "Europe/Berlin", ("eu",))
RETROFIT_DAY = date(2025, 3, 10)


def ev(id_: int, kind: EventKind, on: date, **kw) -> Event:  # type: ignore[no-untyped-def]
    return Event(id=id_, system_id=7, kind=kind, performed_on=on, **kw)


def _retrofit_with_fill_entered_first() -> SystemHistory:
    # The technician entered the new gas's fill (id 2) before the retrofit itself (id 3),
    # both on the retrofit day. Invented data.
    return SystemHistory(SITE, System(7, "DE-1", "RACK"), (
        ev(1, EventKind.IN_SERVICE, date(2020, 1, 1), refrigerant="R-404A", charge_ng=100 * KG),
        ev(2, EventKind.ADD, RETROFIT_DAY, mass_ng=80 * KG),
        ev(3, EventKind.RETROFIT, RETROFIT_DAY, refrigerant="R-448A", charge_ng=90 * KG),
        ev(4, EventKind.ADD, date(2025, 6, 1), mass_ng=2 * KG),
    ))


def test_an_addition_entered_before_a_same_day_retrofit_is_the_new_gas_initial_fill() -> None:
    # What the system holds on a day is the rules' fold at the end of that day (state_of):
    # the retrofit day's fill goes into the new refrigerant, whichever event was typed first.
    # EU 517/2014 Art 6(1)(a)-(b) asks for the type of gas installed and the quantities added
    # at installation or maintenance (reference-notes.md, Art 6 records); that the retrofit
    # day's fill is an installation quantity is common practice, no source.
    # Before issue 15 the logbook showed R-404A for id 2 while labelling it "installation",
    # and the annual summary counted it as 80 kg of R-404A serviced (about 314 t CO2e).
    history = _retrofit_with_fill_entered_first()
    day = book(history).state(RETROFIT_DAY)
    assert day.refrigerant == "R-448A"

    (first, later) = em.additions(history)
    assert (first.refrigerant, first.initial) == (day.refrigerant, True)
    assert (later.refrigerant, later.initial) == ("R-448A", False)

    logbook = reporting.logbook_data(history, load_reference(), from_on=None, to_on=date(2025, 12, 31),
                                     obligations=[], cylinders={})
    row = next(r for r in logbook["events"] if r["id"] == 2)
    assert (row["refrigerant"], row["added_for"]) == (day.refrigerant, "installation")

    summary = reporting.annual_data([history], load_reference(), year=2025, basis="eu")
    (system,) = summary["systems"]
    assert system["initial_fill_kg"] == 80
    assert system["service_added_kg"] == 2
    assert system["refrigerant"] == "R-448A"


def test_every_logbook_row_shows_the_refrigerant_the_fold_holds_that_day() -> None:
    history = _retrofit_with_fill_entered_first()
    booking = book(history)
    logbook = reporting.logbook_data(history, load_reference(), from_on=None, to_on=date(2025, 12, 31),
                                     obligations=[], cylinders={})
    # common practice, no source: one system, one fold — the logbook agrees with the rules
    assert [r["refrigerant"] for r in logbook["events"]] == [
        booking.state(r["on"]).refrigerant for r in logbook["events"]]
