"""A logbook says what the rest of the tool says about the same system: its own findings only,
the CO2e `system show` prints, and the leak state the rules hold (on both databases).
"""

from __future__ import annotations

from datetime import date

from ledger.domain.drafts import EventDraft
from ledger.domain.records import EventKind
from ledger.services import reporting
from ledger.services.recording import add_site, add_system
from ledger.store.db import Database
from ledger.units import parse_mass_mg

# --- findings are narrowed by system name, not by string prefix -------------------------------


def test_a_tag_does_not_get_the_findings_of_a_longer_tag(db: Database) -> None:
    add_site(db, code="DE-HAM", name="Store", country="DE")
    # R-404A is an Annex I F-gas (2024/573), so the eu regime covers LT; R-744 (CO2) is not an
    # F-gas, so LT-RACK gets the finding "no covered regime applies" (common practice: CO2 is
    # outside the F-gas leak-check duties).
    add_system(db, site_code="DE-HAM", tag="LT", refrigerant="R-404A", charge_mg=parse_mass_mg("20 kg"),
               application="commercial-refrigeration", in_service_on=date(2024, 1, 10))
    add_system(db, site_code="DE-HAM", tag="LT-RACK", refrigerant="R-744", charge_mg=parse_mass_mg("40 kg"),
               application="commercial-refrigeration", in_service_on=date(2024, 1, 10))
    books = {b["system"]["tag"]: b for b in reporting.site_logbooks(db, site_code="DE-HAM", to_on=date(2024, 6, 30))}
    assert {f["source"] for f in books["LT-RACK"]["findings"]} == {"DE-HAM/LT-RACK"}
    assert all(f["source"] != "DE-HAM/LT-RACK" for f in books["LT"]["findings"])
    one = reporting.logbook(db, site_code="DE-HAM", tag="LT", to_on=date(2024, 6, 30))
    assert one["findings"] == books["LT"]["findings"]


def test_system_named_takes_the_whole_name() -> None:
    names = {"S/LT", "S/LT-RACK", "S/LT 2"}
    # finding sources: "SITE/TAG", "SITE/TAG YYYY-MM-DD", "SITE/TAG detector CH"; problem
    # lines: "SITE/TAG: event ..." (ledger/services/integrity.py Verification.problems)
    assert reporting.system_named("S/LT-RACK", names) == "S/LT-RACK"
    assert reporting.system_named("S/LT-RACK: event 7 hash: changed", names) == "S/LT-RACK"
    assert reporting.system_named("S/LT 2024-05-01", names) == "S/LT"
    assert reporting.system_named("S/LT 2 2024-05-01", names) == "S/LT 2"
    assert reporting.system_named("S/LT: event 3 link: broken", names) == "S/LT"
    assert reporting.system_named("S/LTX", names) is None
    assert reporting.system_named("guard: trigger missing", names) is None
