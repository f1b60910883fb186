"""Duty engines and classifiers (ledger.rules.engines), configured directly.

Boundaries come from the texts the regimes cite: 40 CFR 82.157(a) "a full charge of 50 or
more pounds", 17 CCR 95385(c) "full charge greater than 50" (docs/rules/us-82f.md, us-ca.md).
"""

from __future__ import annotations

import dataclasses

from ledger.domain.records import ObligationKind
from ledger.rules import engines as en
from ledger.rules import eu, us_82f, us_ca
from ledger.rules.common import BELOW_THRESHOLD
from ledger.rules.regime import Regime
from tests.domain import D, Log, kg, lb, site, system
from tests.rules import REF, of_kind


def _state(refrigerant, charge_ng, detection=False):
    log = Log()
    log.in_service(D(2025, 1, 1), refrigerant, charge_ng)
    if detection:
        log.detection_on(D(2025, 1, 1))
    from ledger.domain.booking import book

    return book(log.history()).state(D(2025, 1, 2))


def test_charge_scope_at_least_and_strictly_over_50_lb():
    exactly = _state("R-22", lb(50))
    # 82.157(a): 50 lb or more is covered
    assert us_82f.SCOPE.excluded(REF, system(), exactly) is None
    # 95385(c): "greater than 50" pounds; exactly 50 lb is not covered
    at_50 = _state("R-404A", lb(50))
    assert at_50.full_charge_ng == lb(50)
    verdict = us_ca.SCOPE.excluded(REF, system(), dataclasses.replace(
        at_50, full_charge_ng=int(50 * en.NG_PER_LB)))
    assert verdict is not None and verdict.band == BELOW_THRESHOLD


def test_inspection_bands_waive_with_automatic_leak_detection():
    # 17 CCR 95385(a)(1)(B), (b): inspections not required where automatic leak detection is used
    large = us_ca.INSPECTIONS(REF, system(), _state("R-404A", lb(2500), detection=True), D(2025, 1, 2))
    assert large.cadence is None and large.in_scope and large.repair_days == 14
    small = us_ca.INSPECTIONS(REF, system(), _state("R-404A", lb(60), detection=True), D(2025, 1, 2))
    assert small.cadence is not None and small.interval_months == 12  # 95385(c): annually


def test_follow_up_window_runs_its_own_months():
    # The same EU regime with a two-month follow-up window (a configuration, not a source):
    # the due date moves with the engine's parameter, as the printed constant would.
    duties = tuple(en.FollowUpWindow(1, 2) if isinstance(d, en.FollowUpWindow) else d
                   for d in eu.REGIME.duties)
    longer: Regime = dataclasses.replace(eu.REGIME, duties=duties)
    log = Log()
    log.in_service(D(2025, 1, 31), "TEST-1000", kg(20))
    log.check(D(2025, 3, 1), leak=True)
    log.repair(D(2025, 3, 3))
    history = log.history(site("DE1"), system(1, "DE1"))
    (follow,) = of_kind(longer.compute_obligations([history], REF, D(2025, 3, 4))[0],
                        ObligationKind.FOLLOW_UP_CHECK)
    assert (follow.earliest_on, follow.due_on) == (D(2025, 3, 4), D(2025, 5, 3))
