"""Regime gb: Reg. (EU) 517/2014 as retained in Great Britain, and GB HCFC leak checks.

Tier figures are hand-worked from the definition in 517/2014 Art 4(1) and Annex IV (CO2e of
the whole mixture = kg x mixture GWP / 1000) and from the HCFC thresholds of the gov.uk
leak-check guidance (reference-notes.md), with the data of tests/rules/__init__.py.
"""

from __future__ import annotations

import pytest

from ledger.domain.records import Confidence, ObligationKind, ObligationStatus
from ledger.rules import gb
from ledger.rules.common import BELOW_THRESHOLD, EXEMPT, OUT_OF_SCOPE
from tests.domain import D, Log, kg, site, system
from tests.rules import REF, of_kind, summary

GB_SITE = site("GB1", "GB", ("gb",))
OPEN, MET, OVERDUE = ObligationStatus.OPEN, ObligationStatus.MET, ObligationStatus.OVERDUE


def _tier(refrigerant, charge_ng, *, hermetic=False, detection=False, on=D(2025, 6, 1)):
    log = Log()
    log.in_service(D(2025, 1, 10), refrigerant, charge_ng)
    if detection:
        log.detection_on(D(2025, 1, 10))
    return gb.tier_of(log.history(GB_SITE, system(1, "GB1", hermetic=hermetic)), REF, on)


def _run(log, as_of, **facts):
    return gb.compute_obligations([log.history(GB_SITE, system(1, "GB1", **facts))], REF, as_of)


@pytest.mark.parametrize(
    ("charge", "band", "months"),
    [
        ("4.999999", BELOW_THRESHOLD, None),  # 517/2014 Art 4(1): from 5 t CO2e
        ("5", "5–50 t CO2e", 12),  # Art 4(3)(a)
        ("49.99", "5–50 t CO2e", 12),
        ("50", "50–500 t CO2e", 6),  # Art 4(3)(b)
        ("500", "≥ 500 t CO2e", 3),  # Art 4(3)(c)
    ],
)
def test_fgas_tiers(charge, band, months):
    tier = _tier("TEST-1000", kg(charge))
    assert (tier.band, tier.interval_months) == (band, months)
    assert tier.basis.confidence is Confidence.CHECKED  # Art 4(1), 4(3) read (notes)


@pytest.mark.parametrize(("charge", "months"), [("5", 24), ("50", 12), ("500", 6)])
def test_detection_doubles_fgas_intervals(charge, months):
    # 517/2014 Art 4(3): 24 / 12 / 6 months with a leak detection system
    assert _tier("TEST-1000", kg(charge), detection=True).interval_months == months


def test_whole_mixture_counts_in_co2e():
    # R-448A 3.605 kg: Annex IV GWP 0.26x675 + 0.26x3500 + 0.2x4 + 0.21x1430 + 0.07x7
    # = 1387.09; x 3.605 / 1000 = 5.000459 t >= 5 t (hand-worked from 517/2014 Annex IV).
    # The eu regime counts only the Annex I part (4.995809 t) and finds it below 5 t.
    tier = _tier("R-448A", kg("3.605"))
    assert tier.interval_months == 12 and "5.000 t CO2e" in tier.reason


def test_pure_olefin_is_out_of_scope():
    # 517/2014 Art 4(1) covers Annex I gases and mixtures containing them
    tier = _tier("R-1234yf", kg(200))
    assert tier.band == OUT_OF_SCOPE and "Annex II" in tier.reason


def test_natural_refrigerant_is_out_of_scope():
    tier = _tier("R-744", kg(200))
    assert tier.band == OUT_OF_SCOPE
    assert tier.reason == "R-744 is neither a fluorinated gas nor ozone-depleting: out of scope"


def test_hermetic_fgas_exemption():
    # 517/2014 Art 4(2): hermetically sealed and labelled, < 10 t CO2e
    assert _tier("TEST-1000", kg("9.99"), hermetic=True).band == EXEMPT
    assert _tier("TEST-1000", kg(10), hermetic=True).interval_months == 12


@pytest.mark.parametrize(
    ("charge", "months"),
    [
        ("2.999", None),  # gov.uk HCFC guidance: from 3 kg
        ("3", 12),  # 3 kg: every 12 months
        ("29.99", 12),
        ("30", 6),  # 30 kg: every 6 months
        ("300", 3),  # 300 kg: every 3 months
    ],
)
def test_hcfc_kg_tiers(charge, months):
    assert _tier("R-22", kg(charge)).interval_months == months


def test_hcfc_hermetic_from_six_kilograms_and_no_doubling():
    # gov.uk HCFC guidance: 6 kg for hermetically sealed equipment; no detection doubling
    assert _tier("R-22", kg("5.99"), hermetic=True).band == EXEMPT
    assert _tier("R-22", kg(6), hermetic=True).interval_months == 12
    tier = _tier("R-22", kg(30), detection=True)
    assert tier.interval_months == 6 and tier.basis.confidence is Confidence.SECONDARY


def test_hcfc_and_fgas_mixture_takes_the_shorter_interval():
    # TEST-HCFC-MIX: 50 % R-22, 50 % R-134a; 60 kg: 30 kg of HCFC (6 months) and
    # 60 x (0.5 x 1810 + 0.5 x 1430) / 1000 = 97.2 t (6 months); with a detection system the
    # F-gas interval doubles to 12 and the HCFC 6 months wins. Hand-worked.
    plain = _tier("TEST-HCFC-MIX", kg(60))
    doubled = _tier("TEST-HCFC-MIX", kg(60), detection=True)
    assert plain.interval_months == 6
    assert doubled.interval_months == 6 and doubled.band == "30–300 kg HCFC/CFC"


def test_hcfc_repair_within_14_days_and_immediate_retest_counts():
    # gov.uk guidance: repair within 14 days, re-test within a month; 517/2014 era accepted an
    # immediate re-check
    log = Log()
    log.in_service(D(2025, 1, 10), "R-22", kg(40))
    leak = log.check(D(2025, 6, 2), leak=True)
    fix = log.repair(D(2025, 6, 9))
    retest = log.follow_up(D(2025, 6, 9))
    obs, _ = _run(log, D(2025, 7, 15))
    repair = of_kind(obs, ObligationKind.REPAIR)[0]
    assert (repair.due_on, repair.status, repair.caused_by, repair.met_by) == (
        D(2025, 6, 16), MET, leak.id, fix.id)
    assert repair.basis.confidence is Confidence.SECONDARY
    follow = of_kind(obs, ObligationKind.FOLLOW_UP_CHECK)[0]
    assert (follow.earliest_on, follow.due_on, follow.met_by) == (
        D(2025, 6, 9), D(2025, 7, 9), retest.id)


def test_fgas_follow_up_within_one_month_checked_basis():
    log = Log()
    log.in_service(D(2025, 1, 10), "TEST-1000", kg(20))
    log.repair(D(2025, 3, 31))
    follow = of_kind(_run(log, D(2025, 4, 1))[0], ObligationKind.FOLLOW_UP_CHECK)[0]
    # 517/2014 Art 3(3): within one month; 31 March + 1 month = 30 April (design.md §4)
    assert follow.due_on == D(2025, 4, 30) and follow.basis.confidence is Confidence.CHECKED


def test_detection_system_from_500_tonnes_due_from_2015_for_older_systems():
    # 517/2014 Art 5(1); applied from 1 January 2015 (from memory)
    log = Log()
    log.in_service(D(2012, 3, 1), "TEST-1000", kg(500))
    obs, _ = _run(log, D(2015, 6, 1))
    det = of_kind(obs, ObligationKind.DETECTION_SYSTEM)
    assert [(d.due_on, d.status) for d in det] == [(D(2015, 1, 1), OVERDUE)]


def test_windows_before_2015_are_listed_only_if_still_outstanding():
    log = Log()
    start = log.in_service(D(2013, 1, 10), "TEST-1000", kg(20))
    obs, _ = _run(log, D(2015, 2, 1))
    # the interval due 2014-01-10 (earlier law) was missed and still outstanding on
    # 1 January 2015, so it is listed as due that day; then 2015-01-10 and 2016-01-10
    assert summary(obs) == [
        ("leak-check", D(2015, 1, 1), "overdue", start.id, None),
        ("leak-check", D(2015, 1, 10), "overdue", start.id, None),
        ("leak-check", D(2016, 1, 10), "open", start.id, None),
    ]
    assert "due 2014-01-10 under the earlier law" in obs[0].detail
    log.check(D(2014, 6, 1))  # a check under the earlier law: nothing outstanding in 2015
    obs, _ = _run(log, D(2015, 2, 1))
    assert [(o.due_on, o.status) for o in obs] == [(D(2015, 1, 10), MET), (D(2015, 6, 1), OPEN)]


def test_retired_hcfc_system_owes_nothing_after_retirement():
    log = Log()
    log.in_service(D(2024, 1, 10), "R-22", kg(40))
    log.check(D(2024, 7, 1), leak=True)
    log.retire(D(2024, 7, 5))
    obs, _ = _run(log, D(2026, 1, 1))
    assert all(o.status is MET for o in obs)


def test_constants():
    assert gb.GWP_BASIS == "eu"
    names = {c.name for c in gb.CONSTANTS}
    assert "HCFC/CFC leak-check threshold, hermetically sealed" in names
    assert all(c.basis.citation for c in gb.CONSTANTS)
