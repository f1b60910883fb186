"""The Regime value (ledger.rules.regime): declarations, memoised verdicts, one booking pass."""

from __future__ import annotations

import dataclasses
from decimal import Decimal

import pytest

from ledger.domain.booking import book
from ledger.domain.records import Basis, Confidence, ObligationKind, ObligationStatus
from ledger.rules import REGIMES, compute_all, eu, us_82f
from ledger.rules.common import Constant
from ledger.rules.regime import Regime
from tests.domain import D, Log, kg, site, system
from tests.rules import REF, of_kind


def test_every_registered_regime_is_a_frozen_value_with_its_old_names():
    for code, regime in REGIMES.items():
        assert isinstance(regime, Regime) and regime.code == code
        assert (regime.REGIME_VERSION, regime.TITLE, regime.GWP_BASIS, regime.CONSTANTS) == (
            regime.version, regime.title, regime.gwp_basis, regime.constants)
        with pytest.raises(dataclasses.FrozenInstanceError):
            regime.code = "xx"  # type: ignore[misc]
    assert eu.compute_obligations == eu.REGIME.compute_obligations  # module names kept


def test_a_printed_constant_is_the_one_that_runs():
    # Reg. (EU) 2024/573 Art 4(5): the follow-up check "spätestens jedoch innerhalb eines
    # Monats nach der Reparatur"; the engine's window is the printed FOLLOW_UP_MONTHS.
    (printed,) = [c for c in eu.CONSTANTS if c.name == "follow-up check within"]
    (window,) = [d for d in eu.REGIME.duties if type(d).__name__ == "FollowUpWindow"]
    assert printed.value == window.months == eu.FOLLOW_UP_MONTHS
    log = Log()
    log.in_service(D(2025, 1, 31), "TEST-1000", kg(20))  # 20 t CO2e: 12-month checks
    log.check(D(2025, 3, 1), leak=True)
    repair = log.repair(D(2025, 3, 3))
    obs, _ = eu.compute_obligations([log.history(site("DE1"), system(1, "DE1"))], REF, D(2025, 3, 4))
    (follow,) = of_kind(obs, ObligationKind.FOLLOW_UP_CHECK)
    assert (follow.caused_by, follow.due_on) == (repair.id, D(2025, 4, 3))


def test_a_regime_declared_elsewhere_runs_without_being_registered():
    # A toy regime (invented, for this test only): the leak-rate duties of 40 CFR 82.157 with
    # another repair period. Declaring it changes nothing in REGIMES.
    basis = Basis("test regime", Confidence.POLICY, "invented for a test")
    toy = dataclasses.replace(us_82f.REGIME, code="xx-test", version="xx-1", title="test",
                              constants=(Constant("repair within", 7, "days", basis),))
    assert "xx-test" not in REGIMES
    log = Log()
    log.in_service(D(2021, 1, 1), "R-22", kg(100))
    log.top_up(D(2021, 6, 1), kg(30))  # far over every threshold of 82.157(c)(2)
    us = site("US1", "US", ("us-82f",))
    history = log.history(us, system(1, "US1"))
    ours, _ = toy.run([book(history)], REF, D(2021, 6, 2))
    theirs, _ = us_82f.compute_obligations([history], REF, D(2021, 6, 2))
    assert [o.regime for o in ours] == ["xx-test"] * len(theirs)
    assert [(o.kind, o.due_on) for o in ours] == [(o.kind, o.due_on) for o in theirs]


def test_compute_all_reads_one_booking_per_history():
    log = Log()
    log.in_service(D(2026, 1, 1), "R-404A", kg(100))
    log.top_up(D(2026, 2, 1), kg(30))
    us = site("US1", "US", ("us-82f", "us-84c"))
    obs, _ = compute_all([log.history(us, system(1, "US1"))], REF, D(2026, 2, 2))
    direct, _ = REGIMES["us-84c"].compute_obligations([log.history(us, system(1, "US1"))], REF,
                                                      D(2026, 2, 2))
    assert obs == direct and {o.status for o in obs} <= {ObligationStatus.OPEN}
    assert REGIMES["us-82f"].chronic_percent == Decimal(125)  # 40 CFR 82.157(j)
