"""Regime eu: Reg. (EU) 2024/573 (Art 4(5), 5(1), 6), dated scenarios across each boundary.

Tier figures are hand-worked from the definition in Reg. (EU) 2024/573 Art 5(1) (Annex I
gases in t CO2e = kg x GWP / 1000, Annex II section 1 gases in kg) with the GWPs and
compositions of tests/rules/__init__.py; "TEST-1000" is a fictitious Annex I gas of GWP 1000,
so 1 kg = 1 t CO2e exactly.
"""

from __future__ import annotations

from decimal import Decimal

import pytest

from ledger.domain.records import Confidence, EventKind, ObligationKind, ObligationStatus, Severity
from ledger.rules import eu
from ledger.rules.common import BELOW_THRESHOLD, EXEMPT, OUT_OF_SCOPE, RETIRED
from tests.domain import D, Log, kg, site, system
from tests.rules import REF, of_kind, summary

LEAK_CHECK = ObligationKind.LEAK_CHECK
OPEN, MET, OVERDUE = ObligationStatus.OPEN, ObligationStatus.MET, ObligationStatus.OVERDUE
EU_SITE = site("DE1", "DE", ("eu",))


def _tier(refrigerant, charge_ng, *, on=D(2025, 6, 1), hermetic=False, residential=False,
          detection=False):
    log = Log()
    log.in_service(D(2025, 1, 10), refrigerant, charge_ng)
    if detection:
        log.detection_on(D(2025, 1, 10))
    return eu.tier_of(log.history(EU_SITE, system(1, "DE1", hermetic=hermetic,
                                                  residential=residential)), REF, on)


def _run(log, as_of, **system_facts):
    return eu.compute_obligations([log.history(EU_SITE, system(1, "DE1", **system_facts))], REF,
                                  as_of)


# --- tiers ------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("charge", "band", "months"),
    [
        ("4.999999", BELOW_THRESHOLD, None),  # Art 5(1): under 5 t CO2e
        ("5", "5–50 t CO2e", 12),  # Art 5(1): exactly 5.00 t is in the 5 t tier
        ("49.99", "5–50 t CO2e", 12),  # Art 5(1) tiers (UBA FAQ): 49.99 t -> 12 months
        ("50", "50–500 t CO2e", 6),  # 50.00 t -> 6 months
        ("499.99", "50–500 t CO2e", 6),
        ("500", "≥ 500 t CO2e", 3),  # 500.00 t -> 3 months
    ],
)
def test_co2e_tier_boundaries(charge, band, months):
    tier = _tier("TEST-1000", kg(charge))
    assert (tier.band, tier.interval_months) == (band, months)


@pytest.mark.parametrize(("charge", "months"), [("5", 24), ("50", 12), ("500", 6)])
def test_detection_system_doubles_each_interval(charge, months):
    # Art 5(1) (UBA FAQ): 24 / 12 / 6 months with a leak detection system
    assert _tier("TEST-1000", kg(charge), detection=True).interval_months == months


def test_tier_confidence_marks():
    assert _tier("TEST-1000", kg(5)).basis.confidence is Confidence.SECONDARY  # UBA FAQ
    # Annex II tiers: raised to secondary in Dec 2026 (bfs-kaelte-klima.de, reference notes)
    assert _tier("R-455A", kg(2)).basis.confidence is Confidence.SECONDARY


def test_one_kilogram_of_olefin_inside_a_blend():
    # R-455A is 75.5 % R-1234yf (ASHRAE 34): 1.324504 kg holds 1.00000052 kg of olefin
    # (>= 1 kg, Art 5(1)); 1.324503 kg holds 0.999999765 kg (under 1 kg). Hand-worked.
    over = _tier("R-455A", 1_324_504_000_000)
    under = _tier("R-455A", 1_324_503_000_000)
    assert (over.band, over.interval_months) == ("1–10 kg Annex II s.1", 12)
    assert under.band == BELOW_THRESHOLD and under.interval_months is None


def test_annex_ii_kg_tiers():
    # Annex II s.1 tiers 10 / 100 kg -> 6 / 3 months (from memory); R-455A 75.5 % olefin
    assert _tier("R-455A", kg("13.25")).interval_months == 6  # 10.00375 kg of olefin
    assert _tier("R-455A", kg("132.5")).interval_months == 3  # 100.0375 kg of olefin
    assert "leak detection system is required" in _tier("R-455A", kg("132.5")).reason  # Art 6


def test_mixture_tested_both_ways_shorter_interval_wins():
    # R-454B (R-32 68.9 %, R-1234yf 31.1 %), 33 kg: Annex I part 33 x 0.689 x 675 / 1000 =
    # 15.347 t (12 months) and 10.263 kg of olefin (6 months): 6 months wins. Hand-worked.
    tier = _tier("R-454B", kg(33))
    assert tier.interval_months == 6 and tier.band == "10–100 kg Annex II s.1"
    assert "15.347 t CO2e" in tier.reason and "10.263 kg" in tier.reason


def test_only_the_annex_i_part_counts_in_co2e():
    # R-448A, 3.605 kg: Annex I part = 3.605 x (0.26 x 675 + 0.26 x 3500 + 0.21 x 1430) / 1000
    # = 4.995809 t (hand-worked from Art 5(1)); the whole mixture would give 5.000459 t.
    assert eu.annex_i_co2e_t(REF, "R-448A", kg("3.605")) == Decimal("4.995809")
    assert _tier("R-448A", kg("3.605")).band == BELOW_THRESHOLD  # olefins: 0.973 kg < 1 kg


def test_hermetic_exemption_below_ten_tonnes():
    # Art 5(1): hermetically sealed and labelled, < 10 t CO2e exempt
    assert _tier("TEST-1000", kg("9.99"), hermetic=True).band == EXEMPT
    tier = _tier("TEST-1000", kg(10), hermetic=True)
    assert (tier.band, tier.interval_months) == ("5–50 t CO2e", 12)


def test_hermetic_exemption_below_two_kilograms_of_olefin():
    # Art 5(1): hermetically sealed, < 2 kg Annex II s.1 exempt; R-455A 75.5 % olefin
    assert _tier("R-455A", kg("2.6"), hermetic=True).band == EXEMPT  # 1.963 kg
    assert _tier("R-455A", kg("2.65"), hermetic=True).interval_months == 12  # 2.00075 kg


def test_residential_hermetic_exemption_below_three_kilograms():
    # Art 5(1) (reference-notes.md): hermetically sealed in residential buildings < 3 kg;
    # R-23 (AR4 14 800): 2.9 kg = 42.92 t, above the 10 t hermetic limit
    assert _tier("R-23", kg("2.9"), hermetic=True, residential=True).band == EXEMPT
    assert _tier("R-23", kg("2.9"), hermetic=True).interval_months == 12
    assert _tier("R-23", kg(3), hermetic=True, residential=True).interval_months == 12


@pytest.mark.parametrize("refrigerant", ["R-744", "R-717", "R-290"])
def test_natural_refrigerants_are_out_of_scope(refrigerant):
    # Art 5(1) covers Annex I and Annex II s.1 gases only
    tier = _tier(refrigerant, kg(5000))
    assert tier.band == OUT_OF_SCOPE and tier.interval_months is None
    assert tier.reason == f"{refrigerant} is not a fluorinated gas: out of scope"
    log = Log()
    log.in_service(D(2025, 1, 10), refrigerant, kg(5000))
    log.check(D(2025, 3, 1), leak=True)
    assert _run(log, D(2026, 6, 1)) == ([], [])


def test_hcfc_is_left_to_the_ozone_rules():
    tier = _tier("R-22", kg(100))
    assert tier.band == OUT_OF_SCOPE and "ozone-depleting" in tier.reason


# --- periodic leak checks ---------------------------------------------------------------------


def test_first_check_due_twelve_months_after_31_january():
    # Art 5(1) 12-month tier; date-exact counting (reference-notes.md)
    log = Log()
    start = log.in_service(D(2025, 1, 31), "TEST-1000", kg(20))
    obs, findings = _run(log, D(2025, 6, 1))
    assert summary(obs) == [("leak-check", D(2026, 1, 31), "open", start.id, None)]
    assert obs[0].detail == "12-month leak check (5–50 t CO2e)"
    assert findings == []


def test_early_check_restarts_the_interval_from_its_day():
    log = Log()
    start = log.in_service(D(2025, 1, 31), "TEST-1000", kg(20))
    early = log.check(D(2025, 10, 15))
    obs, _ = _run(log, D(2025, 11, 1))
    assert summary(obs) == [
        ("leak-check", D(2026, 1, 31), "met", start.id, early.id),
        ("leak-check", D(2026, 10, 15), "open", early.id, None),
    ]


def test_missed_intervals_stay_overdue_and_a_late_check_meets_the_next():
    log = Log()
    start = log.in_service(D(2025, 1, 31), "TEST-1000", kg(20))
    obs, _ = _run(log, D(2027, 3, 1))
    assert [(o.due_on, o.status) for o in obs] == [
        (D(2026, 1, 31), OVERDUE), (D(2027, 1, 31), OVERDUE), (D(2028, 1, 31), OPEN)]
    assert obs[0].detail.endswith("missed: no leak check from 2025-02-01 to 2026-01-31")
    late = log.check(D(2027, 2, 10))
    obs, _ = _run(log, D(2027, 3, 1))
    assert summary(obs) == [
        ("leak-check", D(2026, 1, 31), "overdue", start.id, None),
        ("leak-check", D(2027, 1, 31), "overdue", start.id, None),
        ("leak-check", D(2028, 1, 31), "met", start.id, late.id),
        ("leak-check", D(2028, 2, 10), "open", late.id, None),
    ]


def test_due_on_the_as_of_day_is_still_open():
    log = Log()
    log.in_service(D(2025, 1, 31), "TEST-1000", kg(20))
    assert _run(log, D(2026, 1, 31))[0][0].status is OPEN
    assert _run(log, D(2026, 2, 1))[0][0].status is OVERDUE


def test_windows_due_before_the_regulation_applied_are_not_listed():
    # 2024/573 applies from 11 March 2024; earlier duties were 517/2014's
    log = Log()
    log.in_service(D(2020, 5, 20), "TEST-1000", kg(20))
    last = log.check(D(2023, 5, 1))
    obs, _ = _run(log, D(2024, 6, 1))
    assert summary(obs) == [
        ("leak-check", D(2024, 5, 1), "overdue", last.id, None),
        ("leak-check", D(2025, 5, 1), "open", last.id, None),
    ]


def test_olefin_systems_are_counted_from_11_march_2024():
    # Annex II s.1 gases are new in 2024/573: the first interval runs from its application
    log = Log()
    log.in_service(D(2023, 1, 10), "R-455A", kg("13.3"))  # 10.04 kg olefin: 6 months
    obs, _ = _run(log, D(2024, 6, 1))
    assert summary(obs) == [("leak-check", D(2024, 9, 11), "open", None, None)]


def test_charge_revised_up_shortens_the_running_interval():
    log = Log()
    log.in_service(D(2025, 1, 10), "TEST-1000", kg(20))  # 12 months
    log.revise(D(2025, 3, 1), kg(60))  # 60 t: 6 months, counted from the same start
    obs, _ = _run(log, D(2025, 4, 1))
    assert [(o.due_on, o.status) for o in obs] == [(D(2025, 7, 10), OPEN)]


def test_detection_fitted_mid_interval_lengthens_it():
    log = Log()
    log.in_service(D(2025, 1, 10), "TEST-1000", kg(60))  # 6 months
    log.detection_on(D(2025, 3, 1))  # 12 months
    obs, _ = _run(log, D(2025, 4, 1))
    assert [(o.due_on, o.status) for o in of_kind(obs, LEAK_CHECK)] == [(D(2026, 1, 10), OPEN)]


def test_detection_removed_can_make_a_check_overdue_at_once():
    log = Log()
    log.in_service(D(2025, 1, 10), "TEST-1000", kg(20))
    log.detection_on(D(2025, 1, 10))  # 24 months
    log.detection_off(D(2026, 3, 1))  # back to 12 months from 2025-01-10
    obs, _ = _run(log, D(2026, 3, 2))
    assert [(o.due_on, o.status) for o in obs] == [
        (D(2026, 1, 10), OVERDUE), (D(2027, 1, 10), OPEN)]


def test_voided_check_does_not_count():
    log = Log()
    log.in_service(D(2025, 1, 10), "TEST-1000", kg(20))
    wrong = log.check(D(2025, 6, 1))
    log.void(D(2025, 6, 2), wrong)
    obs, _ = _run(log, D(2025, 7, 1))
    assert [(o.due_on, o.met_by) for o in obs] == [(D(2026, 1, 10), None)]


# --- repairs and follow-up checks -------------------------------------------------------------


def test_leak_found_opens_a_repair_with_a_site_policy_deadline():
    # Art 4(5) "without undue delay"; 14 days is our documented site policy (POLICY mark)
    log = Log()
    log.in_service(D(2025, 1, 10), "TEST-1000", kg(20))
    leak = log.check(D(2025, 6, 2), leak=True, location="suction line")
    obs, _ = _run(log, D(2025, 6, 20))
    repair = of_kind(obs, ObligationKind.REPAIR)[0]
    assert (repair.due_on, repair.status, repair.caused_by) == (D(2025, 6, 16), OVERDUE, leak.id)
    assert repair.basis.confidence is Confidence.POLICY
    assert "suction line" in repair.detail and "site-policy" in repair.detail


def test_repair_then_follow_up_at_least_a_day_later_within_a_month():
    # Art 4(5) (trade press): follow-up >= 24 h of operation after and within one month
    log = Log()
    log.in_service(D(2025, 1, 10), "TEST-1000", kg(20))
    leak = log.check(D(2025, 6, 2), leak=True)
    fix = log.repair(D(2025, 6, 10))
    same_day = log.follow_up(D(2025, 6, 10))
    obs, _ = _run(log, D(2025, 8, 1))
    assert summary(of_kind(obs, ObligationKind.REPAIR)) == [
        ("repair", D(2025, 6, 16), "met", leak.id, fix.id)]
    follow = of_kind(obs, ObligationKind.FOLLOW_UP_CHECK)[0]
    assert (follow.earliest_on, follow.due_on) == (D(2025, 6, 11), D(2025, 7, 10))
    assert follow.status is OVERDUE and same_day.id != follow.met_by  # same day: too early
    next_day = log.follow_up(D(2025, 6, 11))
    follow = of_kind(_run(log, D(2025, 8, 1))[0], ObligationKind.FOLLOW_UP_CHECK)[0]
    assert (follow.status, follow.met_by) == (MET, next_day.id)


def test_follow_up_due_end_of_february_after_a_31_january_repair():
    # Art 4(5) one month; month addition clamped (design.md §4)
    log = Log()
    log.in_service(D(2024, 6, 1), "TEST-1000", kg(20))
    log.repair(D(2025, 1, 31))
    follow = of_kind(_run(log, D(2025, 2, 1))[0], ObligationKind.FOLLOW_UP_CHECK)[0]
    assert follow.due_on == D(2025, 2, 28) and follow.status is OPEN


def test_failed_follow_up_opens_a_new_repair():
    log = Log()
    log.in_service(D(2025, 1, 10), "TEST-1000", kg(20))
    log.check(D(2025, 6, 2), leak=True)
    log.repair(D(2025, 6, 3))
    failed = log.follow_up(D(2025, 6, 5), passed=False)
    repairs = of_kind(_run(log, D(2025, 7, 1))[0], ObligationKind.REPAIR)
    assert [(r.caused_by, r.due_on, r.status) for r in repairs][-1] == (
        failed.id, D(2025, 6, 19), OVERDUE)


def test_late_repair_is_met_and_says_so():
    log = Log()
    log.in_service(D(2025, 1, 10), "TEST-1000", kg(20))
    log.check(D(2025, 6, 2), leak=True)
    log.repair(D(2025, 6, 20))
    repair = of_kind(_run(log, D(2025, 7, 1))[0], ObligationKind.REPAIR)[0]
    assert repair.status is MET and repair.detail.endswith("done 2025-06-20, 4 days late")


# --- leak detection systems -------------------------------------------------------------------


def test_detection_system_required_from_500_tonnes_and_due_at_in_service():
    # Art 6 (secondary): >= 500 t CO2e; our due date: the day the system enters the band
    log = Log()
    start = log.in_service(D(2025, 2, 1), "TEST-1000", kg(500))
    obs, _ = _run(log, D(2025, 3, 1))
    det = of_kind(obs, ObligationKind.DETECTION_SYSTEM)
    assert summary(det) == [("detection-system", D(2025, 2, 1), "overdue", start.id, None)]
    fitted = log.detection_on(D(2025, 2, 20))
    det = of_kind(_run(log, D(2025, 3, 1))[0], ObligationKind.DETECTION_SYSTEM)[0]
    assert (det.status, det.met_by) == (MET, fitted.id) and "19 days late" in det.detail


def test_no_detection_system_duty_under_500_tonnes():
    log = Log()
    log.in_service(D(2025, 2, 1), "TEST-1000", kg("499.99"))
    assert of_kind(_run(log, D(2025, 3, 1))[0], ObligationKind.DETECTION_SYSTEM) == []


def test_detection_system_of_an_older_system_due_when_the_regulation_applied():
    log = Log()
    log.in_service(D(2022, 5, 1), "TEST-1000", kg(600))
    det = of_kind(_run(log, D(2024, 6, 1))[0], ObligationKind.DETECTION_SYSTEM)[0]
    assert det.due_on == D(2024, 3, 11) and det.status is OVERDUE


def test_detection_system_checked_every_twelve_months():
    # Art 6 check every 12 months (from memory, 517/2014 Art 5(3))
    log = Log()
    log.in_service(D(2025, 2, 1), "TEST-1000", kg(500))
    fitted = log.detection_on(D(2025, 2, 1))
    obs, _ = _run(log, D(2025, 3, 1))
    assert summary(of_kind(obs, ObligationKind.DETECTION_SYSTEM)) == [
        ("detection-system", D(2025, 2, 1), "met", fitted.id, fitted.id)]
    checks = of_kind(obs, ObligationKind.DETECTION_SYSTEM_CHECK)
    assert [(c.due_on, c.status) for c in checks] == [(D(2026, 2, 1), OPEN)]
    assert checks[0].basis.confidence is Confidence.MEMORY
    tested = log.detection_check(D(2026, 1, 15))
    checks = of_kind(_run(log, D(2026, 3, 1))[0], ObligationKind.DETECTION_SYSTEM_CHECK)
    assert summary(checks) == [
        ("detection-system-check", D(2026, 2, 1), "met", fitted.id, tested.id),
        ("detection-system-check", D(2027, 1, 15), "open", tested.id, None),
    ]
    # leak checks: 3 months doubled to 6 with the detection system fitted
    assert of_kind(obs, LEAK_CHECK)[0].due_on == D(2025, 8, 1)


def test_removing_a_required_detection_system_opens_a_new_duty():
    log = Log()
    log.in_service(D(2025, 2, 1), "TEST-1000", kg(500))
    log.detection_on(D(2025, 2, 1))
    off = log.detection_off(D(2025, 5, 1))
    det = of_kind(_run(log, D(2025, 6, 1))[0], ObligationKind.DETECTION_SYSTEM)
    assert [(d.due_on, d.status, d.caused_by) for d in det][-1] == (D(2025, 5, 1), OVERDUE, off.id)


# --- retrofits, retirement, data problems -----------------------------------------------------


def test_retrofit_re_tiers_from_its_date():
    log = Log()
    log.in_service(D(2025, 1, 10), "R-404A", kg(30))  # 117.648 t: 6 months
    change = log.retrofit(D(2025, 4, 1), "TEST-1000", kg(20))  # 20 t: 12 months
    obs, _ = _run(log, D(2025, 5, 1))
    assert summary(obs) == [("leak-check", D(2026, 4, 1), "open", change.id, None)]


def test_retrofit_to_a_natural_refrigerant_ends_the_schedule():
    log = Log()
    log.in_service(D(2025, 1, 10), "R-404A", kg(30))
    log.retrofit(D(2025, 4, 1), "R-744", kg(30))
    assert _run(log, D(2026, 5, 1)) == ([], [])


def test_retired_system_has_no_open_obligations_but_keeps_its_history():
    log = Log()
    log.in_service(D(2025, 1, 10), "TEST-1000", kg(20))
    leak = log.check(D(2025, 6, 1), leak=True)
    log.retire(D(2025, 6, 5))
    obs, _ = _run(log, D(2026, 12, 31))
    assert summary(obs) == [("leak-check", D(2026, 1, 10), "met", 1, leak.id)]
    history = log.history(EU_SITE, system(1, "DE1"))
    assert eu.tier_of(history, REF, D(2026, 1, 1)).band == RETIRED


def test_unknown_refrigerant_is_reported_not_guessed():
    log = Log()
    log.in_service(D(2025, 1, 10), "R-9999X", kg(20))
    obs, findings = _run(log, D(2025, 6, 1))
    assert obs == []
    assert [f.severity for f in findings] == [Severity.WARNING]
    assert "R-9999X" in findings[0].message


def test_missing_in_service_event_is_reported():
    log = Log()
    log.check(D(2025, 6, 1))
    obs, findings = _run(log, D(2025, 7, 1))
    assert obs == [] and "no in-service event" in findings[0].message


def test_tier_before_in_service():
    log = Log()
    log.in_service(D(2025, 1, 10), "TEST-1000", kg(20))
    assert eu.tier_of(log.history(EU_SITE), REF, D(2025, 1, 9)).band == "not in service"


def test_constants_name_their_basis():
    assert {c.basis.citation.split(" Art")[0] for c in eu.CONSTANTS} == {
        "Reg. (EU) 2024/573", "Reg. (EU) 2024/573 (date of application)"}
    memory = {c.name for c in eu.CONSTANTS if c.basis.confidence is Confidence.MEMORY}
    assert "interval 1–10 kg Annex II s.1" not in memory  # raised to secondary, Dec 2026
    policy = {c.name for c in eu.CONSTANTS if c.basis.confidence is Confidence.POLICY}
    assert policy == {"repair deadline after a leak is found (site policy)"}
    assert "leak detection system checked every" in memory
    assert eu.GWP_BASIS == "eu"


def test_works_with_the_packaged_reference():
    # R-404A 30 kg: published EU GWP 3 922 (reference-notes.md); unrounded 3921.6 (Annex IV
    # method) x 30 / 1000 = 117.648 t -> 50-500 t tier, 6 months
    from ledger.reference import load_reference

    log = Log()
    log.in_service(D(2025, 1, 10), "R404A", kg(30))
    tier = eu.tier_of(log.history(EU_SITE), load_reference(), D(2025, 6, 1))
    assert (tier.band, tier.interval_months) == ("50–500 t CO2e", 6)
    assert "117.648 t CO2e" in tier.reason


def test_repair_due_under_the_earlier_law_and_still_open_is_carried():
    # our transition rule (docs/rules/README.md, "Earlier law"): due 5 March 2024 under
    # 517/2014, still open on 11 March 2024 when 2024/573 applied
    log = Log()
    log.in_service(D(2023, 1, 10), "TEST-1000", kg(20))
    leak = log.check(D(2024, 2, 20), leak=True)
    repair = of_kind(_run(log, D(2024, 4, 1))[0], ObligationKind.REPAIR)
    assert summary(repair) == [("repair", D(2024, 3, 11), "overdue", leak.id, None)]
    assert "due 2024-03-05 under the earlier law" in repair[0].detail
    log.check(D(2024, 3, 1))  # a later check found no leak: nothing carried
    assert of_kind(_run(log, D(2024, 4, 1))[0], ObligationKind.REPAIR) == []


# --- corrections of the check in December 2026 (reference-notes.md, "Checked in December 2026")


def test_2026_12_follow_up_only_for_equipment_that_must_be_leak_checked():
    # 2024/573 Art 4(5), German text quoted by Landesinnung Kälte-Klima: "Wurde bei einer
    # Einrichtung, für die gemäß Artikel 5 Absatz 1 eine Dichtheitskontrolle vorgeschrieben
    # ist, eine Undichtigkeit repariert …". The repair duty itself covers all equipment.
    below = Log()
    below.in_service(D(2025, 1, 10), "TEST-1000", kg(2))  # 2 t CO2e: under 5 t, no checks
    leak = below.check(D(2025, 6, 2), leak=True)
    below.repair(D(2025, 6, 3))
    obs, _ = _run(below, D(2025, 8, 1))
    assert of_kind(obs, ObligationKind.FOLLOW_UP_CHECK) == []
    assert [o.caused_by for o in of_kind(obs, ObligationKind.REPAIR)] == [leak.id]
    sealed = Log()
    sealed.in_service(D(2025, 1, 10), "TEST-1000", kg(8))  # hermetic, 8 t: exempt
    sealed.check(D(2025, 6, 2), leak=True)
    sealed.repair(D(2025, 6, 3))
    obs, _ = _run(sealed, D(2025, 8, 1), hermetic=True)
    assert of_kind(obs, ObligationKind.FOLLOW_UP_CHECK) == []
    # a checked system keeps its follow-up, now marked checked (article wording quoted)
    checked = Log()
    checked.in_service(D(2025, 1, 10), "TEST-1000", kg(20))
    checked.check(D(2025, 6, 2), leak=True)
    checked.repair(D(2025, 6, 3))
    follow = of_kind(_run(checked, D(2025, 8, 1))[0], ObligationKind.FOLLOW_UP_CHECK)
    assert [f.basis.confidence for f in follow] == [Confidence.CHECKED]


def test_2026_12_interval_citation_is_art_5_not_art_5_1():
    # haufe.de (official German text): Art 5(1) holds thresholds and exemptions, the
    # frequencies sit in a later paragraph of Art 5 (number not read).
    tier = _tier("TEST-1000", kg(20))
    assert tier.basis.citation == "Reg. (EU) 2024/573 Art 5"
    assert eu.REGIME_VERSION == "eu-2"


# --- checks by uncertified persons --------------------------------------------------------------


def test_a_check_without_a_valid_certificate_does_not_meet_the_leak_check_duty():
    # Reg. (EU) 2024/573 Art 10: leak checks by certified natural persons; 50 t CO2e of TEST-1000:
    # every 6 months (Art 5(1)); a check logged without a valid certificate counts for nothing
    log = Log()
    log.in_service(D(2025, 1, 10), "TEST-1000", kg("50"))
    log.add(EventKind.CHECK, D(2025, 6, 1), result="no-leak", certified=False)
    obligations, _ = _run(log, D(2025, 8, 1))
    checks = of_kind(obligations, LEAK_CHECK)
    # the missed window, then the next one from its due date (the uncertified check met neither)
    assert [(o.due_on, o.status) for o in checks] == [(D(2025, 7, 10), OVERDUE), (D(2026, 1, 10), OPEN)]
    assert "done by an uncertified person on 2025-06-01 (event 2)" in checks[0].detail


def test_an_uncertified_follow_up_leaves_the_follow_up_duty_open():
    # Art 4(5): follow-up check by a certified person within one month of the repair
    log = Log()
    log.in_service(D(2025, 1, 10), "TEST-1000", kg("50"))
    log.check(D(2025, 3, 1), leak=True)
    log.repair(D(2025, 3, 2))
    log.add(EventKind.FOLLOW_UP, D(2025, 3, 5), result="pass", certified=False)
    obligations, _ = _run(log, D(2025, 3, 10))
    follow = of_kind(obligations, ObligationKind.FOLLOW_UP_CHECK)
    assert [o.status for o in follow] == [OPEN]
    assert "done by an uncertified person" in follow[0].detail
    log.follow_up(D(2025, 3, 9))
    obligations, _ = _run(log, D(2025, 3, 10))
    assert [o.status for o in of_kind(obligations, ObligationKind.FOLLOW_UP_CHECK)] == [MET]
