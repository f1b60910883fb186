"""Which certificate covers which work (ledger.domain.certificates), against the texts.

Sources: 40 CFR 82.161(a) types as listed on a trade handbook page (Type I small appliances,
five pounds or less; Type II high-pressure; Type III low-pressure; Universal all) — the CFR
wording itself is from memory; EU categories I-IV of Implementing Reg. (EU) 2015/2067 Art 3
(kept valid by 2024/2215 Art 10): a national decree quoted in a glossary names categories I,
II or IV for leak checks that do not open the circuit; the size limits (3 kg, hermetic 6 kg)
are from memory.
"""

from __future__ import annotations

from datetime import date

import pytest

from ledger.domain.certificates import (
    LOW_PRESSURE,
    WorkFacts,
    certificate_findings,
    certificate_for,
    normal_category,
    uncertified_work,
    why_not,
)
from ledger.domain.records import Certificate, Event, EventKind, Technician
from ledger.units import parse_mass_ng

ON = date(2026, 3, 2)
EU_SITE = ("eu",)
US_SITE = ("us-82f", "us-84c")


def facts(kind: EventKind, charge: str, regimes: tuple[str, ...] = EU_SITE, *, hermetic: bool = False,
          refrigerant: str = "R-404A") -> WorkFacts:
    return WorkFacts(kind, ON, regimes, parse_mass_ng(charge), hermetic, refrigerant)


def cert(scope: str, category: str, **kw) -> Certificate:  # type: ignore[no-untyped-def]
    return Certificate("scheme", f"{scope}-{category}", category, scope=scope, **kw)


@pytest.mark.parametrize(("category", "kind", "charge", "covered"), [
    ("I", EventKind.REPAIR, "380 kg", True),  # category I: every activity, any size
    ("I", EventKind.CHECK, "380 kg", True),
    ("II", EventKind.CHECK, "380 kg", True),  # II: leak checks without opening the circuit, any size
    ("II", EventKind.REPAIR, "380 kg", False),  # ... but other work only below 3 kg (from memory)
    ("II", EventKind.REPAIR, "2.5 kg", True),
    ("III", EventKind.RECOVER, "2.5 kg", True),  # III: recovery from small equipment only
    ("III", EventKind.RECOVER, "12 kg", False),
    ("III", EventKind.CHECK, "2.5 kg", False),
    ("IV", EventKind.CHECK, "380 kg", True),  # IV: leak checks only
    ("IV", EventKind.ADD, "380 kg", False),
])
def test_eu_categories_cover_their_work(category: str, kind: EventKind, charge: str, covered: bool) -> None:
    assert (why_not(cert("eu", category), facts(kind, charge)) is None) is covered


def test_eu_small_equipment_limit_is_higher_when_hermetic() -> None:
    # 2015/2067 Art 3: below 3 kg, or below 6 kg hermetically sealed and labelled (from memory)
    assert why_not(cert("eu", "II"), facts(EventKind.REPAIR, "5 kg", hermetic=True)) is None
    assert why_not(cert("eu", "II"), facts(EventKind.REPAIR, "5 kg")) is not None


def test_a_certificate_is_valid_only_where_its_regime_applies() -> None:
    # Reg. (EU) 2024/573 Art 10 certificates are recognised in the member states, not in the US
    # (common practice, no source); GB and EU certificates are separate since 2021 (from memory)
    reason = why_not(cert("eu", "I"), facts(EventKind.CHECK, "480 lb", US_SITE))
    assert reason is not None and "not valid at a site under us-82f" in reason
    assert why_not(cert("gb", "I"), facts(EventKind.CHECK, "100 kg", EU_SITE)) is not None
    assert why_not(cert("gb", "I"), facts(EventKind.CHECK, "100 kg", ("gb",))) is None


@pytest.mark.parametrize(("category", "charge", "hermetic", "refrigerant", "covered"), [
    ("Type I", "480 lb", False, "R-404A", False),  # issue 13: a small-appliance type on a 480 lb rack
    ("Type I", "5 oz", True, "R-290", True),  # small appliance: factory-sealed, 5 lb or less
    ("Type I", "5 lb", True, "R-134a", True),  # "five pounds or less"
    ("Type I", "5 lb 1 oz", True, "R-134a", False),
    ("Type II", "480 lb", False, "R-404A", True),  # high-pressure appliance
    ("Type II", "5 oz", True, "R-290", False),  # small appliances are excepted from Type II
    ("Type II", "900 lb", False, "R-123", False),  # low-pressure chiller
    ("Type III", "900 lb", False, "R-123", True),
    ("Type III", "480 lb", False, "R-404A", False),
    ("Universal", "900 lb", False, "R-123", True),
    ("Universal", "5 oz", True, "R-290", True),
])
def test_section_608_types(category: str, charge: str, hermetic: bool, refrigerant: str, covered: bool) -> None:
    f = facts(EventKind.ADD, charge, US_SITE, hermetic=hermetic, refrigerant=refrigerant)
    assert (why_not(cert("us-608", category), f) is None) is covered


def test_a_lapsed_certificate_covers_nothing() -> None:
    lapsed = cert("gb", "I", valid_to=date(2025, 9, 30))
    reason = why_not(lapsed, facts(EventKind.CHECK, "140 kg", ("gb",)))
    assert reason is not None and "was not valid on 2026-03-02 (valid to 2025-09-30)" in reason


def test_a_certificate_without_scope_is_judged_by_its_dates_as_before() -> None:
    legacy = Certificate("EU cat I", "C-1", "", valid_to=date(2027, 1, 1))
    assert why_not(legacy, facts(EventKind.CHECK, "480 lb", US_SITE)) is None


def test_the_event_takes_the_certificate_that_covers_that_work() -> None:
    # one technician with Type I and Type II (as in the demo): the rack needs the Type II
    tech = Technician(1, "D", certificates=(cert("us-608", "Type I"), cert("us-608", "Type II")))
    chosen, _ = certificate_for(tech, facts(EventKind.ADD, "480 lb", US_SITE))
    assert chosen is not None and chosen.category == "Type II"
    plug, _ = certificate_for(tech, facts(EventKind.ADD, "5 oz", US_SITE, hermetic=True, refrigerant="R-290"))
    assert plug is not None and plug.category == "Type I"


def test_no_technician_or_no_valid_certificate_is_a_warning() -> None:
    nobody = certificate_findings(None, facts(EventKind.CHECK, "100 kg"))
    assert nobody and "no technician named" in nobody[0].message
    tech = Technician(1, "Bo", certificates=(cert("us-608", "Universal"),))
    found = certificate_findings(tech, facts(EventKind.CHECK, "100 kg"))
    assert found and "done by an uncertified person" in found[0].message
    assert certificate_findings(None, facts(EventKind.CHARGE_REVISED, "100 kg")) == []  # desk work


def test_categories_are_normalised() -> None:
    assert normal_category("eu", "cat. II") == "II"
    assert normal_category("us-608", "type 1") is None  # roman numerals only, as the types are written
    assert normal_category("us-608", "Type I") == "Type I"
    assert normal_category("us-608", "universal") == "Universal"
    assert normal_category("eu", "Universal") is None


def test_office_entries_without_a_technician_carry_no_warning() -> None:
    placed = Event(1, 1, EventKind.IN_SERVICE, ON, certified=False)
    check = Event(2, 1, EventKind.CHECK, ON, certified=False)
    assert not uncertified_work(placed) and uncertified_work(check)


def test_low_pressure_list_agrees_with_coolprop() -> None:
    # 40 CFR 82.152 "low-pressure appliance": refrigerant with a liquid-phase saturation pressure
    # below 45 psia at 104 degF (definition from memory); values from CoolProp (PropsSI).
    CP = pytest.importorskip("CoolProp.CoolProp")
    t = (104 - 32) * 5 / 9 + 273.15
    limit_pa = 45 * 6894.757293168
    names = {"R-11": "R11", "R-113": "R113", "R-123": "R123", "R-245fa": "R245fa", "R-1233zd(E)": "R1233zd(E)"}
    for ours, theirs in names.items():
        assert ours in LOW_PRESSURE
        assert CP.PropsSI("P", "T", t, "Q", 0, theirs) < limit_pa, ours
    for high in ("R22", "R134a", "R32", "R125", "R1234yf"):
        assert CP.PropsSI("P", "T", t, "Q", 0, high) > limit_pa, high
