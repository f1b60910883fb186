"""Concurrent writers: 4 processes x 200 log commands lose nothing and break no chain."""

from __future__ import annotations

import multiprocessing as mp
from datetime import date

from ledger.domain.drafts import EventDraft
from ledger.domain.records import EventKind
from ledger.services.integrity import verify
from ledger.services.recording import add_site, add_system, log_event
from ledger.store import repository as repo
from ledger.store.db import Database, Location

PROCESSES = 4
EVENTS_EACH = 200


def _writer(url: str, worker: int) -> int:
    db = Database(Location(url, "test"))
    for i in range(EVENTS_EACH):
        # half the writes go to a shared system, half to the worker's own; the masses differ by
        # worker and write, so that no write is the same event as another (which asks to confirm)
        tag = "SHARED" if i % 2 else f"W{worker}"
        log_event(
            db,
            site_code="S",
            tag=tag,
            draft=EventDraft(
                kind=EventKind.ADD, performed_on=date(2024, 1, 1 + i % 28), mass_ng=(worker + 1) * 10**10 + i,
                note=f"w{worker}-{i}",
            ),
            confirm=True,  # workers write the same entries on the shared system on purpose
        )
    db.close()
    return EVENTS_EACH


def test_parallel_loggers_lose_nothing(db: Database, location: Location) -> None:
    add_site(db, code="S", name="S", country="DE")
    for tag in ["SHARED", *(f"W{w}" for w in range(PROCESSES))]:
        add_system(
            db,
            site_code="S",
            tag=tag,
            refrigerant="R-134a",
            charge_ng=100_000_000_000_000,
            application="comfort-cooling",
            in_service_on=date(2023, 1, 1),
        )
    ctx = mp.get_context("spawn")
    with ctx.Pool(PROCESSES) as pool:
        written = pool.starmap(_writer, [(location.url, w) for w in range(PROCESSES)])
    assert sum(written) == PROCESSES * EVENTS_EACH
    with db.read() as conn:
        notes = {e.note for evs in repo.load_events(conn=conn).values() for e in evs if e.kind is EventKind.ADD}
    assert notes == {f"w{w}-{i}" for w in range(PROCESSES) for i in range(EVENTS_EACH)}
    result = verify(db)
    assert result.ok, result.breaks
