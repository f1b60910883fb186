"""Scenario tests per regime through the database (SQLite and PostgreSQL): record, then ask what is due.

The pure rule tests in tests/rules cover the boundaries; these check that the same answers
come out of a real ledger on both backends.
"""

from __future__ import annotations

from datetime import date

from ledger.domain.drafts import EventDraft
from ledger.domain.records import EventKind
from ledger.services.obligations import due
from ledger.services.recording import add_site, add_system, add_technician, log_event
from ledger.store.db import Database

# A check meets a duty only when done by a person certified for it (Reg. (EU) 2024/573 Art 10,
# retained 517/2014 Art 10 in Great Britain); category I covers every activity (2015/2067
# Art 3, from memory).
CERTIFIED = "Certified Person"


def _certified(db: Database, scope: str) -> None:
    add_technician(db, name=CERTIFIED, certificate=f"{scope}-1", scheme="F-gas", scope=scope, category="I")


def _kinds(rows: list[dict]) -> set[tuple[str, str, str]]:
    return {(r["regime"], r["kind"], r["status"]) for r in rows}


def test_eu_periodic_check_and_follow_up(db: Database) -> None:
    add_site(db, code="DE", name="DE", country="DE")
    # R-404A 20 kg = 78.4 t CO2e (EU 517/2014 Annex IV figure 3 922): 50-500 t tier, every 6 months
    # (Reg. (EU) 2024/573 Art 5(1))
    add_system(db, site_code="DE", tag="R", refrigerant="R-404A", charge_ng=20_000_000_000_000,
               application="commercial-refrigeration", in_service_on=date(2025, 1, 31))
    rows = due(db, as_of=date(2025, 6, 1)).rows
    leak_checks = [r for r in rows if r["kind"] == "leak-check"]
    # 6 months after 31 Jan 2025, month addition clamped: 31 Jul 2025
    assert [r["due_on"] for r in leak_checks] == [date(2025, 7, 31)]
    log_event(db, site_code="DE", tag="R", draft=EventDraft(kind=EventKind.REPAIR, performed_on=date(2025, 5, 31)))
    rows = due(db, as_of=date(2025, 6, 1)).rows
    follow = [r for r in rows if r["kind"] == "follow-up-check"]
    # Art 4(5): at least 24 h of operation after, and within one month of, the repair
    assert follow and follow[0]["earliest_on"] == date(2025, 6, 1) and follow[0]["due_on"] == date(2025, 6, 30)
    _certified(db, "eu")
    log_event(db, site_code="DE", tag="R", draft=EventDraft(
        kind=EventKind.FOLLOW_UP, performed_on=date(2025, 6, 2), result="pass", technician=CERTIFIED))
    assert not [r for r in due(db, as_of=date(2025, 6, 3)).rows if r["kind"] == "follow-up-check"]


def test_gb_hcfc_leak_found_needs_repair_within_14_days(db: Database) -> None:
    add_site(db, code="GB", name="GB", country="GB")
    # R-22 40 kg: >= 30 kg, every 6 months (gov.uk ODS leak-check guidance)
    add_system(db, site_code="GB", tag="C", refrigerant="R-22", charge_ng=40_000_000_000_000,
               application="comfort-cooling", in_service_on=date(2010, 1, 1))
    _certified(db, "gb")
    log_event(db, site_code="GB", tag="C", draft=EventDraft(
        kind=EventKind.CHECK, performed_on=date(2025, 3, 3), result="leak-found", location="coil",
        technician=CERTIFIED))
    rows = due(db, as_of=date(2025, 3, 4)).rows
    repair = [r for r in rows if r["kind"] == "repair"]
    assert repair and repair[0]["due_on"] == date(2025, 3, 17)  # 14 days (gov.uk guidance)
    check = [r for r in rows if r["kind"] == "leak-check"]
    assert check and check[0]["due_on"] == date(2025, 9, 3)


def test_us_exceedance_opens_repair_and_verification(db: Database) -> None:
    add_site(db, code="TX", name="TX", country="US", subdivision="US-TX")
    # 100 lb R-404A commercial refrigeration: 40 CFR 84 Subpart C applies (>= 15 lb, GWP > 53)
    add_system(db, site_code="TX", tag="R", refrigerant="R-404A", charge_ng=45_359_237_000_000,
               application="commercial-refrigeration", in_service_on=date(2020, 1, 1))
    # 25 lb added on 2026-03-01, no earlier addition: annualizing rate = 25/100 x 365/365 = 25 %
    # > 20 % (40 CFR 82.157(c)(2) threshold, hand-worked from the definition in 82.152)
    log_event(db, site_code="TX", tag="R", draft=EventDraft(
        kind=EventKind.ADD, performed_on=date(2026, 3, 1), mass_ng=11_339_809_250_000))
    rows = due(db, as_of=date(2026, 3, 2)).rows
    repair = [r for r in rows if r["kind"] == "repair" and r["regime"] == "us-84c"]
    assert repair and repair[0]["due_on"] == date(2026, 3, 31)  # 30 days (82.157(d))
    assert any(r["kind"] == "verification-test" for r in rows)


def test_california_large_system_monthly_inspection_without_detection(db: Database) -> None:
    add_site(db, code="CA", name="CA", country="US", subdivision="US-CA")
    # 2 100 lb of R-448A (GWP >= 150): large; without automatic leak detection inspected monthly
    # (17 CCR 95385)
    add_system(db, site_code="CA", tag="R", refrigerant="R-448A", charge_ng=952_543_977_000_000,
               application="commercial-refrigeration", in_service_on=date(2025, 12, 1))
    rows = due(db, as_of=date(2026, 1, 15)).rows
    inspections = [r for r in rows if r["regime"] == "us-ca" and r["kind"] == "leak-inspection"]
    # December's inspection (due at the end of the month in service) was not logged: overdue
    assert [(r["due_on"], r["status"]) for r in inspections] == [(date(2025, 12, 31), "overdue")]
    assert any(r["regime"] == "us-ca" and r["kind"] == "report" and r["system"] is None for r in rows)


def test_natural_refrigerant_and_no_regime(db: Database) -> None:
    add_site(db, code="DE", name="DE", country="DE")
    add_site(db, code="JP", name="JP", country="JP")
    add_system(db, site_code="DE", tag="CO2", refrigerant="R-744", charge_ng=300_000_000_000_000,
               application="commercial-refrigeration", in_service_on=date(2024, 1, 1))
    add_system(db, site_code="JP", tag="X", refrigerant="R-404A", charge_ng=300_000_000_000_000,
               application="commercial-refrigeration", in_service_on=date(2024, 1, 1))
    listing = due(db, as_of=date(2026, 1, 1))
    assert listing.rows == []
    assert any("no covered regime" in f.message or "regime" in f.message for f in listing.findings)


def test_a_recorded_filing_meets_the_california_report(db: Database) -> None:
    from ledger.errors import InputError
    from ledger.services.recording import record_filing

    add_site(db, code="CA", name="CA", country="US", subdivision="US-CA")
    # 2 100 lb (large facility): annual report by 1 March (CARB notices, secondary); an
    # unfiled one stays overdue when the next is due (issue 14 correction)
    add_system(db, site_code="CA", tag="R", refrigerant="R-448A", charge_ng=952_543_977_000_000,
               application="commercial-refrigeration", in_service_on=date(2024, 1, 1))
    day = date(2026, 1, 15)
    report = [r for r in due(db, as_of=day).rows if r["kind"] == "report"]
    assert [(r["due_on"], r["status"]) for r in report] == [
        (date(2025, 3, 1), "overdue"), (date(2026, 3, 1), "open")]
    record_filing(db, site_code="CA", regime="us-ca", period_year=2025, filed_on=date(2026, 1, 10), reference="R-1")
    report = [r for r in due(db, as_of=day).rows if r["kind"] == "report"]
    assert [(r["due_on"], r["status"]) for r in report] == [(date(2025, 3, 1), "overdue")]
    record_filing(db, site_code="CA", regime="us-ca", period_year=2024, filed_on=date(2026, 1, 12))
    assert not [r for r in due(db, as_of=day).rows if r["kind"] == "report"]
    try:
        record_filing(db, site_code="CA", regime="eu", period_year=2025, filed_on=date(2026, 1, 10))
    except InputError as exc:
        assert "does not apply" in str(exc)
    else:
        raise AssertionError("a filing under a regime the site lacks was accepted")
