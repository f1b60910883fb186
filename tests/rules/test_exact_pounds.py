"""Threshold tests on masses typed in pounds are exact (issue 13).

Source of every pound figure: the international yard and pound agreement (1959),
1 lb = 0.45359237 kg exactly, 1 oz = 1/16 lb; masses go through the parser as a technician
types them. Rule texts:

* 40 CFR 82.157(c)(2) (eCFR text, as quoted in /work/shared/reference-notes.md): the duty
  applies when the leak rate "exceeds" 20 / 30 / 10 percent; "(iii) 10 percent for comfort
  cooling appliances". Exactly 10 % does not exceed 10 %.
* 40 CFR 82.157(j) (EPA fact sheet, reference-notes.md): a report "when larger appliances
  leak 125% or more of their charge in a calendar year". Exactly 125 % is reported.
* 17 CCR 95385(c) (justia, reference-notes.md): "full charge greater than 50, but less than
  200 pounds". A 50 lb system is not in that class.

Leak rates are hand-worked from the definition in 40 CFR 82.152 ("leak rate", annualizing
method): added / full charge x 365 / days since the last addition (365 for the first).
While the ledger kept whole milligrams, 10 lb on 100 lb read 10.0000007 % (4 535 924 mg over
45 359 237 mg) and opened a repair duty; 5 x 25 lb read 124.99999 %.
"""

from __future__ import annotations

from decimal import Decimal

from ledger.domain.leak_rate import leak_rates
from ledger.domain.records import Application, ObligationKind
from ledger.rules import us_82f, us_84c, us_ca
from ledger.rules.common import BELOW_THRESHOLD
from ledger.units import parse_mass_ng
from tests.domain import D, Log, site, system
from tests.rules import REF, of_kind

COMFORT = Application.COMFORT_COOLING
US_SITE = site("US1", "US", ("us-82f", "us-84c"))
CA_SITE = site("CA1", "US", ("us-82f", "us-84c", "us-ca"), subdivision="US-CA")


def lb(text: str) -> int:
    return parse_mass_ng(text)


def _history(log, application=COMFORT, the_site=US_SITE):  # type: ignore[no-untyped-def]
    return log.history(the_site, system(1, the_site.code, application=application))


def test_ten_pounds_on_a_hundred_pound_system_is_exactly_ten_percent():
    for regime, gas in ((us_84c, "R-410A"), (us_82f, "R-22")):
        log = Log()
        log.in_service(D(2026, 1, 5), gas, lb("100 lb"))
        add = log.top_up(D(2026, 3, 1), lb("10 lb"))
        (rate,) = leak_rates(_history(log), "annualizing")
        assert rate.event_id == add.id
        assert rate.percent == Decimal(10)  # 10 / 100 x 365 / 365, exactly
        assert rate.threshold_percent == Decimal(10) and not rate.exceeded
        obligations, _ = regime.compute_obligations([_history(log)], REF, D(2026, 3, 2))
        assert of_kind(obligations, ObligationKind.REPAIR) == [], regime.__name__


def test_a_tenth_of_an_ounce_more_exceeds_ten_percent():
    log = Log()
    log.in_service(D(2026, 1, 5), "R-410A", lb("100 lb"))
    log.top_up(D(2026, 3, 1), lb("10 lb 0.1 oz"))
    (rate,) = leak_rates(_history(log), "annualizing")
    assert rate.percent > Decimal(10) and rate.exceeded
    obligations, _ = us_84c.compute_obligations([_history(log)], REF, D(2026, 3, 2))
    assert of_kind(obligations, ObligationKind.REPAIR)


def test_five_times_twenty_five_pounds_on_a_hundred_is_exactly_125_percent():
    log = Log()
    log.in_service(D(2026, 1, 5), "R-410A", lb("100 lb"))
    adds = [log.top_up(D(2026, month, 1), lb("25 lb")) for month in (2, 4, 6, 8, 10)]
    assert sum(e.mass_ng for e in adds) * 100 == 125 * lb("100 lb")  # exactly 125 %
    reports = of_kind(us_84c.compute_obligations([_history(log)], REF, D(2026, 11, 1))[0], ObligationKind.REPORT)
    assert [(r.due_on, r.caused_by) for r in reports] == [(D(2027, 3, 1), adds[-1].id)]
    assert "125.00 % of the full charge" in reports[0].detail
    # one ounce short of 125 lb in the year: no report
    log = Log()
    log.in_service(D(2026, 1, 5), "R-410A", lb("100 lb"))
    for month in (2, 4, 6, 8):
        log.top_up(D(2026, month, 1), lb("25 lb"))
    log.top_up(D(2026, 10, 1), lb("24 lb 15 oz"))
    assert of_kind(us_84c.compute_obligations([_history(log)], REF, D(2026, 11, 1))[0], ObligationKind.REPORT) == []


def test_a_fifty_pound_system_is_not_more_than_fifty_pounds_in_california():
    log = Log()
    log.in_service(D(2025, 1, 1), "R-404A", lb("50 lb"))
    tier = us_ca.tier_of(_history(log, Application.COMMERCIAL_REFRIGERATION, CA_SITE), REF, D(2025, 6, 1))
    assert tier.band == BELOW_THRESHOLD
    log = Log()
    log.in_service(D(2025, 1, 1), "R-404A", lb("50 lb 0.1 oz"))
    tier = us_ca.tier_of(_history(log, Application.COMMERCIAL_REFRIGERATION, CA_SITE), REF, D(2025, 6, 1))
    assert tier.band == "50–200 lb"


def test_fifty_pounds_is_fifty_or_more_under_subpart_f():
    # 40 CFR 82.157(a): "a full charge of 50 or more pounds"
    log = Log()
    log.in_service(D(2024, 1, 1), "R-22", lb("50 lb"))
    assert us_82f.tier_of(_history(log), REF, D(2024, 6, 1)).band == "≥ 50 lb ozone-depleting"
