"""A top-up a servicing prohibition forbids is recorded with a warning and counted (issue 14).

Source of the prohibition: Reg. (EC) 1005/2009 Art 11(3) and the GB retained version (HCFCs
may not be used for servicing after 31 December 2014; from memory, see docs/exposure.md).
"""

from __future__ import annotations

from datetime import date

from ledger.domain.drafts import EventDraft
from ledger.domain.records import EventKind
from ledger.services.recording import add_site, add_system, log_event
from ledger.services.reporting import annual_summary
from ledger.store.db import Database
from ledger.units import parse_mass_ng


def test_2026_12_virgin_hcfc_top_up_in_gb_is_recorded_warned_and_counted(db: Database) -> None:
    add_site(db, code="GB-X", name="GB store", country="GB")
    add_system(db, site_code="GB-X", tag="CU-22", refrigerant="R-22", charge_ng=parse_mass_ng("5.6 kg"),
               application="commercial-refrigeration", in_service_on=date(2001, 6, 12))
    logged = log_event(db, site_code="GB-X", tag="CU-22", draft=EventDraft(
        kind=EventKind.ADD, performed_on=date(2026, 2, 11), mass_ng=parse_mass_ng("1.2 kg"),
        recorded_by="test"))
    assert logged.event_id  # never refused
    # no technician named: the uncertified-work warning (issue 13) comes first, then the ban
    assert [w.field for w in logged.warnings] == ["--tech", "servicing"]
    assert "1005/2009 Art 11(3)" in logged.warnings[1].message
    s = annual_summary(db, year=2026, site_code=None, basis=None, as_of=date(2026, 12, 31))
    assert s["estate"]["prohibited_top_ups"] == 1
    assert str(s["estate"]["prohibited_top_up_kg"]) in ("1.2", "1.200000")
    assert s["prohibited_top_ups"][0]["system"] == "GB-X/CU-22"
    # R-22 is outside scope 1 (GHG Protocol covers Kyoto gases only)
    smb = s["scope1"][1]
    assert [p["refrigerant"] for p in smb["outside_scope1"]] == ["R-22"]
    assert smb["emissions_kg"] == 0


def test_hfc_top_up_in_gb_is_not_warned(db: Database) -> None:
    add_site(db, code="GB-Y", name="GB store", country="GB")
    add_system(db, site_code="GB-Y", tag="RACK", refrigerant="R-449A", charge_ng=parse_mass_ng("165 kg"),
               application="commercial-refrigeration", in_service_on=date(2014, 3, 24))
    logged = log_event(db, site_code="GB-Y", tag="RACK", draft=EventDraft(
        kind=EventKind.ADD, performed_on=date(2026, 2, 11), mass_ng=parse_mass_ng("3 kg"),
        recorded_by="test"))
    assert not [w for w in logged.warnings if w.field == "servicing"]
