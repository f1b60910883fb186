"""Services and exports follow a site's regimes, not its country.

A site's regimes may differ from what its country suggests (the user chooses them). Every
choice that depends on the law that applies — leak-rate tables and pounds, the default mass
unit, the GWP basis, the record-item table of a logbook — follows the regimes (common practice,
no source: the regime, not the country, decides what a record must show).
"""

from __future__ import annotations

from dataclasses import replace
from datetime import date
from pathlib import Path

import openpyxl

from ledger.domain.records import Application, EquipmentForm, Event, EventKind, Site, System, SystemHistory
from ledger.exports.xlsx import write_logbook_xlsx
from ledger.reference import load_reference
from ledger.services import reporting
from ledger.services.recording import add_site
from ledger.store.db import Database

REF = load_reference()
US_REGIMES = ("us-82f", "us-84c")
# A German site run under the US regimes, and a US site run under the EU regime.
DE_UNDER_US = Site(1, "DE-X", "Berlin test site", "DE", None, "Europe/Berlin", US_REGIMES)
US_UNDER_EU = Site(2, "US-X", "Dallas test site", "US", "US-TX", "America/Chicago", ("eu",))


def _ac(site: Site) -> SystemHistory:
    """A comfort-cooling unit with two additions in 2025 (the figures of tests/exports/test_xlsx.py)."""
    ac = System(3, site.code, "RTU-2", "Rooftop unit", Application.COMFORT_COOLING, EquipmentForm.SPLIT)
    return SystemHistory(site, ac, (
        Event(10, 3, EventKind.IN_SERVICE, date(2016, 4, 18), refrigerant="R-410A", charge_ng=11_793_402_000_000,
              chain_hash=f"{10:064x}"),
        Event(11, 3, EventKind.ADD, date(2025, 3, 11), mass_ng=8_175_000_000_000, chain_hash=f"{11:064x}"),
        Event(12, 3, EventKind.ADD, date(2025, 9, 9), mass_ng=9_309_000_000_000, chain_hash=f"{12:064x}"),
    ))


def _book(site: Site) -> dict:  # type: ignore[type-arg]
    return reporting.logbook_data(_ac(site), REF, from_on=None, to_on=date(2025, 12, 31), obligations=(),
                                  cylinders={})


def test_a_non_us_site_under_us_regimes_gets_leak_rates_pounds_and_their_basis() -> None:
    book = _book(DE_UNDER_US)
    # US 40 CFR 82.157 judges the leak rate at each addition: both additions get a row
    assert [r["event_id"] for r in book["leak_rates"]] == [11, 12]
    assert book["full_charge_lb"] is not None
    assert book["gwp_basis"] == "ar4" == reporting.site_basis(DE_UNDER_US)  # the US regimes' basis
    assert book["record_title"] is None and book["record_items"] == []  # no EU Art 6 map


def test_a_us_site_under_the_eu_regime_gets_no_leak_rates_and_the_art6_map() -> None:
    book = _book(US_UNDER_EU)
    assert book["leak_rates"] == [] and book["full_charge_lb"] is None
    assert book["gwp_basis"] == "eu" == reporting.site_basis(US_UNDER_EU)
    # EU 517/2014 Art 6(1)(a)-(g), kept by Reg. (EU) 2024/573 Art 7: seven record items
    assert book["record_title"] == "EU 517/2014 Art 6"
    assert [item for item, _, _ in book["record_items"]] == ["(a)", "(b)", "(c)", "(d)", "(e)", "(f)", "(g)"]


def test_logbook_spreadsheets_follow_the_regimes(tmp_path: Path) -> None:
    def notes(site: Site) -> tuple[dict[str, str], list[str]]:
        wb = openpyxl.load_workbook(write_logbook_xlsx(tmp_path / f"{site.code}.xlsx", _book(site)))
        return {r[0]: r[1] for r in wb["notes"].iter_rows(values_only=True) if r[0]}, wb.sheetnames

    us_notes, us_sheets = notes(DE_UNDER_US)
    eu_notes, eu_sheets = notes(US_UNDER_EU)
    assert "leak rates" in us_sheets and "leak rates" not in eu_sheets
    assert not any(k.startswith("EU 517/2014 Art 6") for k in us_notes)
    assert all(f"EU 517/2014 Art 6{item}" in eu_notes for item in ("(a)", "(g)"))


def test_an_estate_basis_is_the_sites_shared_basis_else_the_fallback() -> None:
    assert reporting.default_basis_of_sites([DE_UNDER_US, replace(DE_UNDER_US, id=3, code="DE-Y")]) == "ar4"
    assert reporting.default_basis_of_sites([DE_UNDER_US, US_UNDER_EU]) == reporting.FALLBACK_BASIS == "eu"
    # a site without a known regime takes the fallback basis
    assert reporting.site_basis(replace(US_UNDER_EU, regimes=())) == "eu"


def test_a_new_sites_mass_unit_follows_its_regimes(db: Database) -> None:
    # US regimes state charges in pounds (40 CFR 82.152 thresholds in lb); EU/GB in kg
    assert add_site(db, code="DE-LB", name="A", country="DE", regimes=US_REGIMES).mass_unit == "lb"
    assert add_site(db, code="US-KG", name="B", country="US", subdivision="US-TX", regimes=("eu",)).mass_unit == "kg"
    assert add_site(db, code="US-LB", name="C", country="US", subdivision="US-TX").mass_unit == "lb"
    assert add_site(db, code="DE-KG", name="D", country="DE").mass_unit == "kg"
