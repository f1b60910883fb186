"""Tamper evidence: every kind of change made directly in the database is named by `verify`.

The triggers refuse UPDATE/DELETE, so each test first drops them, as someone with direct
database access could; the chain must still tell.
"""

from __future__ import annotations

from datetime import date

import pytest
from sqlalchemy import insert, select, text

from ledger.domain.drafts import EventDraft
from ledger.domain.records import EventKind
from ledger.services.integrity import verify
from ledger.services.recording import add_site, add_system, log_event
from ledger.store.db import Database
from ledger.store.tables import event


def _ledger(db: Database) -> list[int]:
    add_site(db, code="S", name="S", country="DE")
    add_system(
        db,
        site_code="S",
        tag="A",
        refrigerant="R-134a",
        charge_ng=50_000_000_000_000,
        application="comfort-cooling",
        in_service_on=date(2023, 1, 1),
    )
    add_system(
        db,
        site_code="S",
        tag="B",
        refrigerant="R-134a",
        charge_ng=50_000_000_000_000,
        application="comfort-cooling",
        in_service_on=date(2023, 1, 1),
    )
    ids = []
    for day in (1, 2, 3, 4):
        ids.append(
            log_event(
                db,
                site_code="S",
                tag="A",
                draft=EventDraft(kind=EventKind.ADD, performed_on=date(2024, 1, day), mass_ng=1_000_000_000_000 * day),
            ).event_id
        )
    return ids


def _drop_triggers(db: Database) -> None:
    with db.engine.begin() as conn:
        if conn.dialect.name == "sqlite":
            conn.execute(text("DROP TRIGGER event_no_update"))
            conn.execute(text("DROP TRIGGER event_no_delete"))
        else:
            conn.execute(text("DROP TRIGGER event_append_only ON event"))


def test_intact_ledger_verifies(db: Database) -> None:
    _ledger(db)
    result = verify(db)
    assert result.ok and result.systems == 2 and result.events == 6


def test_edited_field_is_named(db: Database) -> None:
    ids = _ledger(db)
    _drop_triggers(db)
    with db.engine.begin() as conn:
        conn.execute(text("UPDATE event SET mass_ng = 1 WHERE id = :i"), {"i": ids[1]})
    result = verify(db)
    assert [(b.system, b.event_id, b.what) for b in result.breaks] == [("A", ids[1], "edited")]


def test_deleted_row_is_named(db: Database) -> None:
    ids = _ledger(db)
    _drop_triggers(db)
    with db.engine.begin() as conn:
        conn.execute(text("DELETE FROM event WHERE id = :i"), {"i": ids[1]})
    result = verify(db)
    assert [(b.event_id, b.what) for b in result.breaks] == [(ids[2], "missing")]


def test_inserted_row_is_named(db: Database) -> None:
    ids = _ledger(db)
    with db.engine.begin() as conn:
        row = dict(conn.execute(select(event).where(event.c.id == ids[1])).mappings().one())
        row.pop("id")
        row["chain_hash"] = "f" * 64
        row["note"] = "forged"
        conn.execute(insert(event).values(**row))
    result = verify(db)
    assert [b.what for b in result.breaks] == ["inserted"]


def test_swapped_dates_are_named(db: Database) -> None:
    ids = _ledger(db)
    _drop_triggers(db)
    with db.engine.begin() as conn:
        conn.execute(text("UPDATE event SET performed_on = :d WHERE id = :i"), {"d": date(2024, 1, 3), "i": ids[1]})
        conn.execute(text("UPDATE event SET performed_on = :d WHERE id = :i"), {"d": date(2024, 1, 2), "i": ids[2]})
    result = verify(db)
    assert [(b.event_id, b.what) for b in result.breaks] == [(ids[1], "edited")]


def test_reordered_rows_are_named(db: Database) -> None:
    ids = _ledger(db)
    _drop_triggers(db)
    with db.engine.begin() as conn:
        # swap the positions of two events by swapping their ids (via a free id)
        conn.execute(text("UPDATE event SET id = 100000 WHERE id = :i"), {"i": ids[1]})
        conn.execute(text("UPDATE event SET id = :a WHERE id = :b"), {"a": ids[1], "b": ids[2]})
        conn.execute(text("UPDATE event SET id = :b WHERE id = 100000"), {"b": ids[2]})
    result = verify(db)
    assert result.breaks and result.breaks[0].what == "reordered"


@pytest.mark.parametrize("site", [None, "S"])
def test_heads_digest_is_stable(db: Database, site: str | None) -> None:
    _ledger(db)
    assert verify(db, site_code=site).digest == verify(db, site_code=site).digest
