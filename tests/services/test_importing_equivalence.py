"""The bulk import's short cuts give what the general code gives.

An import of 100 000 events checks and writes them without the per-event machinery of
`log add`: it writes the two digests' JSON itself, folds only the events that decide what
its checks read of a system's state, and inserts plain tuples. Each short cut is held here
to the general code it stands for (the whole import's behaviour is in test_importing.py).
"""

from __future__ import annotations

import csv
import hashlib
import json
from datetime import UTC, date, datetime, timedelta
from pathlib import Path

from hypothesis import given, settings
from hypothesis import strategies as st
from sqlalchemy import insert, select

from ledger.domain.drafts import EventDraft, validate_event
from ledger.domain.records import (
    Certificate,
    Cylinder,
    CylinderKind,
    Event,
    EventKind,
    SystemState,
    Technician,
)
from ledger.domain.state import EMPTY_STATE, state_of
from ledger.services.importing import (
    _EVENT_COLUMNS,
    _FOLD_KINDS,
    _chain_link,
    _utc_text,
    content_key,
    import_files,
)
from ledger.services.integrity import verify
from ledger.store import chain
from ledger.store import repository as repo
from ledger.store.db import Database
from ledger.store.tables import event

text = st.text(alphabet=st.characters(blacklist_categories=("Cs",)), max_size=24)


# ---- the digests ----------------------------------------------------------------------------


@given(
    kind=st.sampled_from(["sites", "technicians", "cylinders", "systems", "events"]),
    cells=st.dictionaries(st.sampled_from(["site", "tag", "kind", "on", "mass", "note", "ü x", "\"q\""]), text),
)
def test_content_key_is_the_digest_of_its_json(kind: str, cells: dict[str, str]) -> None:
    body = json.dumps(
        [kind, sorted((k, v.strip()) for k, v in cells.items() if v.strip())], ensure_ascii=False, separators=(",", ":")
    )
    assert content_key(kind, cells) == hashlib.sha256(body.encode()).hexdigest()


plain = st.one_of(st.none(), text, st.integers(min_value=-(2**63), max_value=2**63))


ROW_KEYS = (*(chain.LEGACY_MASS_KEYS.get(n, n) for n in chain.CANONICAL_FIELDS), *chain.OPTIONAL_FIELDS)


@given(
    values=st.fixed_dictionaries({
        name: st.one_of(st.none(), st.integers(min_value=-(2**63), max_value=2**63))
        if name in chain.LEGACY_MASS_KEYS.values() else plain
        for name in ROW_KEYS
    }),
    prev=st.sampled_from([chain.GENESIS, "ab" * 32]),
)
def test_chain_link_is_chain_link(values: dict[str, object], prev: str) -> None:
    assert _chain_link(prev, {**values, "v": chain.CHAIN_VERSION}) == chain.link(prev, values)


def test_recording_time_is_written_as_the_chain_writes_it() -> None:
    for moment in (
        datetime(2025, 3, 14, 16, 2, 11, tzinfo=UTC),
        datetime(2025, 3, 14, 16, 2, 11, 5, tzinfo=UTC),
        datetime.fromisoformat("2025-03-14T18:02:11+02:00"),
    ):
        assert _utc_text(moment) == json.loads(chain.canonical({"recorded_at": moment}))["recorded_at"]


# ---- the partial fold -----------------------------------------------------------------------


class _Reads:
    """A state that notes which of its fields are read."""

    def __init__(self, state: SystemState) -> None:
        self._state = state
        self.read: set[str] = set()

    def __getattr__(self, name: str) -> object:
        self.read.add(name)
        return getattr(self._state, name)


def test_validate_event_reads_only_the_refrigerant_and_the_retirement() -> None:
    """The import folds only _FOLD_KINDS into a state: enough for these two fields. If this
    fails, validate_event reads more of the state, and _FOLD_KINDS must cover it."""
    day = date(2024, 5, 1)
    states = [
        EMPTY_STATE,
        SystemState(True, "R-404A", 10**13, True, date(2020, 1, 1), None, day, day, (7,), date(2020, 1, 1)),
        SystemState(False, "R-404A", 10**13, False, date(2020, 1, 1), date(2023, 1, 1), None, None, (), None),
    ]
    tech = Technician(1, "Ada", "", (Certificate("EU", "N-1", "I", date(2010, 1, 1), date(2020, 1, 1)),))
    cylinder = Cylinder("C-1", "R-448A", CylinderKind.VIRGIN)
    read: set[str] = set()
    for kind in EventKind:
        for refrigerant, mass, result in ((None, None, None), ("R-404A", 10**12, "no-leak"), ("R-448A", 0, "x")):
            for state in states:
                for cyl in (None, cylinder):
                    reads = _Reads(state)
                    draft = EventDraft(
                        kind=kind, performed_on=day, mass_ng=mass, refrigerant=refrigerant, result=result,
                        cylinder_code=cyl.id if cyl else None, technician="Ada", destination="bin", reason="r",
                    )
                    validate_event(
                        draft, reads, today=day, same_refrigerant=refrigerant == "R-404A" if refrigerant else None,  # type: ignore[arg-type]
                        cylinder=cyl, cylinder_matches=None if cyl is None else False, technician=tech,
                        placed_on=date(2020, 1, 1),
                    )
                    read |= reads.read
    assert read and read <= {"refrigerant", "retired_on"}


kinds = st.sampled_from(list(EventKind))


@st.composite
def histories(draw: st.DrawFn) -> list[Event]:
    """A system's events in recording order: ids ascending, days in any order, voids of
    earlier events (any kind, as a damaged or hand-made ledger might hold)."""
    events: list[Event] = []
    for i in range(draw(st.integers(0, 14))):
        kind = draw(kinds)
        day = date(2020, 1, 1) + timedelta(days=draw(st.integers(0, 40)))
        voids = draw(st.sampled_from([e.id for e in events])) if kind is EventKind.VOID and events else None
        events.append(
            Event(
                id=i + 1 if draw(st.booleans()) else -(i + 1),  # rows of an input have negative ids
                system_id=1,
                kind=kind,
                performed_on=day,
                refrigerant=draw(st.sampled_from(["R-404A", "R-448A", None])),
                charge_ng=draw(st.sampled_from([None, 10**12])),
                result=draw(st.sampled_from([None, "leak-found", "no-leak"])),
                voids_id=voids,
            )
        )
    return events


@settings(max_examples=300)
@given(events=histories(), offset=st.integers(-2, 45))
def test_folding_the_fold_kinds_gives_the_same_refrigerant_and_retirement(events: list[Event], offset: int) -> None:
    on = date(2020, 1, 1) + timedelta(days=offset)
    counted = [e for e in events if e.kind in _FOLD_KINDS]
    full, part = state_of(events, on), state_of(counted, on)
    assert (part.refrigerant, part.retired_on) == (full.refrigerant, full.retired_on)
    # and from the newest of them on, the state no longer depends on the day
    if all(e.performed_on <= on for e in counted):
        assert state_of(counted, date.max) == part


# ---- the rows written -----------------------------------------------------------------------


def test_rows_written_as_tuples_are_the_rows_insert_writes(db: Database, tmp_path: Path) -> None:
    """repository.insert_event_rows binds each value as SQLAlchemy's insert() does."""
    assert _import(db, tmp_path, BASE) == []  # a site and a system placed in service
    with db.write() as conn:
        system_id = conn.execute(select(event.c.system_id)).scalar_one()
        values = {
            "system_id": system_id, "kind": "add", "performed_on": date(2024, 2, 29),
            "recorded_at": datetime(2024, 3, 1, 8, 30, 1, 250, tzinfo=UTC), "mass_ng": 1_500_000_000_000,
            "refrigerant": None, "charge_ng": None, "result": None, "location": "valve ü", "method": None,
            "destination": None, "cylinder_id": None, "cylinder_before_ng": 14 * 10**12,
            "cylinder_after_ng": None,
            "technician_id": None, "certificate_id": None, "recorded_by": "Office", "note": "a \"note\"",
            "attachments": "", "reclaimed": True, "content_key": "k" * 64, "voids_id": None, "reason": None,
            "facility": "Reclaim Nord, Kiel", "facility_certificate": None,
            "prev_hash": chain.GENESIS, "chain_hash": "1" * 64,
        }
        conn.execute(insert(event), [values])
        repo.insert_event_rows(
            _EVENT_COLUMNS, [tuple({**values, "chain_hash": "2" * 64}[c] for c in _EVENT_COLUMNS)], conn=conn
        )
        names = ", ".join(_EVENT_COLUMNS)
        rows = conn.exec_driver_sql(f"SELECT {names} FROM event WHERE content_key = '{'k' * 64}' ORDER BY id").all()
    assert len(rows) == 2
    assert rows[0][:-1] == rows[1][:-1]  # all but the chain hash, as the driver returns them


BASE = {
    "sites": [{"code": "NL-1", "name": "Utrecht", "country": "NL"}],
    "technicians": [{"name": "Ada Novak", "scheme": "EU 2015/2067", "certificate": "NL-1", "valid_from": "2020-01-01"}],
    "cylinders": [{"id": "C-448", "refrigerant": "R-448A", "kind": "reclaimed"}],
    "systems": [
        {"site": "NL-1", "tag": "R1", "refrigerant": "R449A", "charge": "60 kg",
         "application": "commercial-refrigeration", "in_service": "2022-01-10"},
    ],
}


def _import(db: Database, folder: Path, data: dict[str, list[dict[str, str]]], name: str = "in") -> list[str]:
    """Import ``data``; returns its problems."""
    where = folder / name
    where.mkdir(parents=True, exist_ok=True)
    paths = []
    for kind, rows in data.items():
        path = where / f"{kind}.csv"
        with path.open("w", newline="", encoding="utf-8") as fh:
            writer = csv.DictWriter(fh, fieldnames=sorted({k for r in rows for k in r}))
            writer.writeheader()
            writer.writerows(rows)
        paths.append(path)
    return import_files(db, paths).problems


def _hash_of(db: Database, kind: str, on: str) -> str:
    with db.read() as conn:
        return conn.execute(
            select(event.c.chain_hash).where(event.c.kind == kind, event.c.performed_on == date.fromisoformat(on))
        ).scalar_one()


def test_each_row_is_checked_against_the_state_the_rows_before_it_leave(db: Database, tmp_path: Path) -> None:
    ev = {"site": "NL-1", "tag": "R1"}
    first = [
        {**ev, "kind": "retrofit", "on": "2023-03-01", "refrigerant": "R-448A", "charge": "55 kg", "tech": "Ada Novak"},
        {**ev, "kind": "add", "on": "2023-03-02", "mass": "1 kg", "refrigerant": "R-448A", "cylinder": "C-448"},
        {**ev, "kind": "add", "on": "2023-02-15", "mass": "1 kg", "refrigerant": "R-449A"},  # before the retrofit
        {**ev, "kind": "retire", "on": "2024-05-01", "mass": "40 kg", "destination": "reclaim",
         "recorded_at": "2024-05-01T18:00:00+02:00"},
    ]
    assert _import(db, tmp_path, {**BASE, "events": first}) == []
    retire = _hash_of(db, "retire", "2024-05-01")
    # The retirement was a mistake: voided, then work after it is accepted; a void of a row of
    # the same input gets that row's id.
    second = [
        {**ev, "kind": "check", "on": "2024-06-01", "result": "no-leak", "tech": "Ada Novak"},  # still retired here
        {**ev, "kind": "void", "on": "2024-05-01", "voids": retire, "reason": "wrong system"},
        {**ev, "kind": "check", "on": "2024-06-02", "result": "no-leak", "tech": "Ada Novak"},
        {**ev, "kind": "retire", "on": "2024-07-01", "mass": "0 kg"},
        {**ev, "kind": "add", "on": "2024-07-02", "mass": "1 kg"},
    ]
    problems = _import(db, tmp_path, {"events": second}, "second")
    assert problems == [
        "events.csv row 2 column on: '2024-06-01': 2024-06-01 is on or after the system was retired (2024-05-01)",
        "events.csv row 6 column on: '2024-07-02': 2024-07-02 is on or after the system was retired (2024-07-01)",
    ]
    second = [r for r in second if r["on"] not in ("2024-06-01", "2024-07-02")]
    assert _import(db, tmp_path, {"events": second}, "third") == []
    third = [
        {**ev, "kind": "void", "on": "2024-07-01", "voids": _hash_of(db, "retire", "2024-07-01"), "reason": "typo"},
        {**ev, "kind": "add", "on": "2024-07-03", "mass": "2 kg"},
        {**ev, "kind": "void", "on": "2024-07-03", "voids": "", "reason": "x"},  # filled in below
    ]
    third[2]["voids"] = retire  # already voided
    assert _import(db, tmp_path, {"events": third}, "fourth") == [
        "events.csv row 4 column voids: '" + retire[:57] + "...': names an event that is already voided"
    ]
    assert _import(db, tmp_path, {"events": third[:2]}, "fifth") == []
    assert verify(db).ok
    with db.read() as conn:
        (events,) = repo.load_events(conn=conn).values()
    assert [(e.kind.value, e.performed_on.isoformat()) for e in events] == [
        ("in-service", "2022-01-10"), ("retrofit", "2023-03-01"), ("add", "2023-03-02"), ("add", "2023-02-15"),
        ("retire", "2024-05-01"), ("void", "2024-05-01"), ("check", "2024-06-02"), ("retire", "2024-07-01"),
        ("void", "2024-07-01"), ("add", "2024-07-03"),
    ]
    added = events[2]
    assert (added.mass_ng, added.cylinder_id, added.reclaimed, added.technician) == (10**12, "C-448", True, None)
    assert events[1].refrigerant == "R-448A" and events[1].certificate == "EU 2015/2067 NL-1"
    assert events[4].recorded_at == datetime(2024, 5, 1, 16, 0, tzinfo=UTC)
    assert events[5].voids_id == events[4].id and events[8].voids_id == events[7].id
    # and sending every file again adds nothing
    for name, rows in (("in", first), ("third", second), ("fifth", third[:2])):
        summary = import_files(db, [tmp_path / name / "events.csv"])
        assert summary.ok and summary.added["events"] == 0 and summary.skipped["events"] == len(rows)


def test_the_roomy_page_cache_is_given_back(db: Database) -> None:
    if db.location.url.startswith("postgresql"):
        return  # the server sizes its own buffers
    with db.write() as conn:
        before = conn.exec_driver_sql("PRAGMA cache_size").scalar_one()
        with repo.roomy_page_cache(conn=conn, mib=8):
            assert conn.exec_driver_sql("PRAGMA cache_size").scalar_one() == -8 * 1024
        assert conn.exec_driver_sql("PRAGMA cache_size").scalar_one() == before
        try:
            with repo.roomy_page_cache(conn=conn, mib=8):
                raise KeyError("x")
        except KeyError:
            pass
        assert conn.exec_driver_sql("PRAGMA cache_size").scalar_one() == before
