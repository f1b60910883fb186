"""A visit (several events in one unit) and the duplicate confirmation, on both databases."""

from __future__ import annotations

from datetime import date

import pytest
from sqlalchemy import func, select

from ledger.domain.drafts import EventDraft
from ledger.domain.records import EventKind
from ledger.errors import NeedsConfirmation, Rejected
from ledger.services.recording import add_cylinder, add_site, add_system, add_technician, log_event, record_visit
from ledger.store.db import Database
from ledger.store.tables import event
from ledger.units import parse_mass_ng


def _ledger(db: Database) -> None:
    add_site(db, code="US-1", name="Store", country="US", subdivision="US-TX")
    add_technician(db, name="Ada Novak", certificate="EPA-1", scheme="EPA 608 universal")
    add_cylinder(db, code="CY-1", refrigerant="R-404A", kind="virgin", tare_ng=None)
    add_system(db, site_code="US-1", tag="RACK", refrigerant="R-404A", charge_ng=parse_mass_ng("400 lb"),
               application="commercial-refrigeration", in_service_on=date(2022, 4, 1), technician="Ada Novak")


def _count(db: Database) -> int:
    with db.read() as conn:
        return conn.execute(select(func.count()).select_from(event)).scalar_one()


def _visit() -> list[EventDraft]:
    on = date(2025, 3, 14)
    common = {"performed_on": on, "technician": "Ada Novak", "recorded_by": "ada"}
    return [
        EventDraft(kind=EventKind.CHECK, result="leak-found", location="LT header", **common),
        EventDraft(kind=EventKind.REPAIR, location="brazed joint", **common),
        EventDraft(kind=EventKind.ADD, cylinder_code="CY-1", cylinder_before_ng=parse_mass_ng("30 lb"),
                   cylinder_after_ng=parse_mass_ng("27 lb 8 oz"), **common),
        EventDraft(kind=EventKind.FOLLOW_UP, result="pass", **common),
    ]


def test_a_visit_is_recorded_in_order_with_the_cylinder_mass(db: Database) -> None:
    _ledger(db)
    before = _count(db)
    logged = record_visit(db, site_code="US-1", tag="RACK", drafts=_visit())
    assert len(logged) == 4 and _count(db) == before + 4
    assert [x.event_id for x in logged] == sorted(x.event_id for x in logged)
    with db.read() as conn:
        mass = conn.execute(select(event.c.mass_ng).where(event.c.id == logged[2].event_id)).scalar_one()
    # 30 lb - 27 lb 8 oz = 2 lb 8 oz (16 oz to the lb: common practice, no source)
    assert mass == parse_mass_ng("2.5 lb")


def test_an_error_in_one_part_writes_nothing(db: Database) -> None:
    _ledger(db)
    before = _count(db)
    drafts = _visit()
    drafts[3] = EventDraft(kind=EventKind.FOLLOW_UP, performed_on=date(2025, 3, 14), result="maybe")
    with pytest.raises(Rejected, match="--result"):
        record_visit(db, site_code="US-1", tag="RACK", drafts=drafts)
    assert _count(db) == before


def test_a_duplicate_asks_for_confirmation_and_writes_nothing(db: Database) -> None:
    _ledger(db)
    draft = EventDraft(kind=EventKind.ADD, performed_on=date(2025, 3, 14), mass_ng=parse_mass_ng("3 lb"),
                       technician="Ada Novak")
    log_event(db, site_code="US-1", tag="RACK", draft=draft)
    before = _count(db)
    with pytest.raises(NeedsConfirmation) as caught:
        log_event(db, site_code="US-1", tag="RACK", draft=draft)
    assert caught.value.reasons and "already records the same add" in caught.value.reasons[0]
    assert _count(db) == before
    with pytest.raises(NeedsConfirmation):
        record_visit(db, site_code="US-1", tag="RACK", drafts=[draft])
    assert _count(db) == before
    log_event(db, site_code="US-1", tag="RACK", draft=draft, confirm=True)
    assert _count(db) == before + 1
    # another mass on the same day is not a duplicate
    log_event(db, site_code="US-1", tag="RACK",
              draft=EventDraft(kind=EventKind.ADD, performed_on=date(2025, 3, 14), mass_ng=parse_mass_ng("1 lb"),
                               technician="Ada Novak"))
