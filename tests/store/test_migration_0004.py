# ng-rename: off (this file names the milligram columns and hashed keys on purpose)
"""Migration 0004: masses from integer milligrams to integer nanograms, every record kept.

The ledger is built at head, taken down to 0003 (the milligram schema) and up again, on
SQLite and PostgreSQL. Checked: row counts, the values (x 10^6, SI: 1 mg = 10^6 ng), and that
every chain still verifies, both through `verify` and by hashing the canonical form as
docs/integrity.md documents it (keys ``mass_mg`` etc. with the milligram figure).
"""

from __future__ import annotations

import hashlib
import json
from datetime import date

from alembic import command
from sqlalchemy import text

from ledger.domain.drafts import EventDraft
from ledger.domain.records import EventKind
from ledger.services.integrity import verify
from ledger.services.recording import add_cylinder, add_site, add_system, log_event
from ledger.store.db import HEAD_REVISION, Database, Location, alembic_config
from ledger.units import parse_mass_ng

TABLES = ("site", "system", "cylinder", "event", "technician", "certificate")


def _counts(db: Database) -> dict[str, int]:
    with db.engine.connect() as conn:
        return {t: conn.execute(text(f"SELECT COUNT(*) FROM {t}")).scalar() for t in TABLES}


def _ledger(db: Database) -> None:
    add_site(db, code="DE-1", name="Store", country="DE")
    add_cylinder(db, code="CY-1", refrigerant="R-448A", kind="virgin", tare_ng=parse_mass_ng("13.6 kg"))
    add_system(db, site_code="DE-1", tag="RACK", refrigerant="R-448A", charge_ng=parse_mass_ng("120 kg"),
               application="commercial-refrigeration", in_service_on=date(2024, 1, 1))
    log_event(db, site_code="DE-1", tag="RACK", draft=EventDraft(
        kind=EventKind.ADD, performed_on=date(2024, 3, 1), cylinder_code="CY-1",
        cylinder_before_ng=parse_mass_ng("48.2 kg"), cylinder_after_ng=parse_mass_ng("41.7 kg")))
    log_event(db, site_code="DE-1", tag="RACK", draft=EventDraft(
        kind=EventKind.RECOVER, performed_on=date(2024, 4, 1), mass_ng=parse_mass_ng("2.5 kg"),
        destination="reclaim"))


def test_down_to_milligrams_and_up_again_keeps_every_record_and_chain(location: Location) -> None:
    db = Database(location)
    _ledger(db)
    before = _counts(db)
    with db.engine.connect() as conn:
        ng = conn.execute(text("SELECT id, mass_ng, charge_ng, cylinder_before_ng FROM event ORDER BY id")).all()
    db.close()

    command.downgrade(alembic_config(location), "0003")
    db = Database(location)
    with db.engine.connect() as conn:
        mg = conn.execute(text("SELECT id, mass_mg, charge_mg, cylinder_before_mg FROM event ORDER BY id")).all()
        tare = conn.execute(text("SELECT tare_mg FROM cylinder")).scalar()
    assert tare == 13_600_000  # 13.6 kg in mg
    assert [tuple(None if v is None else v * 10**6 for v in r[1:]) for r in mg] == [tuple(r[1:]) for r in ng]
    assert _counts(db) == before
    db.close()

    command.upgrade(alembic_config(location), "head")
    db = Database(location)
    with db.engine.connect() as conn:
        assert conn.execute(text("SELECT version_num FROM alembic_version")).scalar() == HEAD_REVISION
        again = conn.execute(text("SELECT id, mass_ng, charge_ng, cylinder_before_ng FROM event ORDER BY id")).all()
        assert conn.execute(text("SELECT tare_ng FROM cylinder")).scalar() == 13_600_000_000_000
    assert again == ng
    assert _counts(db) == before
    result = verify(db)
    assert result.events == before["event"] and not result.breaks
    # the events stay append-only after the migration re-created the triggers
    try:
        with db.engine.begin() as conn:
            conn.execute(text("UPDATE event SET note = 'x'"))
    except Exception as exc:  # the driver's IntegrityError / RaiseException
        assert "append-only" in str(exc)
    else:
        raise AssertionError("UPDATE on event was allowed after migration 0004")
    db.close()


def test_a_pound_entry_hashes_its_exact_milligram_figure(location: Location) -> None:
    # 1 lb = 0.45359237 kg exactly (1959 agreement) = 453 592.37 mg: the canonical form
    # (docs/integrity.md) writes it as the string "453592.37"; a whole figure stays an int.
    db = Database(location)
    add_site(db, code="US-1", name="Store", country="US", subdivision="US-TX")
    add_system(db, site_code="US-1", tag="RTU", refrigerant="R-410A", charge_ng=parse_mass_ng("100 lb"),
               application="comfort-cooling", in_service_on=date(2024, 1, 1))
    log_event(db, site_code="US-1", tag="RTU", draft=EventDraft(
        kind=EventKind.ADD, performed_on=date(2024, 3, 1), mass_ng=parse_mass_ng("1 lb")))
    with db.engine.connect() as conn:
        rows = conn.execute(text("SELECT * FROM event ORDER BY id")).mappings().all()
    first, added = rows
    assert added["mass_ng"] == 453_592_370_000
    body = {
        "system": "US-1/RTU", "kind": "add", "performed_on": "2024-03-01",
        "recorded_at": _utc(added["recorded_at"]), "mass_mg": "453592.37", "refrigerant": None,
        "charge_mg": None, "result": None, "location": None, "method": None, "destination": None,
        "cylinder": None, "cylinder_before_mg": None, "cylinder_after_mg": None, "technician": None,
        "certificate": None, "recorded_by": added["recorded_by"], "note": added["note"], "voids": None,
        "reason": None, "attachments": "", "reclaimed": 0, "v": 1,
    }
    canonical = json.dumps(body, sort_keys=True, separators=(",", ":"), ensure_ascii=False)
    assert hashlib.sha256(f"{first['chain_hash']}\n{canonical}".encode()).hexdigest() == added["chain_hash"]
    assert not verify(db).breaks
    db.close()


def _utc(value) -> str:  # type: ignore[no-untyped-def]
    from datetime import UTC, datetime

    if isinstance(value, str):  # SQLite through raw SQL hands back text
        value = datetime.fromisoformat(value)
    aware = value.replace(tzinfo=UTC) if value.tzinfo is None else value.astimezone(UTC)
    return aware.isoformat(timespec="microseconds")
