"""Kept obligations: `due` read from kept rows gives what the rules give from the records.

The reference is the rules run over every history (`load_evidence` + `compute` +
`current_only`), as `due` did before it kept anything. The records are the benchmark's
synthetic estate (retrofits, retirements, leak-rate exceedances, late and missed checks, voids
in five regimes) and the demo; the days asked for are the day the rows were kept, later days
(open duties turn overdue, a year boundary), an earlier day, and after new records.
"""

from __future__ import annotations

import importlib.util
import sys
from datetime import date, timedelta
from pathlib import Path
from typing import Any

import pytest
from sqlalchemy import func, select

from ledger.domain.drafts import EventDraft
from ledger.domain.records import EventKind, ObligationStatus
from ledger.services.obligations import PERIODIC, compute, current_only, due, load_evidence
from ledger.services.queries import labels_of, obligation_json
from ledger.store.db import Database, Location
from ledger.store.tables import kept_obligation, kept_site

ROOT = Path(__file__).resolve().parents[2]


def _bench() -> Any:
    spec = importlib.util.spec_from_file_location("refledger_bench", ROOT / "scripts" / "bench.py")
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    sys.modules.setdefault("refledger_bench", module)
    spec.loader.exec_module(module)
    return module


def _key(row: dict[str, Any]) -> tuple:
    return tuple("" if v is None else str(v) for v in row.values())


def from_rules(db: Database, as_of: date, site_code: str | None = None) -> tuple[list[dict], set]:
    """What `due` shows on ``as_of``, from the rules over every history (nothing kept)."""
    histories, evidence = load_evidence(db, site_code=site_code)
    obligations, findings = compute(histories, as_of, evidence)
    current, missed = current_only(obligations)
    labels = labels_of(histories)
    rows = []
    for i, ob in enumerate(current):
        if ob.status is ObligationStatus.MET:
            continue
        row = obligation_json(ob, labels)
        row["earlier_periods_missed"] = missed.get(i, 0) if ob.kind in PERIODIC else None
        rows.append(row)
    return sorted(rows, key=_key), set(findings)


def shown(db: Database, as_of: date, site_code: str | None = None) -> tuple[list[dict], set]:
    listing = due(db, as_of=as_of, site_code=site_code)
    return sorted(listing.rows, key=_key), set(listing.findings)


def computed_at(db: Database) -> dict[int, Any]:
    with db.read() as conn:
        return dict(conn.execute(select(kept_site.c.site_id, kept_site.c.computed_at)).all())


def kept_counts(db: Database) -> tuple[int, int]:
    with db.read() as conn:
        return (conn.execute(select(func.count()).select_from(kept_site)).scalar_one(),
                conn.execute(select(func.count()).select_from(kept_obligation)).scalar_one())


@pytest.fixture
def estate(location: Location) -> tuple[Database, Any]:
    """The benchmark's synthetic estate at 10 sites (300 systems, about 11 000 events)."""
    bench = _bench()
    cal = bench.calendar_for(date(2026, 12, 1))
    built = bench.generate(0.01, cal)
    if location.url.startswith("sqlite"):
        bench.load_sqlite(location.sqlite_path, built)
    else:
        bench.load_postgresql(location.url, built)
    bench.chain_records(location.url)  # the ledger's own writers chain every record they write
    db = Database(location)
    yield db, cal
    db.close()


def test_kept_rows_give_what_the_rules_give(estate: tuple[Database, Any]) -> None:
    db, cal = estate
    day = cal.as_of
    expected = from_rules(db, day)
    assert kept_counts(db) == (0, 0)
    assert shown(db, day) == expected  # computed, and kept
    sites, rows = kept_counts(db)
    assert sites == 10 and rows > 0
    first = computed_at(db)
    assert shown(db, day) == expected  # read back from the kept rows
    assert computed_at(db) == first
    assert shown(db, day + timedelta(days=1)) == from_rules(db, day + timedelta(days=1))
    assert set(computed_at(db).items()) & set(first.items()), "no site was reused the next day"
    for later in (day + timedelta(days=1), day + timedelta(days=45), date(day.year + 1, 1, 2),
                  day + timedelta(days=400)):
        assert shown(db, later) == from_rules(db, later), later
    assert kept_counts(db)[0] == 10
    earlier = day - timedelta(days=200)  # before the kept day: computed from the records
    assert shown(db, earlier) == from_rules(db, earlier)


def test_one_site_and_new_records(estate: tuple[Database, Any]) -> None:
    from ledger.services import recording
    from ledger.store import repository as repo

    db, cal = estate
    day = cal.as_of
    shown(db, day)  # keep every site
    with db.read() as conn:
        code = repo.list_sites(conn=conn)[0].code
        history = repo.load_histories(code, conn=conn)[0]
    assert shown(db, day, code) == from_rules(db, day, code)
    # A new record in one site makes that site's kept rows stale; the others stay.
    recording.log_event(db, site_code=code, tag=history.system.tag, draft=EventDraft(
        kind=EventKind.CHECK, performed_on=day, result="leak-found", location="valve", recorded_by="test"))
    later = day + timedelta(days=20)
    assert shown(db, later) == from_rules(db, later)
    assert shown(db, later, code) == from_rules(db, later, code)


def test_the_demo_ledger(db: Database) -> None:
    from ledger.services.demo import DEMO_AS_OF, ORDER, correct_at_the_desk
    from ledger.services.importing import import_files

    records = ROOT / "sample_records"
    summary = import_files(db, [records / f"{name}.csv" for name in ORDER])
    assert not summary.problems
    correct_at_the_desk(db)
    for day in (DEMO_AS_OF, DEMO_AS_OF, DEMO_AS_OF + timedelta(days=60), DEMO_AS_OF - timedelta(days=90)):
        assert shown(db, day) == from_rules(db, day), day


def from_histories(db: Database, year: int, site_code: str | None = None, basis: str | None = None) -> dict:
    """The annual summary from every history and the rules (nothing kept)."""
    from ledger.reference import load_reference
    from ledger.services.reporting import annual_data, default_basis

    as_of = date(year, 12, 31)
    histories, evidence = load_evidence(db, site_code=site_code)
    obligations, _ = compute(histories, as_of, evidence)
    return annual_data(histories, load_reference(), year=year, basis=basis or default_basis(histories),
                       obligations=obligations, as_of=as_of, site_code=site_code)


def summary(db: Database, year: int, site_code: str | None = None, basis: str | None = None) -> dict:
    from ledger.services.reporting import annual_summary

    got = annual_summary(db, year=year, site_code=site_code, basis=basis, as_of=date(year, 12, 31))
    got["generated_at"] = None
    assert got.pop("integrity")["verified"]  # recomputed chains: the pure summary has no such key
    return got


def test_kept_annual_parts_give_what_the_histories_give(estate: tuple[Database, Any]) -> None:
    from ledger.services import recording
    from ledger.store import repository as repo
    from ledger.store.tables import kept_annual

    db, cal = estate
    year = cal.year
    expected = from_histories(db, year)
    assert summary(db, year) == expected  # built, and kept
    with db.read() as conn:
        assert conn.execute(select(func.count()).select_from(kept_annual)).scalar_one() == 10
    assert summary(db, year) == expected  # read back
    assert summary(db, year - 1) == from_histories(db, year - 1)
    assert summary(db, year, basis="ar6") == from_histories(db, year, basis="ar6")
    with db.read() as conn:
        site = repo.list_sites(conn=conn)[3]
        code = site.code
        history = repo.load_histories(code, conn=conn)[0]
    assert summary(db, year, code) == from_histories(db, year, code)
    # A late record dated in the year: that site is built again, the others are read back.
    recording.log_event(db, site_code=code, tag=history.system.tag, draft=EventDraft(
        kind=EventKind.CHECK, performed_on=date(year, 6, 30), result="no-leak", recorded_by="test",
        note="entered late"))
    assert summary(db, year) == from_histories(db, year)
    # A filing meets a report duty without any new event.
    recording.record_filing(db, site_code=code, regime=site.regimes[0], period_year=year - 1,
                            filed_on=date(year, 2, 1))
    assert summary(db, year) == from_histories(db, year)


def test_a_body_that_is_not_plain_is_rebuilt(estate: tuple[Database, Any]) -> None:
    import pickle
    from functools import partial

    from ledger.services.kept import unpack
    from ledger.services.reporting import AnnualPart

    _unpack = partial(unpack, part_type=AnnualPart)

    assert _unpack(pickle.dumps(ValueError("x"))) is None
    assert _unpack(b"not a pickle") is None


def test_a_busy_ledger_is_not_waited_for(sqlite_location: Location) -> None:
    """`due` and the summary are reads: with another writer holding the SQLite lock they
    answer at once and keep nothing (common practice, no source)."""
    import sqlite3
    import time

    from ledger.services.reporting import annual_summary

    bench = _bench()
    cal = bench.calendar_for(date(2026, 12, 1))
    bench.load_sqlite(sqlite_location.sqlite_path, bench.generate(0.002, cal))
    db = Database(sqlite_location)
    other = sqlite3.connect(sqlite_location.sqlite_path, isolation_level=None)
    other.execute("BEGIN IMMEDIATE")
    try:
        started = time.monotonic()
        assert shown(db, cal.as_of) == from_rules(db, cal.as_of)
        annual_summary(db, year=cal.year)
        assert time.monotonic() - started < 20  # the busy timeout is 30 s
        assert kept_counts(db) == (0, 0)
    finally:
        other.execute("ROLLBACK")
        other.close()
    shown(db, cal.as_of)
    assert kept_counts(db)[0] > 0
    db.close()


def test_recompute_ignores_kept_rows(estate: tuple[Database, Any]) -> None:
    from ledger.services.reporting import annual_summary

    db, cal = estate
    shown(db, cal.as_of)
    annual_summary(db, year=cal.year)
    before = computed_at(db)
    with db.read() as conn:
        from ledger.store.tables import kept_annual

        annual_before = dict(conn.execute(select(kept_annual.c.site_id, kept_annual.c.computed_at)).all())
    listing = due(db, as_of=cal.as_of, recompute=True)
    got = annual_summary(db, year=cal.year, recompute=True)
    assert sorted(listing.rows, key=_key) == from_rules(db, cal.as_of)[0]
    got["generated_at"] = None
    assert got.pop("integrity")["verified"]
    assert got == from_histories(db, cal.year)
    after = computed_at(db)
    assert all(after[k] > before[k] for k in before)
    with db.read() as conn:
        annual_after = dict(conn.execute(select(kept_annual.c.site_id, kept_annual.c.computed_at)).all())
    assert all(annual_after[k] > annual_before[k] for k in annual_before)
