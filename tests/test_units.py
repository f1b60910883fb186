"""Mass parsing and formatting against the exact international pound.

Source for every pound/ounce figure: the international yard and pound agreement (1959)
defines 1 lb = 0.45359237 kg exactly; 1 oz (avoirdupois) = 1/16 lb.
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
    format_mass,
    ng_to_lb,
    parse_mass_exact,
    parse_mass_ng,
    registry,
)

POUND_KG = Decimal("0.45359237")  # 1959 definition


@pytest.mark.parametrize(
    ("text", "exact_ng"),
    [
        ("1 lb", POUND_KG * 1_000_000),
        ("100 lb", POUND_KG * 100 * 1_000_000),  # 45.359237 kg, exact in mg
        ("5 lb 8 oz", POUND_KG * Decimal("5.5") * 1_000_000),
        ("40 oz", POUND_KG * Decimal("2.5") * 1_000_000),
        ("3.1 lbs", POUND_KG * Decimal("3.1") * 1_000_000),
        ("2.5 kg", Decimal(2_500_000)),
        ("850 g", Decimal(850_000)),
        ("2,5 kg", Decimal(2_500_000)),
        ("12kg", Decimal(12_000_000)),
    ],
)
def test_parse_exact_against_the_international_pound(text: str, exact_ng: Decimal) -> None:
    assert parse_mass_exact(text) == exact_ng


def test_stored_milligrams_round_half_up() -> None:
    # 1 lb = 453 592.37 mg (1959 definition) -> 453 592 mg stored
    assert parse_mass_ng("1 lb") == 453_592
    # 1 oz = 28 349.523125 mg -> 28 350 mg
    assert parse_mass_ng("1 oz") == 28_350
    assert parse_mass_ng("100 lb") == 45_359_237


def test_fast_units_agree_with_pint() -> None:
    ureg = registry()
    # pint knows no plural "kgs"/"lbs" abbreviations; compare them under their singular.
    for unit, factor in _FAST_UNITS.items():
        name = {"kgs": "kg", "lbs": "lb"}.get(unit, unit)
        pint_ng = ureg.Quantity(Decimal(1), name).to("milligram").magnitude
        assert Decimal(pint_ng) == factor, unit


@pytest.mark.parametrize(
    ("text", "fragment"),
    [
        ("2.5", "no unit"),
        ("0 kg", "greater than zero"),
        ("-1 kg", "greater than zero"),
        ("abc", "not a mass"),
        ("", "empty"),
        ("5 m", "not a mass"),
        ("3 furlongs", "not a unit of mass"),
        ("3 blorps", "unknown unit"),
        ("1,000 kg", "ambiguous"),
        ("1e20 t", "implausibly large"),
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
    assert format_mass(45_359_237, "lb") == "100.00 lb"
    assert format_mass(2_500_000, "kg") == "2.50 kg"
    assert format_mass(None) == ""
    assert ng_to_lb(int(NG_PER_LB * 50)) == Decimal(int(NG_PER_LB * 50)) / NG_PER_LB


@given(st.integers(min_value=1, max_value=10**12))
def test_kg_text_round_trips_exactly(mg: int) -> None:
    assert parse_mass_ng(format_mass(mg, "kg", places=6)) == mg


@given(st.integers(min_value=0, max_value=2000), st.integers(min_value=0, max_value=15))
def test_pounds_and_ounces_sum(lb: int, oz: int) -> None:
    if lb == 0 and oz == 0:
        return
    expected = POUND_KG * 1_000_000 * (lb + Decimal(oz) / 16)
    assert parse_mass_exact(f"{lb} lb {oz} oz") == expected
