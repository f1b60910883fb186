"""Mass parsing and formatting against the exact international pound.

Source for every pound/ounce figure: the international yard and pound agreement (1959)
defines 1 lb = 0.45359237 kg exactly; 1 oz (avoirdupois) = 1/16 lb. Masses are stored as
integer nanograms, so every one of them is a whole number and stored without rounding.
"""

from __future__ import annotations

from decimal import Decimal

import pytest
from hypothesis import given
from hypothesis import strategies as st

from ledger.errors import UnitError
from ledger.units import (
    _FAST_UNITS,
    NG_PER_LB,
    NG_PER_OZ,
    format_mass,
    ng_to_kg,
    ng_to_lb,
    parse_mass_exact,
    parse_mass_ng,
    registry,
)

POUND_KG = Decimal("0.45359237")  # 1959 definition
NG_PER_KG = 10**12  # SI: 1 kg = 10^3 g = 10^12 ng


@pytest.mark.parametrize(
    ("text", "exact_ng"),
    [
        ("1 lb", POUND_KG * NG_PER_KG),
        ("100 lb", POUND_KG * 100 * NG_PER_KG),  # 45.359237 kg
        ("5 lb 8 oz", POUND_KG * Decimal("5.5") * NG_PER_KG),
        ("40 oz", POUND_KG * Decimal("2.5") * NG_PER_KG),
        ("3.1 lbs", POUND_KG * Decimal("3.1") * NG_PER_KG),
        ("2.5 kg", Decimal(2_500_000_000_000)),
        ("850 g", Decimal(850_000_000_000)),
        ("2,5 kg", Decimal(2_500_000_000_000)),
        ("12kg", Decimal(12_000_000_000_000)),
    ],
)
def test_parse_exact_against_the_international_pound(text: str, exact_ng: Decimal) -> None:
    assert parse_mass_exact(text) == exact_ng


def test_pounds_and_ounces_are_stored_exactly() -> None:
    # 1 lb = 0.45359237 kg = 453 592 370 000 ng; 1 oz = 1/16 lb = 28 349 523 125 ng (1959)
    assert parse_mass_ng("1 lb") == 453_592_370_000 == NG_PER_LB
    assert parse_mass_ng("1 oz") == 28_349_523_125 == NG_PER_OZ
    assert NG_PER_OZ * 16 == NG_PER_LB
    assert parse_mass_ng("100 lb") == 45_359_237_000_000
    assert ng_to_kg(parse_mass_ng("100 lb")) == Decimal("45.359237")


def test_a_tenth_of_an_ounce_rounds_to_the_nanogram() -> None:
    # 0.1 oz = 2 834 952 312.5 ng (1 oz = 28 349 523 125 ng): half-up to the whole ng
    assert parse_mass_ng("0.1 oz") == 2_834_952_313
    assert parse_mass_ng("0.2 oz") == 5_669_904_625


def test_sums_of_pounds_are_exact() -> None:
    # 10 x 1 lb is exactly 10 lb, and 5 x 25 lb exactly 125 lb: no rounding to accumulate
    assert sum(parse_mass_ng("1 lb") for _ in range(10)) == parse_mass_ng("10 lb")
    assert 5 * parse_mass_ng("25 lb") == parse_mass_ng("125 lb")
    assert sum(parse_mass_ng("1 oz") for _ in range(16)) == parse_mass_ng("1 lb")


def test_fast_units_agree_with_pint() -> None:
    ureg = registry()
    # pint knows no plural "kgs"/"lbs" abbreviations; compare them under their singular.
    for unit, factor in _FAST_UNITS.items():
        name = {"kgs": "kg", "lbs": "lb"}.get(unit, unit)
        pint_ng = ureg.Quantity(Decimal(1), name).to("nanogram").magnitude
        assert Decimal(pint_ng) == factor, unit


@pytest.mark.parametrize(
    ("text", "fragment"),
    [
        ("2.5", "no unit"),
        ("0 kg", "greater than zero"),
        ("-1 kg", "greater than zero"),
        ("abc", "not a mass"),
        ("", "empty"),
        ("5 m", "not a unit of mass"),
        ("3 furlongs", "not a unit of mass"),
        ("3 blorps", "unknown unit"),
        ("1,000 kg", "ambiguous"),
        ("200000 kg", "implausibly large"),
        ("1e40 kg", "not a plausible number"),
        # units of mass the ledger refuses (issue 13): a slip of unit must not store a mass
        # a thousand times off; the message lists what is taken
        ("2.5 t", "does not take; use kg, g, lb or oz"),
        ("2 ton", "does not take; use kg, g, lb or oz"),
        ("3 grain", "does not take; use kg, g, lb or oz"),
        ("2 carat", "does not take; use kg, g, lb or oz"),
        ("1 dram", "does not take; use kg, g, lb or oz"),
        ("0.0001 mg", "does not take; use kg, g, lb or oz"),
        ("500 mg", "does not take; use kg, g, lb or oz"),
        ("1e-10 g", "less than the ledger keeps"),
    ],
)
def test_bad_masses_name_the_field_and_value(text: str, fragment: str) -> None:
    with pytest.raises(UnitError) as info:
        parse_mass_ng(text, field="--mass")
    message = str(info.value)
    assert message.startswith("--mass: ")
    assert repr(text) in message
    assert fragment in message


def test_zero_allowed_where_asked() -> None:
    assert parse_mass_ng("0 kg", allow_zero=True) == 0


def test_format_mass_kg_and_lb() -> None:
    assert format_mass(45_359_237_000_000, "lb") == "100.00 lb"
    assert format_mass(2_500_000_000_000, "kg") == "2.50 kg"
    assert format_mass(None) == ""
    assert ng_to_lb(NG_PER_LB * 50) == Decimal(50)


@given(st.integers(min_value=1, max_value=10**17))
def test_kg_text_round_trips_exactly(ng: int) -> None:
    assert parse_mass_ng(format_mass(ng, "kg", places=12)) == ng


@given(st.integers(min_value=0, max_value=2000), st.integers(min_value=0, max_value=15))
def test_pounds_and_ounces_sum(lb: int, oz: int) -> None:
    if lb == 0 and oz == 0:
        return
    expected = POUND_KG * NG_PER_KG * (lb + Decimal(oz) / 16)
    assert parse_mass_exact(f"{lb} lb {oz} oz") == expected
    assert parse_mass_ng(f"{lb} lb {oz} oz") == lb * NG_PER_LB + oz * NG_PER_OZ
