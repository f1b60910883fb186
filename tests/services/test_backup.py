"""Export -> restore round trips: SQLite -> PostgreSQL -> SQLite gives identical records and chains."""

from __future__ import annotations

from datetime import date
from pathlib import Path

import pytest

from ledger.domain.drafts import EventDraft
from ledger.domain.records import EventKind
from ledger.errors import Conflict
from ledger.services.backup import export_ledger, restore_ledger
from ledger.services.integrity import verify
from ledger.services.recording import add_cylinder, add_site, add_system, add_technician, log_event, void_event
from ledger.store import repository as repo
from ledger.store.db import Database, Location


def _fill(db: Database) -> None:
    add_site(db, code="GB-1", name="Leeds", country="GB")
    add_technician(db, name="Ana Ortiz", certificate="GB-9", scheme="GB F-gas cat I", company="Frost Ltd")
    add_cylinder(db, code="C1", refrigerant="R-404A", kind="reclaimed", tare_ng=10_000_000_000_000)
    add_system(
        db,
        site_code="GB-1",
        tag="R1",
        refrigerant="R-404A",
        charge_ng=80_000_000_000_000,
        application="commercial-refrigeration",
        in_service_on=date(2020, 5, 1),
        technician="Ana Ortiz",
    )
    e = log_event(
        db,
        site_code="GB-1",
        tag="R1",
        draft=EventDraft(
            kind=EventKind.ADD,
            performed_on=date(2024, 2, 1),
            cylinder_code="C1",
            cylinder_before_ng=30_000_000_000_000,
            cylinder_after_ng=27_500_000_000_000,
            technician="Ana Ortiz",
            note="=SUM(1)",
        ),
    )
    void_event(db, event_id=e.event_id, reason="wrong cylinder", recorded_by="Office")


def _snapshot(db: Database):  # type: ignore[no-untyped-def]
    with db.read() as conn:
        histories = repo.load_histories(conn=conn)
    return [
        (
            h.site,
            h.system,
            tuple(
                (
                    e.kind,
                    e.performed_on,
                    e.mass_ng,
                    e.note,
                    e.voids_id,
                    e.chain_hash,
                    e.technician,
                    e.certificate,
                    e.cylinder_id,
                    e.reclaimed,
                )
                for e in h.events
            ),
        )
        for h in histories
    ]


def test_round_trip_across_backends(location: Location, tmp_path: Path, sqlite_location: Location) -> None:
    source = Database(sqlite_location)
    _fill(source)
    before = _snapshot(source)
    export_ledger(source, tmp_path / "one")
    # into the backend under test (PostgreSQL or SQLite), then back into a new SQLite file
    restore_ledger(tmp_path / "one", location)
    middle = Database(location)
    assert _snapshot(middle) == before
    export_ledger(middle, tmp_path / "two")
    final_loc = Location("sqlite:///" + str(tmp_path / "final.db"), "test")
    restore_ledger(tmp_path / "two", final_loc)
    final = Database(final_loc)
    assert _snapshot(final) == before
    assert verify(final).digest == verify(source).digest
    with pytest.raises(Conflict, match="not empty"):
        restore_ledger(tmp_path / "two", final_loc)
    for d in (source, middle, final):
        d.close()
