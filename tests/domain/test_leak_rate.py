"""US leak rates (ledger.domain.leak_rate): both methods of 40 CFR 82.152 ("leak rate").

Check values are hand-worked from the definition in 40 CFR 82.152 and the duty to calculate
at every addition in 40 CFR 82.157(b); thresholds are 40 CFR 82.157(c)(2) (checked against
the text, reference-notes.md).
"""

from __future__ import annotations

from decimal import Decimal
from fractions import Fraction

import pytest

from ledger.domain.leak_rate import (
    ANNUALIZING,
    ROLLING,
    annualizing_rate,
    exceeds,
    leak_rates,
    leak_rates_json,
    rolling_rate,
    threshold_percent,
)
from ledger.domain.records import Application
from tests.domain import D, Log, kg, site, system


def test_annualizing_hand_worked():
    # hand-worked from the definition in 40 CFR 82.152: 10 kg added to a 100 kg charge,
    # 30 days after the previous addition: 10/100 x 365/30 x 100 = 121.666...%
    rate = annualizing_rate(kg(10), kg(100), 30)
    assert Fraction(rate).limit_denominator(1000) == Fraction(365, 3)
    assert rate.quantize(Decimal("0.0001")) == Decimal("121.6667")


def test_annualizing_without_previous_addition_uses_365_days():
    # 40 CFR 82.152: no earlier addition -> 365 days; 10/100 x 365/365 x 100 = 10 %
    assert annualizing_rate(kg(10), kg(100), None) == Decimal(10)


def test_annualizing_caps_the_day_count_at_365():
    # 40 CFR 82.152: "or 365 if that is longer"; 500 days counts as 365 -> 10 %
    assert annualizing_rate(kg(10), kg(100), 500) == Decimal(10)
    assert annualizing_rate(kg(10), kg(100), 365) == Decimal(10)
    # hand-worked: 364 days -> 10 x 365/364 = 10.0274...
    assert annualizing_rate(kg(10), kg(100), 364) > Decimal(10)


def test_annualizing_rejects_zero_days_and_zero_charge():
    with pytest.raises(ValueError):
        annualizing_rate(kg(1), kg(100), 0)
    with pytest.raises(ValueError):
        annualizing_rate(kg(1), 0, None)


def test_rolling_hand_worked_window_is_365_days_ending_on_the_day():
    # hand-worked from the definition in 40 CFR 82.152 (rolling average): 40 kg charge
    adds = [(D(2025, 1, 10), kg(5)), (D(2025, 6, 1), kg(3)), (D(2026, 1, 9), kg(4))]
    # window 2025-01-10 .. 2026-01-09 holds all three: 12/40 = 30 %
    assert rolling_rate(adds, D(2026, 1, 9), kg(40), None) == Decimal(30)
    # a day later 2025-01-10 falls out (365 days = that day and the 364 before): 7/40
    assert rolling_rate(adds, D(2026, 1, 10), kg(40), None) == Decimal("17.5")


def test_rolling_counts_only_after_a_passing_verification():
    # 40 CFR 82.152 rolling average "or since the last successful follow-up verification
    # test, if shorter" (from memory): only the 4 kg after 2025-06-01 count -> 10 %
    adds = [(D(2025, 1, 10), kg(5)), (D(2025, 6, 1), kg(3)), (D(2026, 1, 9), kg(4))]
    assert rolling_rate(adds, D(2026, 1, 9), kg(40), D(2025, 6, 1)) == Decimal(10)


@pytest.mark.parametrize(
    ("application", "percent"),
    [
        (Application.COMMERCIAL_REFRIGERATION, 20),  # 40 CFR 82.157(c)(2)
        (Application.INDUSTRIAL_PROCESS, 30),  # 40 CFR 82.157(c)(2)
        (Application.COMFORT_COOLING, 10),  # 40 CFR 82.157(c)(2)
        (Application.TRANSPORT_REFRIGERATION, 10),  # 40 CFR 82.157(c)(2), "all other"
        (Application.OTHER, 10),  # 40 CFR 82.157(c)(2), "all other"
    ],
)
def test_thresholds(application, percent):
    assert threshold_percent(application) == Decimal(percent)


def test_exactly_at_the_threshold_does_not_exceed():
    # "exceeds" = strictly greater (our reading of 40 CFR 82.157(c)): 20.00 % is not over 20 %
    assert not exceeds(Decimal("20.00"), 20)
    assert exceeds(Decimal("20.0000001"), 20)


def _history(application=Application.COMMERCIAL_REFRIGERATION, method=ANNUALIZING):
    return Log(), site("US1", "US", ("us-82f",), method=method), system(
        1, "US1", application=application)


def test_leak_rates_exceedance_at_and_over_threshold():
    log, s, sy = _history()
    log.in_service(D(2025, 1, 1), "R-22", kg(100))
    at = log.top_up(D(2025, 3, 1), kg(20))  # first addition: 20/100 x 100 = 20 % (82.152)
    over = log.top_up(D(2026, 6, 1), kg("20.000001"))  # 457 days later -> 365: 20.000001 %
    rows = leak_rates(log.history(s, sy), ANNUALIZING)
    assert [r.event_id for r in rows] == [at.id, over.id]
    assert rows[0].percent == Decimal(20) and not rows[0].exceeded
    assert rows[1].percent == Decimal("20.000001") and rows[1].exceeded
    assert rows[1].threshold_percent == Decimal(20)


def test_leak_rates_initial_charge_is_not_counted():
    # 40 CFR 82.157(b) (reference-notes.md): no rate right after a new install or retrofit
    log, s, sy = _history()
    log.in_service(D(2025, 1, 1), "R-22", kg(100))
    first = log.top_up(D(2025, 1, 1), kg(5))
    later = log.top_up(D(2025, 1, 31), kg(1))
    rows = leak_rates(log.history(s, sy), ANNUALIZING)
    assert not rows[0].counted and rows[0].percent is None and rows[0].event_id == first.id
    # the initial-charge addition is not a "previous addition": 1/100 x 100 = 1 %
    assert rows[1].event_id == later.id and rows[1].percent == Decimal(1)


def test_leak_rates_same_day_additions_count_as_one():
    # hand-worked from 40 CFR 82.152: 2 kg on 1 March, then 1 kg + 1 kg on 31 March
    # (30 days later): the day's 2 kg / 100 kg x 365/30 x 100 = 24.333...%
    log, s, sy = _history()
    log.in_service(D(2025, 1, 1), "R-22", kg(100))
    log.top_up(D(2025, 3, 1), kg(2))
    log.top_up(D(2025, 3, 31), kg(1))
    log.top_up(D(2025, 3, 31), kg(1))
    rows = leak_rates(log.history(s, sy), ANNUALIZING)
    assert rows[1].day_total_ng == kg(1) and rows[2].day_total_ng == kg(2)
    assert rows[2].annualizing_percent.quantize(Decimal("0.001")) == Decimal("24.333")
    assert rows[2].rolling_percent == Decimal(4)  # (2 + 1 + 1) / 100 over 365 days


def test_leak_rates_retrofit_restarts_the_count():
    log, s, sy = _history()
    log.in_service(D(2025, 1, 1), "R-22", kg(100))
    log.top_up(D(2025, 3, 1), kg(10))
    log.retrofit(D(2025, 4, 1), "TEST-HCFC-MIX", kg(80))
    log.top_up(D(2025, 5, 1), kg(4))
    rows = leak_rates(log.history(s, sy), ROLLING)
    # after the retrofit only its own additions count: 4/80 x 100 = 5 % (both methods)
    assert rows[1].full_charge_ng == kg(80)
    assert rows[1].rolling_percent == Decimal(5) and rows[1].annualizing_percent == Decimal(5)
    assert rows[1].method == ROLLING and rows[1].percent == Decimal(5)


def test_leak_rates_method_choice_and_bad_method():
    log, s, sy = _history(Application.COMFORT_COOLING)
    log.in_service(D(2025, 1, 1), "R-22", kg(100))
    log.top_up(D(2025, 2, 1), kg(3))
    log.top_up(D(2025, 3, 3), kg(3))
    history = log.history(s, sy)
    annual = leak_rates(history, ANNUALIZING)[1]
    rolling = leak_rates(history, ROLLING)[1]
    # hand-worked (40 CFR 82.152): annualizing 3/100 x 365/30 x 100 = 36.5 %; rolling 6 %
    assert annual.percent == Decimal("36.5") and annual.exceeded  # comfort cooling: 10 %
    assert rolling.percent == Decimal(6) and not rolling.exceeded
    with pytest.raises(ValueError):
        leak_rates(history, "average")


def test_leak_rates_with_unknown_charge_give_no_rate():
    log, s, sy = _history()
    log.in_service(D(2025, 1, 1), "R-22", 0)
    log.top_up(D(2025, 2, 1), kg(3))
    row = leak_rates(log.history(s, sy), ANNUALIZING)[0]
    assert row.counted and row.percent is None and not row.exceeded


def test_leak_rates_json_rows_for_views():
    log, s, sy = _history()
    log.in_service(D(2025, 1, 1), "R-22", kg(100))
    log.top_up(D(2025, 2, 1), kg("2.5"))
    log.top_up(D(2025, 9, 1), kg(1))
    rows = leak_rates_json(log.history(s, sy), D(2025, 6, 30))
    assert len(rows) == 1
    assert rows[0]["on"] == D(2025, 2, 1) and rows[0]["added_kg"] == Decimal("2.5")
    assert rows[0]["threshold_percent"] == Decimal(20) and rows[0]["exceeded"] is False
    assert rows[0]["annualizing_percent"] == Decimal("2.5")
