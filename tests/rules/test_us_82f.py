"""Regime us-82f: 40 CFR 82 Subpart F, ODS appliances of 50 lb and up.

Leak rates are hand-worked from the definition in 40 CFR 82.152 ("leak rate"); thresholds are
40 CFR 82.157(c)(2); deadlines 82.157(d), (e), (g), (j) as marked in reference-notes.md.
1 lb = 0.45359237 kg exactly (1959 agreement) = 453 592 370 000 ng, so 50 lb = 22 679 618 500 000 ng.
"""

from __future__ import annotations

from ledger.domain.records import Application, Confidence, ObligationKind, ObligationStatus
from ledger.rules import us_82f
from ledger.rules.common import BELOW_THRESHOLD, OUT_OF_SCOPE
from tests.domain import D, Log, kg, lb, site, system
from tests.rules import REF, of_kind, summary

OPEN, MET, OVERDUE = ObligationStatus.OPEN, ObligationStatus.MET, ObligationStatus.OVERDUE
REPAIR = ObligationKind.REPAIR
VERIFY = ObligationKind.VERIFICATION_TEST
INSPECT = ObligationKind.LEAK_INSPECTION
COMMERCIAL = Application.COMMERCIAL_REFRIGERATION


def _history(log, application=COMMERCIAL, method="annualizing"):
    return log.history(site("US1", "US", ("us-82f", "us-84c"), method=method),
                       system(1, "US1", application=application))


def _run(log, as_of, **kw):
    return us_82f.compute_obligations([_history(log, **kw)], REF, as_of)


def _tier(refrigerant, charge_ng):
    log = Log()
    log.in_service(D(2024, 1, 1), refrigerant, charge_ng)
    return us_82f.tier_of(_history(log), REF, D(2024, 6, 1))


def test_scope_starts_at_50_lb_compared_in_exact_nanograms():
    # 40 CFR 82.157(a): "a full charge of 50 or more pounds"; 50 lb = 22 679 618 500 000 ng
    assert _tier("R-22", 22_679_618_499_999).band == BELOW_THRESHOLD
    assert _tier("R-22", 22_679_618_500_000).band == "≥ 50 lb ozone-depleting"
    assert _tier("R-22", lb(50)).band == "≥ 50 lb ozone-depleting"


def test_only_ozone_depleting_refrigerants():
    # 40 CFR 82.157(a) since 10 April 2020: class I/II or blends containing one
    assert _tier("R-404A", lb(500)).band == OUT_OF_SCOPE
    assert _tier("TEST-HCFC-MIX", lb(60)).band == "≥ 50 lb ozone-depleting"


def test_exactly_at_threshold_opens_nothing_just_over_opens_a_repair():
    # 82.157(c)(2): commercial refrigeration 20 %; first addition -> 365 days (82.152):
    # 20 kg / 100 kg = 20.00 % does not exceed; 20.000001 kg does
    log = Log()
    log.in_service(D(2024, 1, 1), "R-22", kg(100))
    log.top_up(D(2024, 6, 1), kg(20))
    assert _run(log, D(2024, 6, 2)) == ([], [])
    log = Log()
    log.in_service(D(2024, 1, 1), "R-22", kg(100))
    add = log.top_up(D(2024, 6, 1), kg("20.000001"))
    obs, _ = _run(log, D(2024, 6, 2))
    repair = of_kind(obs, REPAIR)
    # 82.157(d): repair within 30 days: 1 June + 30 days = 1 July
    assert summary(repair) == [("repair", D(2024, 7, 1), "open", add.id, None)]
    assert repair[0].basis.citation == "40 CFR 82.157(d)"


def test_annualizing_hand_worked_exceedance():
    # 82.152: 2 kg added 30 days after the previous addition to a 100 kg charge:
    # 2/100 x 365/30 x 100 = 24.33 % > 20 % (commercial refrigeration, 82.157(c)(2))
    log = Log()
    log.in_service(D(2024, 1, 1), "R-22", kg(100))
    log.top_up(D(2024, 3, 1), kg(1))
    add = log.top_up(D(2024, 3, 31), kg(2))
    repair = of_kind(_run(log, D(2024, 4, 1))[0], REPAIR)[0]
    assert (repair.caused_by, repair.due_on) == (add.id, D(2024, 4, 30))
    assert "24.33 % over the 20 % threshold" in repair.detail


def test_rolling_method_sees_the_same_additions_differently():
    # 82.152 rolling average: (1 + 2) / 100 = 3 % over the past 365 days: no exceedance
    log = Log()
    log.in_service(D(2024, 1, 1), "R-22", kg(100))
    log.top_up(D(2024, 3, 1), kg(1))
    log.top_up(D(2024, 3, 31), kg(2))
    assert _run(log, D(2024, 4, 1), method="rolling") == ([], [])


def test_thresholds_by_application():
    # 82.157(c)(2): comfort cooling 10 %, industrial process refrigeration 30 %
    def opened(application, added):
        log = Log()
        log.in_service(D(2024, 1, 1), "R-22", kg(100))
        log.top_up(D(2024, 6, 1), kg(added))
        return bool(of_kind(_run(log, D(2024, 6, 2), application=application)[0], REPAIR))

    assert not opened(Application.COMFORT_COOLING, "10")
    assert opened(Application.COMFORT_COOLING, "10.000001")
    assert not opened(Application.INDUSTRIAL_PROCESS, "30")
    assert opened(Application.INDUSTRIAL_PROCESS, "30.000001")


def test_repair_then_initial_and_follow_up_verification_tests():
    # 82.157(d) repair in 30 days; 82.157(e) initial test, follow-up within 10 days (secondary)
    log = Log()
    log.in_service(D(2024, 1, 1), "R-22", kg(100))
    add = log.top_up(D(2024, 6, 1), kg(25))
    fix = log.repair(D(2024, 6, 10))
    initial = log.follow_up(D(2024, 6, 11))
    follow = log.follow_up(D(2024, 6, 20))
    obs, findings = _run(log, D(2024, 7, 15))
    assert summary(of_kind(obs, REPAIR)) == [("repair", D(2024, 7, 1), "met", add.id, fix.id)]
    assert summary(of_kind(obs, VERIFY)) == [
        ("verification-test", D(2024, 6, 21), "met", initial.id, follow.id),
        ("verification-test", D(2024, 7, 1), "met", add.id, initial.id),
    ]
    assert of_kind(obs, VERIFY)[0].earliest_on == D(2024, 6, 11)
    assert findings == []


def test_missing_verification_tests_become_overdue():
    log = Log()
    log.in_service(D(2024, 1, 1), "R-22", kg(100))
    log.top_up(D(2024, 6, 1), kg(25))
    log.repair(D(2024, 6, 10))
    initial = log.follow_up(D(2024, 6, 11))
    obs, _ = _run(log, D(2024, 7, 15))
    follow_up = [o for o in of_kind(obs, VERIFY) if o.caused_by == initial.id][0]
    assert (follow_up.due_on, follow_up.status) == (D(2024, 6, 21), OVERDUE)


def test_failed_initial_verification_is_reported():
    log = Log()
    log.in_service(D(2024, 1, 1), "R-22", kg(100))
    log.top_up(D(2024, 6, 1), kg(25))
    log.repair(D(2024, 6, 10))
    log.follow_up(D(2024, 6, 11), passed=False)
    obs, findings = _run(log, D(2024, 6, 12))
    assert len(of_kind(obs, VERIFY)) == 1  # no follow-up test after a failed initial one
    assert "failed" in findings[0].message


def test_two_exceedances_before_the_repair_are_one_episode():
    log = Log()
    log.in_service(D(2024, 1, 1), "R-22", kg(100))
    first = log.top_up(D(2024, 6, 1), kg(25))
    log.top_up(D(2024, 6, 15), kg(10))  # 10/100 x 365/14 x 100: also over
    obs, _ = _run(log, D(2024, 6, 20))
    assert [o.caused_by for o in of_kind(obs, REPAIR)] == [first.id]


def test_retrofit_ends_the_repair_duty():
    log = Log()
    log.in_service(D(2024, 1, 1), "R-22", kg(100))
    log.top_up(D(2024, 6, 1), kg(25))
    change = log.retrofit(D(2024, 6, 20), "R-404A", kg(90))
    obs, _ = _run(log, D(2024, 8, 1))
    repair = of_kind(obs, REPAIR)[0]
    assert (repair.status, repair.met_by) == (MET, change.id) and "retrofit" in repair.detail
    assert of_kind(obs, VERIFY) == []


def test_additions_on_the_in_service_day_or_before_april_2020_open_nothing():
    log = Log()
    log.in_service(D(2020, 1, 1), "R-22", kg(100))
    log.top_up(D(2020, 1, 1), kg(50))  # initial charge: not counted (82.157(b))
    log.top_up(D(2020, 3, 1), kg(50))  # before 82.157 applied in this form (10 April 2020)
    assert _run(log, D(2020, 5, 1)) == ([], [])


def test_quarterly_inspections_for_large_commercial_systems():
    # 82.157(g) (from memory): commercial refrigeration >= 500 lb quarterly until a year
    # after the exceedance; calendar quarters are our reading
    log = Log()
    log.in_service(D(2024, 1, 1), "R-22", lb(600))
    add = log.top_up(D(2024, 5, 15), lb(200))
    seen = log.check(D(2024, 6, 20))
    inspections = of_kind(_run(log, D(2025, 8, 1))[0], INSPECT)
    assert [(i.earliest_on, i.due_on, i.status) for i in inspections] == [
        (D(2024, 5, 15), D(2024, 6, 30), MET),
        (D(2024, 7, 1), D(2024, 9, 30), OVERDUE),
        (D(2024, 10, 1), D(2024, 12, 31), OVERDUE),
        (D(2025, 1, 1), D(2025, 3, 31), OVERDUE),
        (D(2025, 4, 1), D(2025, 6, 30), OVERDUE),
    ]
    assert inspections[0].met_by == seen.id and inspections[0].caused_by == add.id
    assert inspections[0].basis.confidence is Confidence.MEMORY


def test_annual_inspections_for_comfort_cooling():
    log = Log()
    log.in_service(D(2024, 1, 1), "R-22", lb(100))
    log.top_up(D(2024, 5, 15), lb(20))
    inspections = of_kind(_run(log, D(2025, 2, 1), application=Application.COMFORT_COOLING)[0],
                          INSPECT)
    assert [(i.earliest_on, i.due_on, i.status) for i in inspections] == [
        (D(2024, 5, 15), D(2024, 12, 31), OVERDUE),
        (D(2025, 1, 1), D(2025, 12, 31), OPEN),
    ]


def test_chronic_leak_report_at_125_percent_in_a_calendar_year():
    # 82.157(j) (EPA fact sheet): >= 125 % of the full charge added in a calendar year ->
    # report by 1 March of the next year
    log = Log()
    log.in_service(D(2024, 1, 1), "R-22", kg(100))
    log.top_up(D(2024, 2, 1), kg(60))
    last = log.top_up(D(2024, 8, 1), kg(65))  # 125 kg = 125 %
    reports = of_kind(_run(log, D(2024, 9, 1))[0], ObligationKind.REPORT)
    assert summary(reports) == [("report", D(2025, 3, 1), "open", last.id, None)]
    assert reports[0].system_id == 1 and reports[0].site_code == "US1"
    log = Log()
    log.in_service(D(2024, 1, 1), "R-22", kg(100))
    log.top_up(D(2024, 2, 1), kg(60))
    log.top_up(D(2024, 8, 1), kg("64.999999"))  # 124.999999 %
    assert of_kind(_run(log, D(2024, 9, 1))[0], ObligationKind.REPORT) == []


def test_retired_system_drops_unmet_duties():
    log = Log()
    log.in_service(D(2024, 1, 1), "R-22", lb(600))
    log.top_up(D(2024, 6, 1), lb(200))
    end = log.retire(D(2024, 6, 5))
    obs, _ = _run(log, D(2025, 6, 1))
    assert summary(obs) == [("repair", D(2024, 7, 1), "met", 2, end.id)]


def test_unknown_method_falls_back_with_a_warning():
    log = Log()
    log.in_service(D(2024, 1, 1), "R-22", kg(100))
    log.top_up(D(2024, 6, 1), kg(25))
    obs, findings = _run(log, D(2024, 6, 2), method="weekly")
    assert of_kind(obs, REPAIR) and "annualizing used" in findings[0].message


def test_constants():
    assert us_82f.GWP_BASIS == "ar4"
    by_name = {c.name: c for c in us_82f.CONSTANTS}
    assert by_name["leak-rate threshold, commercial-refrigeration"].value == 20
    assert by_name["leak-rate threshold, commercial-refrigeration"].basis.confidence is (
        Confidence.CHECKED)
    assert by_name["repair within"].value == 30


def test_2026_12_scope_from_2020_04_10_is_checked():
    # 40 CFR 82.157(a), eCFR text via reference-notes.md "Checked in December 2026": "As of
    # April 10, 2020, this section applies only to appliances with a full charge of 50 or
    # more pounds of any class I or class II refrigerant"
    by_name = {c.name: c for c in us_82f.CONSTANTS}
    assert by_name["applies from"].value == D(2020, 4, 10)
    assert by_name["applies from"].basis.confidence is Confidence.CHECKED
    assert by_name["full charge from"].basis.confidence is Confidence.CHECKED
    assert us_82f.REGIME_VERSION == "us-82f-2"
