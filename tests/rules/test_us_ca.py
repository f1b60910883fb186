"""Regime us-ca: California refrigerant management program, 17 CCR 95380 ff.

Inspection intervals are 17 CCR 95385 and the repair deadline 95386 as given in
reference-notes.md; scope and size classes from the same notes (secondary); the report date
from the notes without a section number. Tests named test_2026_12_* are the corrections of
the check in December 2026 (reference-notes.md, "Checked in December 2026"). "TEST-150" is a fictitious refrigerant
of GWP exactly 150. 50 lb = 22 679 618 500 000 ng exactly (1 lb = 0.45359237 kg, 1959 agreement).
"""

from __future__ import annotations

from ledger.domain.records import Application, Confidence, ObligationKind, ObligationStatus
from ledger.rules import us_ca
from ledger.rules.common import BELOW_THRESHOLD, OUT_OF_SCOPE
from tests.domain import D, Log, lb, site, system
from tests.rules import REF, of_kind, summary

OPEN, MET, OVERDUE = ObligationStatus.OPEN, ObligationStatus.MET, ObligationStatus.OVERDUE
INSPECT = ObligationKind.LEAK_INSPECTION
CA_SITE = site("CA1", "US", ("us-82f", "us-84c", "us-ca"), subdivision="US-CA")


def _history(log, system_id=1):
    return log.history(CA_SITE, system(system_id, "CA1",
                                       application=Application.COMMERCIAL_REFRIGERATION))


def _run(logs, as_of):
    return us_ca.compute_obligations([_history(log, log.system_id) for log in logs], REF, as_of)


def _tier(refrigerant, charge_ng, detection=False):
    log = Log()
    log.in_service(D(2025, 1, 1), refrigerant, charge_ng)
    if detection:
        log.detection_on(D(2025, 1, 1))
    return us_ca.tier_of(_history(log), REF, D(2025, 6, 1))


def test_scope_over_50_lb_of_gwp_150_or_more():
    # 17 CCR 95380 ff. (notes): > 50 lb; GWP >= 150 (AR4)
    # 95385(c): "full charge greater than 50, but less than 200 pounds": exactly 50 lb is not in
    assert _tier("TEST-150", 22_679_618_500_000).band == BELOW_THRESHOLD  # exactly 50 lb
    assert _tier("TEST-150", lb(50)).band == BELOW_THRESHOLD
    assert _tier("TEST-150", 22_679_618_500_001).band == "50–200 lb"  # 1 ng over 50 lb
    assert _tier("TEST-53", lb(100)).band == OUT_OF_SCOPE  # GWP 53 < 150
    assert _tier("R-744", lb(5000)).band == OUT_OF_SCOPE


def test_inspection_interval_by_size():
    # 17 CCR 95385(c) > 50-< 200 lb annually; (b) 200-< 2 000 lb quarterly; (a)(1)(A)
    # >= 2 000 lb monthly (justia / casetext, reference-notes.md "Checked in December 2026")
    assert _tier("R-404A", lb(199)).interval_months == 12
    assert _tier("R-404A", lb(200)).interval_months == 3
    assert _tier("R-404A", lb(1999)).interval_months == 3
    assert _tier("R-404A", lb(2000)).interval_months == 1
    assert _tier("R-404A", lb(200)).basis.confidence is Confidence.CHECKED


def test_2026_12_automatic_leak_detection_waives_inspections_of_large_and_medium_systems():
    # Correction checked 2026-12: 17 CCR 95385(a)(1)(B) "A monthly leak inspection … is not
    # required … if an automatic leak detection system … is used"; 95385(b) "A leak
    # inspection … is not required pursuant to this subsection (b) if an automatic leak
    # detection system … is used" (justia / casetext via reference-notes.md). No quarterly
    # duty for >= 2 000 lb with ALD was found, so none is listed.
    large = _tier("R-404A", lb(2000), detection=True)
    medium = _tier("R-404A", lb(500), detection=True)
    assert (large.interval_months, large.basis.citation) == (None, "17 CCR 95385(a)(1)(B)")
    assert (medium.interval_months, medium.basis.citation) == (None, "17 CCR 95385(b)")
    # the annual inspection of a small system is not waived (95385(c) has no such sentence)
    assert _tier("R-404A", lb(100), detection=True).interval_months == 12
    log = Log()
    log.in_service(D(2025, 1, 1), "R-404A", lb(500))
    log.detection_on(D(2025, 1, 1))
    leak = log.check(D(2025, 5, 20), leak=True)
    obs, _ = _run([log], D(2025, 12, 1))
    assert of_kind(obs, INSPECT) == []
    # the repair duty of 95386 stays
    assert [o.caused_by for o in of_kind(obs, ObligationKind.REPAIR)] == [leak.id]


def test_2026_12_monthly_inspection_names_the_indoor_condition():
    # 17 CCR 95385(a)(1)(A): monthly "if: 1. The refrigerant circuit is located entirely
    # within an enclosed building" (justia via reference-notes.md); (a)(3) not read.
    tier = _tier("R-404A", lb(2500))
    assert tier.interval_months == 1 and "inside an enclosed building" in tier.reason
    assert tier.basis.citation == "17 CCR 95385(a)(1)(A)"


def test_annual_inspection_due_at_the_end_of_the_calendar_year():
    log = Log()
    start = log.in_service(D(2025, 3, 10), "R-404A", lb(100))
    obs, _ = _run([log], D(2025, 6, 1))
    assert summary(obs) == [("leak-inspection", D(2025, 12, 31), "open", start.id, None)]
    seen = log.check(D(2025, 5, 1))
    obs, _ = _run([log], D(2025, 6, 1))
    # the period holding as_of is met, so next year's is listed too
    assert [(o.earliest_on, o.due_on, o.status, o.met_by) for o in obs] == [
        (D(2025, 3, 10), D(2025, 12, 31), MET, seen.id),
        (D(2026, 1, 1), D(2026, 12, 31), OPEN, None),
    ]


def test_quarterly_inspections_due_at_quarter_end():
    log = Log()
    log.in_service(D(2025, 2, 10), "R-404A", lb(300))
    seen = log.check(D(2025, 3, 31))
    obs, _ = _run([log], D(2025, 10, 5))
    assert [(o.due_on, o.status, o.met_by) for o in of_kind(obs, INSPECT)] == [
        (D(2025, 3, 31), MET, seen.id),
        (D(2025, 6, 30), OVERDUE, None),
        (D(2025, 9, 30), OVERDUE, None),
        (D(2025, 12, 31), OPEN, None),
    ]


def test_large_system_monthly_until_automatic_leak_detection_is_fitted():
    # 17 CCR 95385(a)(1)(A)/(B), as above
    log = Log()
    log.in_service(D(2025, 1, 31), "R-404A", lb(2500))
    obs, _ = _run([log], D(2025, 3, 15))
    assert [o.due_on for o in of_kind(obs, INSPECT)] == [
        D(2025, 1, 31), D(2025, 2, 28), D(2025, 3, 31)]
    log.detection_on(D(2025, 3, 1))
    obs, _ = _run([log], D(2025, 5, 1))
    # from March the system uses automatic leak detection: no further monthly inspections
    assert [o.due_on for o in of_kind(obs, INSPECT)] == [D(2025, 1, 31), D(2025, 2, 28)]


def test_leak_repair_within_14_days():
    # 17 CCR 95386: repair within 14 days of detection
    log = Log()
    log.in_service(D(2025, 1, 1), "R-404A", lb(300))
    leak = log.check(D(2025, 5, 20), leak=True)
    obs, _ = _run([log], D(2025, 6, 5))
    assert summary(of_kind(obs, ObligationKind.REPAIR)) == [
        ("repair", D(2025, 6, 3), "overdue", leak.id, None)]
    fix = log.repair(D(2025, 6, 2))
    repair = of_kind(_run([log], D(2025, 6, 5))[0], ObligationKind.REPAIR)[0]
    assert (repair.status, repair.met_by) == (MET, fix.id)


def test_facility_report_for_large_and_medium_facilities_only():
    # annual report by 1 March for large and medium facilities (CARB list-serve 2011 and
    # CARB 2014 notice via reference-notes.md; section number not confirmed)
    big, small = Log(system_id=1), Log(system_id=2, first_id=100)
    big.in_service(D(2025, 1, 1), "R-404A", lb(2100))
    small.in_service(D(2025, 1, 1), "R-404A", lb(120))
    reports = of_kind(_run([big, small], D(2025, 6, 1))[0], ObligationKind.REPORT)
    assert [(r.due_on, r.status, r.system_id, r.site_code) for r in reports] == [
        (D(2026, 3, 1), OPEN, None, "CA1")]
    assert "large facility" in reports[0].detail and "SYS1" in reports[0].detail
    assert reports[0].basis.confidence is Confidence.SECONDARY
    # on 1 March itself the report for the year before is the one due
    assert [r.due_on for r in of_kind(_run([big], D(2026, 3, 1))[0], ObligationKind.REPORT)] == [
        D(2026, 3, 1)]
    assert of_kind(_run([small], D(2025, 6, 1))[0], ObligationKind.REPORT) == []


def test_2026_12_unfiled_annual_report_stays_overdue_when_the_next_is_due():
    # Correction checked 2026-12 (issue 14, item 5): the 1 March report (CARB list-serve 2011:
    # "annual reports are due by March 1, 2012", reference-notes.md) does not lapse when the
    # next year's falls due; an unfiled one stays overdue, as the 125 % report does.
    log = Log()
    log.in_service(D(2023, 6, 1), "R-404A", lb(2100))
    log.check(D(2023, 6, 30))
    reports = of_kind(_run([log], D(2025, 6, 1))[0], ObligationKind.REPORT)
    assert [(r.due_on, r.status) for r in reports] == [
        (D(2024, 3, 1), OVERDUE), (D(2025, 3, 1), OVERDUE), (D(2026, 3, 1), OPEN)]
    assert "annual report for 2023" in reports[0].detail
    # every year from the placement in service has its report, and a later record never takes
    # one away (the invariant tests/rules/test_properties.py checks: a later check leaves every
    # earlier-due obligation as it was)
    late = Log()
    late.in_service(D(2016, 1, 1), "R-404A", lb(2100))
    placed_only = [r.due_on for r in of_kind(_run([late], D(2025, 6, 1))[0], ObligationKind.REPORT)]
    late.check(D(2024, 12, 1))
    with_check = [r.due_on for r in of_kind(_run([late], D(2025, 6, 1))[0], ObligationKind.REPORT)]
    assert with_check == placed_only == [D(y + 1, 3, 1) for y in range(2016, 2026)]


def test_retired_system_stops_its_inspections():
    log = Log()
    log.in_service(D(2025, 1, 1), "R-404A", lb(300))
    seen = log.check(D(2025, 2, 1))
    log.retire(D(2025, 5, 15))
    obs, _ = _run([log], D(2026, 1, 1))
    assert [(o.due_on, o.status, o.met_by) for o in of_kind(obs, INSPECT)] == [
        (D(2025, 3, 31), MET, seen.id)]


def test_systems_from_before_the_program_start_in_2011():
    log = Log()
    log.in_service(D(2008, 6, 1), "R-404A", lb(100))
    obs, _ = _run([log], D(2011, 3, 1))
    assert [(o.earliest_on, o.due_on) for o in of_kind(obs, INSPECT)] == [
        (D(2011, 1, 1), D(2011, 12, 31))]


def test_constants():
    assert us_ca.GWP_BASIS == "ar4"
    assert {c.basis.citation for c in us_ca.CONSTANTS} >= {"17 CCR 95385", "17 CCR 95386"}
    assert us_ca.REGIME_VERSION == "us-ca-2"


def test_2026_12_raised_confidence_marks():
    # reference-notes.md "Checked in December 2026": program start (95385 "after January 1,
    # 2011"), > 50 lb (95385(c)) and the 200 / 2 000 lb size classes (95383, 95385) are
    # checked; the 1 March report date is secondary.
    marks = {c.name: c.basis.confidence for c in us_ca.CONSTANTS}
    assert marks["program in force from"] is Confidence.CHECKED
    assert marks["system charge over"] is Confidence.CHECKED
    assert marks["medium size from"] is marks["large size from"] is Confidence.CHECKED
    assert marks["annual report due"] is Confidence.SECONDARY
