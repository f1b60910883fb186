"""Regime us-wa: Washington refrigerant management program, chapter 173-443 WAC Part II.

Sources, read in stored copies of app.leg.wa.gov (and its justia / casetext mirrors) in
December 2026, quoted beside each check: WAC 173-443-020(4) (scope), -115 (registration),
-145(1)-(2)(a)(i) (monthly inspection of 1 500 lb and more, automatic leak detection by
1 January 2025), -195 (records, and the 14 days of -165 it cites). The quarterly and annual
inspection bands, their start dates and the annual report of -185 are from memory (the texts
were not found), and the AR4 GWP basis too (-030 not read). "TEST-149" / "TEST-150" are
fictitious refrigerants of GWP exactly 149 / 150. 50 lb = 22 679 618 500 000 ng exactly
(1 lb = 0.45359237 kg, 1959 agreement).
"""

from __future__ import annotations

from decimal import Decimal

import pytest

from ledger.domain.records import Application, Confidence, ObligationKind, ObligationStatus
from ledger.reference import Reference, Refrigerant, load_reference
from ledger.rules import default_regimes, us_wa
from ledger.rules.common import BELOW_THRESHOLD, OUT_OF_SCOPE
from tests.domain import D, Log, lb, site, system
from tests.rules import REF, of_kind, small_reference, summary
from tests.rules import _component as component

OPEN, MET, OVERDUE = ObligationStatus.OPEN, ObligationStatus.MET, ObligationStatus.OVERDUE
INSPECT, REPAIR, REPORT = (ObligationKind.LEAK_INSPECTION, ObligationKind.REPAIR,
                           ObligationKind.REPORT)
DETECT = ObligationKind.DETECTION_SYSTEM
WA_SITE = site("WA1", "US", ("us-82f", "us-84c", "us-wa"), subdivision="US-WA")
FIFTY_LB = 22_679_618_500_000  # 50 lb in ng, exact

_small = small_reference()
# the test table plus a fictitious refrigerant one below the GWP 150 line
REF_149 = Reference(
    {**_small.components, "TEST-149": component("TEST-149", "HFC", "I", "149", "149")},
    {**_small.refrigerants,
     "TEST-149": Refrigerant("TEST-149", (), "A1", (("TEST-149", Decimal(100)),), False, "test")})


def _history(log, application=Application.COMMERCIAL_REFRIGERATION):
    return log.history(WA_SITE, system(log.system_id, "WA1", application=application))


def _run(logs, as_of, application=Application.COMMERCIAL_REFRIGERATION, reference=REF):
    return us_wa.compute_obligations([_history(log, application) for log in logs], reference,
                                     as_of)


def _tier(refrigerant, charge_ng, detection=False, as_of=D(2028, 6, 1), reference=REF):
    log = Log()
    log.in_service(D(2023, 1, 1), refrigerant, charge_ng)
    if detection:
        log.detection_on(D(2023, 1, 1))
    return us_wa.tier_of(_history(log), reference, as_of)


# --- scope: 173-443-020(4) -------------------------------------------------------------------


def test_scope_50_lb_or_more_of_gwp_150_or_more():
    # WAC 173-443-020(4): "a full charge of 50 or more pounds and that uses a refrigerant with
    # a global warming potential (GWP) of 150 or more": both bounds are inclusive
    assert _tier("TEST-150", FIFTY_LB).band == "50–200 lb"  # exactly 50 lb is in
    assert _tier("TEST-150", FIFTY_LB - 1).band == BELOW_THRESHOLD  # 1 ng under 50 lb
    assert _tier("TEST-150", lb("49.99")).band == BELOW_THRESHOLD
    assert _tier("TEST-150", lb(100), reference=REF_149).band == "50–200 lb"  # GWP 150 is in
    assert _tier("TEST-149", lb(100), reference=REF_149).band == OUT_OF_SCOPE  # GWP 149 is out
    assert _tier("R-744", lb(5000)).band == OUT_OF_SCOPE  # CO2, GWP 1


@pytest.mark.parametrize(("refrigerant", "covered"), [
    # AR4 100-year GWPs of the packaged reference data (IPCC AR4 WG1 Table 2.14 via
    # globalwarmingpotentials, checked by tests/reference): R-404A 3 921.6, R-448A 1 385.8,
    # R-513A 629.2, R-22 1 810 are 150 or more; R-454C 145.1 and R-455A 145.2 (R-1234yf is not
    # listed in AR4 and counts 0), R-152a 124, R-1234ze(E) (not listed, 0), R-744 1 are not.
    ("R-404A", True), ("R-448A", True), ("R-513A", True), ("R-22", True),
    ("R-454C", False), ("R-455A", False), ("R-152a", False), ("R-1234ze(E)", False),
    ("R-744", False),
])
def test_real_refrigerants_on_the_ar4_basis(refrigerant, covered):
    reference = load_reference()
    tier = _tier(refrigerant, lb(300), reference=reference)
    assert (tier.band != OUT_OF_SCOPE) is covered, tier.reason


def test_gwp_basis_is_ar4_from_memory():
    # WAC 173-443-030 was not read: AR4 is the basis of us-ca and us-84c and of Ecology's GHG
    # reporting values ("the GWP of HFCs ranges from 12 to 14,800", 2021 bill report on
    # E2SHB 1050), so it is used here and marked from memory
    assert us_wa.GWP_BASIS == "ar4"
    marks = {c.name: c.basis.confidence for c in us_wa.CONSTANTS}
    assert marks["refrigerant GWP from (AR4)"] is Confidence.MEMORY


# --- bands and periodic inspections: 173-443-145 ----------------------------------------------


def test_bands_by_full_charge():
    # 173-443-115(1)-(3) and -145(1): ">= 1,500 pounds"; "greater than 199 pounds, but less
    # than 1,500 pounds"; "greater than or equal to 50 pounds, but less than 200 pounds"
    assert _tier("R-404A", lb("199.99")).band == "50–200 lb"
    assert _tier("R-404A", lb(200)).band == "200–1 500 lb"
    assert _tier("R-404A", lb("1499.99")).band == "200–1 500 lb"
    assert _tier("R-404A", lb(1500)).band == "≥ 1 500 lb"
    # intervals: monthly (checked), quarterly and annual (from memory)
    assert _tier("R-404A", lb(1500)).interval_months == 1
    assert _tier("R-404A", lb(1500)).basis.confidence is Confidence.CHECKED
    assert _tier("R-404A", lb(200)).interval_months == 3
    assert _tier("R-404A", lb(50)).interval_months == 12
    assert _tier("R-404A", lb(200)).basis.confidence is Confidence.MEMORY


def test_a_band_before_its_start_date_has_no_interval_yet():
    # from memory (145): 200 to < 1 500 lb inspections from 1 January 2026; 115(2) checked
    early = _tier("R-404A", lb(300), as_of=D(2025, 6, 1))
    assert (early.band, early.interval_months) == ("200–1 500 lb", None)
    assert "from 2026-01-01" in early.reason
    assert _tier("R-404A", lb(300), as_of=D(2026, 1, 1)).interval_months == 3


def test_monthly_inspection_of_1500_lb_from_2024():
    # 173-443-145(1)(b)(i): "Beginning January 1, 2024, … Conduct a leak inspection of the
    # full system each month" (checked); calendar months are our reading
    log = Log()
    log.in_service(D(2020, 5, 1), "R-404A", lb(1600))
    obs, _ = _run([log], D(2024, 2, 15))
    assert [(o.earliest_on, o.due_on, o.status) for o in of_kind(obs, INSPECT)] == [
        (D(2024, 1, 1), D(2024, 1, 31), OVERDUE), (D(2024, 2, 1), D(2024, 2, 29), OPEN)]


def test_automatic_leak_detection_waives_the_monthly_inspection():
    # 173-443-145(1)(b)(i): "… unless an automatic leak detection system … is installed and
    # functioning correctly on the full system"
    log = Log()
    log.in_service(D(2024, 1, 10), "R-404A", lb(1600))
    log.detection_on(D(2024, 3, 1))
    obs, _ = _run([log], D(2024, 6, 1))
    assert [o.due_on for o in of_kind(obs, INSPECT)] == [D(2024, 1, 31), D(2024, 2, 29)]
    assert _tier("R-404A", lb(1600), detection=True).interval_months is None


def test_quarterly_inspection_of_200_to_1500_lb_from_2026():
    # from memory: 200 to < 1 500 lb quarterly from 1 January 2026 (the band's registration
    # date in 173-443-115(2), checked: "By March 15, 2026")
    log = Log()
    log.in_service(D(2023, 6, 1), "R-448A", lb(300))
    assert of_kind(_run([log], D(2025, 12, 31))[0], INSPECT) == []
    seen = log.check(D(2026, 2, 10))
    obs, _ = _run([log], D(2026, 8, 1))
    assert [(o.earliest_on, o.due_on, o.status, o.met_by) for o in of_kind(obs, INSPECT)] == [
        (D(2026, 1, 1), D(2026, 3, 31), MET, seen.id),
        (D(2026, 4, 1), D(2026, 6, 30), OVERDUE, None),
        (D(2026, 7, 1), D(2026, 9, 30), OPEN, None)]


def test_annual_inspection_of_50_to_200_lb_from_2028():
    # from memory: 50 to < 200 lb annually from 1 January 2028 (173-443-115(3), checked:
    # "By March 15, 2028")
    log = Log()
    start = log.in_service(D(2024, 3, 1), "R-404A", lb(60))
    assert of_kind(_run([log], D(2027, 12, 31))[0], INSPECT) == []
    obs, _ = _run([log], D(2028, 2, 1))
    assert summary(of_kind(obs, INSPECT)) == [
        ("leak-inspection", D(2028, 12, 31), "open", start.id, None)]


# --- repair: 173-443-165 as cited by -195(1)(c) -----------------------------------------------


def test_leak_repair_within_14_days():
    # 173-443-195(1)(c): "documentation of any conditions allowing more than 14 days to repair a
    # refrigerant leak after detection under WAC 173-443-165 (3) or (4)"
    log = Log()
    log.in_service(D(2023, 1, 1), "R-404A", lb(100))  # a small system: from 2024 too
    leak = log.check(D(2024, 5, 20), leak=True)
    obs, _ = _run([log], D(2024, 6, 5))
    assert summary(of_kind(obs, REPAIR)) == [("repair", D(2024, 6, 3), "overdue", leak.id, None)]
    fix = log.repair(D(2024, 6, 2))
    repair = of_kind(_run([log], D(2024, 6, 5))[0], REPAIR)[0]
    assert (repair.status, repair.met_by) == (MET, fix.id)
    assert repair.basis.confidence is Confidence.CHECKED


def test_no_repair_duty_before_2024_or_out_of_scope():
    # 173-443-195(1): "Beginning January 1, 2024"; 020(4): GWP 150 or more
    log = Log()
    log.in_service(D(2022, 1, 1), "R-404A", lb(300))
    log.check(D(2023, 11, 2), leak=True)
    assert of_kind(_run([log], D(2024, 1, 10))[0], REPAIR) == []
    co2 = Log()
    co2.in_service(D(2024, 1, 1), "R-744", lb(3000))
    co2.check(D(2024, 4, 2), leak=True)
    assert _run([co2], D(2024, 6, 1))[0] == []


# --- automatic leak detection: 173-443-145(2) -------------------------------------------------


def test_automatic_leak_detection_by_2025_for_refrigeration_of_1500_lb():
    # 173-443-145(2)(a)(i): "The owner or operator of a refrigeration system with a full charge
    # greater than or equal to 1,500 pounds … must … By January 1, 2025, install an automatic
    # leak detection system"
    log = Log()
    log.in_service(D(2019, 1, 1), "R-404A", lb(1600))
    (duty,) = of_kind(_run([log], D(2025, 2, 1))[0], DETECT)
    assert (duty.due_on, duty.status) == (D(2025, 1, 1), OVERDUE)
    fitted = log.detection_on(D(2024, 11, 5))
    (duty,) = of_kind(_run([log], D(2025, 2, 1))[0], DETECT)
    assert (duty.status, duty.met_by) == (MET, fitted.id)
    # an air conditioning system is not a refrigeration system: no duty (145(2) names
    # refrigeration systems only; its monthly inspection of 145(1) stays)
    ac = Log()
    ac.in_service(D(2019, 1, 1), "R-410A", lb(1600))
    obs, _ = _run([ac], D(2025, 2, 1), application=Application.COMFORT_COOLING)
    assert of_kind(obs, DETECT) == [] and of_kind(obs, INSPECT)
    # a system placed later needs it from placement (our reading)
    new = Log()
    new.in_service(D(2025, 6, 1), "R-404A", lb(1600))
    assert [o.due_on for o in of_kind(_run([new], D(2025, 7, 1))[0], DETECT)] == [D(2025, 6, 1)]
    # under 1 500 lb: none
    mid = Log()
    mid.in_service(D(2019, 1, 1), "R-404A", lb("1499.99"))
    assert of_kind(_run([mid], D(2025, 2, 1))[0], DETECT) == []


# --- registration (173-443-115) and annual report (-185) --------------------------------------


def _registrations(obligations):
    return [(o.due_on, o.system_id) for o in of_kind(obligations, REPORT) if "register" in o.detail]


def test_registration_dates_by_band():
    # 173-443-115(1)(a) "By March 15, 2024, for … systems that begin operations on or before
    # January 1, 2024"; (2)(a) "By March 15, 2026" (200 to 1,499 lb); (3)(a) "By March 15,
    # 2028" (50 to 199 lb)
    big, mid, small = Log(1), Log(2, first_id=100), Log(3, first_id=200)
    big.in_service(D(2020, 1, 1), "R-404A", lb(1600))
    mid.in_service(D(2020, 1, 1), "R-404A", lb(300))
    small.in_service(D(2020, 1, 1), "R-404A", lb(60))
    obs, _ = _run([big, mid, small], D(2028, 1, 10))
    assert _registrations(obs) == [(D(2024, 3, 15), 1), (D(2026, 3, 15), 2), (D(2028, 3, 15), 3)]
    reg = next(o for o in of_kind(obs, REPORT) if o.system_id == 1)
    assert reg.basis.confidence is Confidence.CHECKED and reg.status is OVERDUE


def test_registration_of_a_system_that_begins_later():
    # 173-443-115(1)(b): "By March 15th of the calendar year after the year in which the …
    # system begins operations for systems that begin operating after January 1, 2024"
    log = Log()
    log.in_service(D(2024, 5, 1), "R-404A", lb(1600))
    assert _registrations(_run([log], D(2024, 6, 1))[0]) == [(D(2025, 3, 15), 1)]
    # (2)(b): a 300 lb system placed in July 2026 registers by 15 March 2027; one placed in
    # 2025 by the band's date, 15 March 2026 ((2)(a): "on or before January 1, 2026")
    late, early = Log(1), Log(2, first_id=50)
    late.in_service(D(2026, 7, 1), "R-404A", lb(300))
    early.in_service(D(2025, 7, 1), "R-404A", lb(300))
    assert _registrations(_run([late, early], D(2026, 8, 1))[0]) == [
        (D(2026, 3, 15), 2), (D(2027, 3, 15), 1)]


def test_annual_report_by_15_march_from_memory():
    # 173-443-185 (not read, from memory): by 15 March for the previous calendar year; the
    # 1 500 lb band from the report for 2024, 200-1 499 lb from 2026, 50-199 lb from 2028
    big = Log()
    big.in_service(D(2020, 1, 1), "R-404A", lb(1600))
    reports = [o for o in of_kind(_run([big], D(2025, 6, 1))[0], REPORT) if o.system_id is None]
    assert [(r.due_on, r.status) for r in reports] == [(D(2025, 3, 15), OVERDUE),
                                                       (D(2026, 3, 15), OPEN)]
    assert "annual report for 2024" in reports[0].detail
    assert reports[0].basis.confidence is Confidence.MEMORY
    mid = Log()
    mid.in_service(D(2020, 1, 1), "R-404A", lb(300))
    facility = [o.due_on for o in of_kind(_run([mid], D(2027, 1, 1))[0], REPORT)
                if o.system_id is None]
    assert facility == [D(2027, 3, 15)]


# --- registry and constants -------------------------------------------------------------------


def test_washington_sites_get_the_federal_regimes_and_us_wa():
    # WAC 173-443 applies in Washington; the federal rules apply everywhere in the US
    assert default_regimes("US", "US-WA") == ("us-82f", "us-84c", "us-wa")
    assert default_regimes("us", "us-wa") == ("us-82f", "us-84c", "us-wa")


def test_constants_name_their_sections():
    cites = {c.basis.citation for c in us_wa.CONSTANTS}
    assert {"WAC 173-443-020(4)", "WAC 173-443-115", "WAC 173-443-145(1)(b)(i)",
            "WAC 173-443-145(2)(a)(i)", "WAC 173-443-195(1)"} <= cites
    marks = {c.name: c.basis.confidence for c in us_wa.CONSTANTS}
    assert marks["system full charge from"] is Confidence.CHECKED
    assert marks["records kept"] is Confidence.CHECKED
    assert marks["annual report due"] is Confidence.MEMORY
    assert us_wa.REGIME_VERSION == "us-wa-1"


def test_2026_12_washington_sites_accept_section_608_certificates() -> None:
    # WAC 173-443-205(1): the person "must hold a current, valid, and applicable certificate
    # issued under 40 C.F.R. § 82.161" (app.leg.wa.gov, read December 2026). The regime names
    # the certificates valid at its sites itself, so no code outside ledger/rules lists it.
    from ledger.domain.certificates import SCOPE_REGIMES, Scope
    from ledger.rules import REGIMES, default_regimes, site_profile

    profile = site_profile(default_regimes("US", "US-WA"))
    assert profile.certificate_scopes == frozenset({"us-608"})
    # The regimes' declarations agree with the table kept for callers that give codes only.
    for scope, codes in SCOPE_REGIMES.items():
        for code in codes:
            assert scope.value in REGIMES[code].certificate_scopes
    assert Scope.US_608.value in REGIMES["us-wa"].certificate_scopes
