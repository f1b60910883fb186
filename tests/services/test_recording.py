"""Recording services on both databases: round trips, chains, and every bad input refused without a write."""

from __future__ import annotations

from datetime import date

import pytest
from sqlalchemy import func, select

from ledger.domain.drafts import EventDraft
from ledger.domain.records import EventKind
from ledger.errors import Conflict, InputError, LedgerError, NotFound, Rejected, UnknownRefrigerant
from ledger.services.recording import (
    add_cylinder,
    add_site,
    add_system,
    add_technician,
    log_event,
    void_event,
)
from ledger.store import chain
from ledger.store import repository as repo
from ledger.store.db import Database
from ledger.store.tables import event


def _ledger(db: Database) -> None:
    add_site(db, code="DE-1", name="Store", country="DE")
    add_technician(
        db,
        name="Ada Novak",
        certificate="C-1",
        scheme="EU 2015/2067 cat I",
        valid_to=date(2030, 1, 1),
        company="Cold GmbH",
    )
    add_technician(db, name="Old Hand", certificate="C-2", scheme="EU 2015/2067 cat I", valid_to=date(2024, 6, 30))
    add_cylinder(db, code="CY-1", refrigerant="R-448A", kind="virgin", tare_ng=13_600_000_000_000)
    add_cylinder(db, code="CY-2", refrigerant="R-404A", kind="virgin", tare_ng=None)
    add_system(
        db,
        site_code="DE-1",
        tag="RACK",
        refrigerant="R448A",
        charge_ng=120_000_000_000_000,
        application="commercial-refrigeration",
        in_service_on=date(2022, 4, 1),
        technician="Ada Novak",
    )


def _events(db: Database) -> int:
    with db.read() as conn:
        return conn.execute(select(func.count()).select_from(event)).scalar_one()


def test_round_trip_and_chain(db: Database) -> None:
    _ledger(db)
    log_event(
        db,
        site_code="DE-1",
        tag="RACK",
        draft=EventDraft(
            kind=EventKind.ADD,
            performed_on=date(2024, 3, 1),
            cylinder_code="CY-1",
            cylinder_before_ng=48_200_000_000_000,
            cylinder_after_ng=41_700_000_000_000,
            technician="Ada Novak",
        ),
    )
    log_event(
        db,
        site_code="DE-1",
        tag="RACK",
        draft=EventDraft(kind=EventKind.CHECK, performed_on=date(2024, 3, 2), result="leak-found", location="header"),
    )
    with db.read() as conn:
        history = repo.load_histories("DE-1", conn=conn)[0]
        rows = conn.execute(repo.events_with_keys().order_by(event.c.id)).mappings().all()
    kinds = [e.kind for e in history.events]
    assert kinds == [EventKind.IN_SERVICE, EventKind.ADD, EventKind.CHECK]
    add = history.events[1]
    assert add.mass_ng == 6_500_000_000_000  # 48.2 kg - 41.7 kg
    assert add.cylinder_id == "CY-1"
    assert add.technician == "Ada Novak" and add.company == "Cold GmbH"
    assert add.certificate == "EU 2015/2067 cat I C-1"
    prev = chain.GENESIS
    for row in rows:
        assert row["prev_hash"] == prev
        assert row["chain_hash"] == chain.link(prev, dict(row))
        prev = row["chain_hash"]


def test_void_keeps_the_event_and_records_the_reason(db: Database) -> None:
    _ledger(db)
    logged = log_event(
        db,
        site_code="DE-1",
        tag="RACK",
        draft=EventDraft(kind=EventKind.ADD, performed_on=date(2024, 3, 1), mass_ng=2_000_000_000_000),
    )
    void_event(db, event_id=logged.event_id, reason="typed in lb", recorded_by="Office")
    with db.read() as conn:
        events = repo.load_events(conn=conn)
    flat = [e for evs in events.values() for e in evs]
    assert any(e.id == logged.event_id for e in flat)
    assert any(e.kind is EventKind.VOID and e.voids_id == logged.event_id and e.reason == "typed in lb" for e in flat)
    with pytest.raises(Conflict):
        void_event(db, event_id=logged.event_id, reason="again", recorded_by="Office")


def test_lapsed_certificate_is_recorded_with_a_warning(db: Database) -> None:
    _ledger(db)
    logged = log_event(
        db,
        site_code="DE-1",
        tag="RACK",
        draft=EventDraft(kind=EventKind.CHECK, performed_on=date(2025, 2, 3), result="no-leak", technician="Old Hand"),
    )
    assert logged.event_id > 0
    assert any("was not valid on 2025-02-03" in w.message for w in logged.warnings)


BAD_EVENTS = [
    # (draft fields, expected exception, text in the message)
    (
        dict(kind=EventKind.ADD, performed_on=date(2099, 1, 1), mass_ng=1_000_000_000),
        Rejected,
        "--on: 2099-01-01 is in the future",
    ),
    (
        dict(kind=EventKind.ADD, performed_on=date(2021, 1, 1), mass_ng=1_000_000_000),
        Rejected,
        "before the system was placed in service",
    ),
    (
        dict(kind=EventKind.ADD, performed_on=date(2024, 1, 1), mass_ng=1_000_000_000, refrigerant="R-404A"),
        Rejected,
        "is not what the system holds",
    ),
    (
        dict(kind=EventKind.ADD, performed_on=date(2024, 1, 1), cylinder_code="CY-2", mass_ng=1_000_000_000),
        Rejected,
        "holds R-404A, but the system holds R-448A",
    ),
    (
        dict(
            kind=EventKind.ADD,
            performed_on=date(2024, 1, 1),
            cylinder_code="CY-1",
            cylinder_before_ng=10_000_000_000,
            cylinder_after_ng=20_000_000_000,
        ),
        Rejected,
        "--before",
    ),
    (
        dict(kind=EventKind.ADD, performed_on=date(2024, 1, 1), mass_ng=1_000_000_000, technician="Nobody"),
        NotFound,
        "tech: 'Nobody'",
    ),
    (
        dict(kind=EventKind.ADD, performed_on=date(2024, 1, 1), cylinder_code="CY-9", mass_ng=1_000_000_000),
        NotFound,
        "cylinder: 'CY-9'",
    ),
    (dict(kind=EventKind.ADD, performed_on=date(2024, 1, 1)), Rejected, "--mass: is required"),
    (dict(kind=EventKind.CHECK, performed_on=date(2024, 1, 1), result="maybe"), Rejected, "--result: 'maybe'"),
    (
        dict(kind=EventKind.RETROFIT, performed_on=date(2024, 1, 1), refrigerant="R-999Z", charge_ng=1_000_000_000),
        UnknownRefrigerant,
        "R-999Z",
    ),
]


@pytest.mark.parametrize(("fields", "error", "text"), BAD_EVENTS)
def test_bad_events_are_refused_without_a_write(
    db: Database, fields: dict, error: type[LedgerError], text: str
) -> None:
    _ledger(db)
    before = _events(db)
    with pytest.raises(error) as info:
        log_event(db, site_code="DE-1", tag="RACK", draft=EventDraft(**fields))
    assert text in str(info.value)
    assert "\n" not in str(info.value)
    assert _events(db) == before


def test_event_after_retirement_is_refused(db: Database) -> None:
    _ledger(db)
    log_event(
        db,
        site_code="DE-1",
        tag="RACK",
        draft=EventDraft(
            kind=EventKind.RETIRE, performed_on=date(2025, 6, 1), mass_ng=100_000_000_000_000, destination="reclaim"
        ),
    )
    with pytest.raises(Rejected, match="on or after the system was retired"):
        log_event(
            db,
            site_code="DE-1",
            tag="RACK",
            draft=EventDraft(kind=EventKind.ADD, performed_on=date(2025, 7, 1), mass_ng=1_000_000_000),
        )


def _add_system(db: Database, **fields: object) -> None:
    values: dict = dict(site_code="DE-1", tag="T", refrigerant="R-448A", charge_ng=1_000_000_000,
                        application="other", in_service_on=date(2023, 1, 1))
    add_system(db, **{**values, **fields})


def test_duplicates_and_unknowns(db: Database) -> None:
    _ledger(db)
    with pytest.raises(Conflict, match="site: 'DE-1' already exists"):
        add_site(db, code="DE-1", name="Again", country="DE")
    with pytest.raises(Conflict, match="system: 'RACK' already exists"):
        _add_system(db, tag="RACK")
    with pytest.raises(NotFound, match="site: 'XX'"):
        _add_system(db, site_code="XX")
    with pytest.raises(NotFound, match="system: DE-1/'NOPE'"):
        log_event(
            db,
            site_code="DE-1",
            tag="NOPE",
            draft=EventDraft(kind=EventKind.ADD, performed_on=date(2024, 1, 1), mass_ng=1_000_000),
        )
    with pytest.raises(UnknownRefrigerant, match="closest known"):
        _add_system(db, tag="T2", refrigerant="R-404B")
    with pytest.raises(InputError, match="--application: 'fridge'"):
        _add_system(db, tag="T3", refrigerant="R-404A", application="fridge")
    with pytest.raises(InputError, match="--country: 'XQ'"):
        add_site(db, code="X", name="X", country="XQ")


def test_site_regimes_default_from_country(db: Database) -> None:
    assert add_site(db, code="A", name="A", country="DE").regimes == ("eu",)
    assert add_site(db, code="B", name="B", country="GB").regimes == ("gb",)
    assert add_site(db, code="C", name="C", country="US", subdivision="US-TX").regimes == ("us-82f", "us-84c")
    ca = add_site(db, code="D", name="D", country="US", subdivision="US-CA")
    assert ca.regimes == ("us-82f", "us-84c", "us-ca")
    assert ca.timezone == "America/Los_Angeles" and ca.mass_unit == "lb"
    assert add_site(db, code="E", name="E", country="JP").regimes == ()


def test_a_doubtful_event_raises_needs_confirmation_and_writes_nothing(db: Database) -> None:
    # the interface other callers rely on: NeedsConfirmation.reasons, confirm=True records it
    from ledger.errors import NeedsConfirmation
    from ledger.units import parse_mass_ng

    add_site(db, code="DE-9", name="S", country="DE")
    add_system(db, site_code="DE-9", tag="CU", refrigerant="R-404A", charge_ng=parse_mass_ng("11.5 kg"),
               application="commercial-refrigeration", in_service_on=date(2024, 1, 1))
    draft = EventDraft(kind=EventKind.ADD, performed_on=date(2024, 3, 1), mass_ng=parse_mass_ng("99999 kg"))
    with db.read() as conn:
        before = len(repo.load_events(conn=conn)[1])
    with pytest.raises(NeedsConfirmation) as info:
        log_event(db, site_code="DE-9", tag="CU", draft=draft)
    assert info.value.reasons == ("The addition of 99999.00 kg is more than its full charge (11.50 kg) of CU.",)
    with db.read() as conn:
        assert len(repo.load_events(conn=conn)[1]) == before
    logged = log_event(db, site_code="DE-9", tag="CU", draft=draft, confirm=True)
    assert logged.mass_ng == parse_mass_ng("99999 kg") and logged.unit == "kg"
