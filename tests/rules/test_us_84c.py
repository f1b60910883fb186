"""Regime us-84c: 40 CFR 84 Subpart C (AIM Act), HFC appliances of 15 lb and up from 2026.

Scope facts are the trade-press summary in reference-notes.md (secondary); the leak-rate
arithmetic is hand-worked from the definition in 40 CFR 82.152, which Part 84 follows (from
memory). 15 lb = 6 803 885 550 000 ng exactly (1 lb = 0.45359237 kg, 1959 agreement).
"""

from __future__ import annotations

from ledger.domain.records import Application, Confidence, ObligationKind, ObligationStatus
from ledger.rules import us_84c
from ledger.rules.common import BELOW_THRESHOLD, OUT_OF_SCOPE
from tests.domain import D, Log, kg, lb, site, system
from tests.rules import REF, of_kind, summary

OPEN, MET, OVERDUE = ObligationStatus.OPEN, ObligationStatus.MET, ObligationStatus.OVERDUE
COMMERCIAL = Application.COMMERCIAL_REFRIGERATION
DETECT = ObligationKind.DETECTION_SYSTEM


def _history(log, application=COMMERCIAL, residential=False):
    return log.history(site("US1", "US", ("us-82f", "us-84c")),
                       system(1, "US1", application=application, residential=residential))


def _run(log, as_of, **kw):
    return us_84c.compute_obligations([_history(log, **kw)], REF, as_of)


def _tier(refrigerant, charge_ng, **kw):
    log = Log()
    log.in_service(D(2026, 1, 5), refrigerant, charge_ng)
    return us_84c.tier_of(_history(log, **kw), REF, D(2026, 6, 1))


def test_scope_starts_at_15_lb_in_exact_nanograms():
    # 40 CFR 84 Subpart C (trade press): full charge >= 15 lb = 6 803 885 550 000 ng
    assert _tier("R-134a", 6_803_885_549_999).band == BELOW_THRESHOLD
    assert _tier("R-134a", 6_803_885_550_000).band == "≥ 15 lb, GWP > 53"


def test_gwp_must_be_above_53_on_the_ar4_basis():
    # Subpart C: GWP above 53; TEST-53 is a fictitious gas of GWP exactly 53
    assert _tier("TEST-53", lb(100)).band == OUT_OF_SCOPE
    tier = _tier("R-1234yf", lb(100))
    # AR4 lists no R-1234yf (reference-notes.md): counted as 0 and said so
    assert tier.band == OUT_OF_SCOPE and "not listed in AR4" in tier.reason


def test_residential_and_ozone_depleting_appliances_are_excluded():
    assert _tier("R-410A", lb(100), residential=True).band == OUT_OF_SCOPE
    assert "40 CFR 82" in _tier("R-22", lb(100)).reason


def test_exceedance_before_2026_opens_nothing_and_after_opens_the_duties():
    # Subpart C applies from 1 January 2026; threshold 20 % (commercial refrigeration)
    log = Log()
    log.in_service(D(2025, 1, 1), "R-404A", kg(100))
    log.top_up(D(2025, 12, 31), kg(30))
    assert of_kind(_run(log, D(2026, 1, 2))[0], ObligationKind.REPAIR) == []
    add = log.top_up(D(2026, 1, 10), kg(30))  # 30/100 x 365/10 x 100: over 20 %
    obs, _ = _run(log, D(2026, 1, 11))
    repair = of_kind(obs, ObligationKind.REPAIR)
    assert summary(repair) == [("repair", D(2026, 2, 9), "open", add.id, None)]
    # raised to secondary in Dec 2026: Hixson citing 84.106 (reference-notes.md)
    assert repair[0].basis.confidence is Confidence.SECONDARY
    assert repair[0].basis.citation == "40 CFR 84.106"


def test_automatic_leak_detection_for_existing_large_systems_by_2027():
    # Subpart C (secondary / from memory): commercial refrigeration >= 1 500 lb installed
    # 2017-2025 -> by 1 January 2027
    log = Log()
    start = log.in_service(D(2020, 3, 1), "R-404A", lb(1500))
    obs, _ = _run(log, D(2026, 6, 1))
    assert summary(of_kind(obs, DETECT)) == [
        ("detection-system", D(2027, 1, 1), "open", start.id, None)]
    fitted = log.detection_on(D(2026, 9, 1))
    assert of_kind(_run(log, D(2027, 2, 1))[0], DETECT)[0].met_by == fitted.id


def test_automatic_leak_detection_for_new_systems_at_installation():
    log = Log()
    start = log.in_service(D(2026, 2, 1), "R-404A", lb(1600))
    obs, _ = _run(log, D(2026, 3, 1))
    assert summary(of_kind(obs, DETECT)) == [
        ("detection-system", D(2026, 2, 1), "overdue", start.id, None)]


def test_no_automatic_leak_detection_duty_for_old_small_or_comfort_systems():
    for installed, charge, application in (
        (D(2016, 12, 31), lb(2000), COMMERCIAL),  # installed before 2017
        (D(2020, 1, 1), 680_388_554_999_999, COMMERCIAL),  # 1 500 lb = 680 388 555 000 000 ng: just under
        (D(2020, 1, 1), lb(2000), Application.COMFORT_COOLING),
    ):
        log = Log()
        log.in_service(installed, "R-404A", charge)
        assert of_kind(_run(log, D(2026, 6, 1), application=application)[0], DETECT) == []


def test_constants():
    names = {c.name: c for c in us_84c.CONSTANTS}
    assert names["GWP above (AR4)"].value == 53
    assert names["GWP basis"].basis.confidence is Confidence.MEMORY
    assert us_84c.GWP_BASIS == "ar4"


def test_2026_12_citations_name_sections_84_106_and_84_108():
    # Hixson (EH&S consultancy, Apr 2025), via reference-notes.md "Checked in December 2026":
    # "Recordkeeping … (84.106(l)) … Reporting … (84.106(m))"; ALD in §84.108; ALD from
    # 1 500 lb per HVACInsider (secondary).
    by_name = {c.name: c.basis for c in us_84c.CONSTANTS}
    assert by_name["repair within"].citation == "40 CFR 84.106"
    assert by_name["follow-up verification test within"].confidence is Confidence.SECONDARY
    assert by_name["chronic-leak report from"].citation == "40 CFR 84.106(m)"
    assert by_name["automatic leak detection from"].citation == "40 CFR 84.108"
    assert by_name["automatic leak detection from"].confidence is Confidence.SECONDARY
    assert us_84c.REGIME_VERSION == "us-84c-2"
