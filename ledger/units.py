"""Masses: parsing what people type, storing exactly, showing in the site's unit.

The ledger stores every mass as integer milligrams. A pound is exactly 0.45359237 kg
(international yard and pound agreement, 1959), so one pound is 453 592.37 mg and is stored
to the nearest milligram (half-up); amounts typed in kg or g are stored exactly.

Parsing accepts one or more ``number unit`` pairs that are summed: ``2.5 kg``, ``850 g``,
``5 lb 8 oz``, ``40 oz``, ``3.1 lbs``. The common units resolve from a table of exact
factors (checked against pint in the tests) so that a ``log`` command does not pay for
loading pint; anything else goes to the project's one pint registry, which also decides
whether an unfamiliar unit is a mass at all.
"""

from __future__ import annotations

import re
from decimal import ROUND_HALF_UP, Decimal, InvalidOperation
from functools import cache
from typing import Any

from ledger.errors import UnitError

NG_PER_LB = Decimal("453592.37")  # exact by the 1959 definition of the international pound
NG_PER_OZ = NG_PER_LB / 16  # avoirdupois ounce = 1/16 lb = 28 349.523125 mg, exact
NG_PER_KG = Decimal(1_000_000)

# Exact factors for the units technicians type; keys are lower-case.
_FAST_UNITS: dict[str, Decimal] = {
    "kg": NG_PER_KG,
    "kgs": NG_PER_KG,
    "kilogram": NG_PER_KG,
    "kilograms": NG_PER_KG,
    "g": Decimal(1000),
    "gram": Decimal(1000),
    "grams": Decimal(1000),
    "mg": Decimal(1),
    "lb": NG_PER_LB,
    "lbs": NG_PER_LB,
    "pound": NG_PER_LB,
    "pounds": NG_PER_LB,
    "oz": NG_PER_OZ,
    "ounce": NG_PER_OZ,
    "ounces": NG_PER_OZ,
    "t": Decimal(1_000_000_000),
    "tonne": Decimal(1_000_000_000),
    "tonnes": Decimal(1_000_000_000),
}

_PAIR = re.compile(r"\s*([+-]?(?:\d+(?:[.,]\d*)?|[.,]\d+)(?:[eE][+-]?\d+)?)\s*([^\d\s.,+-][^\d\s]*)?")

DISPLAY_UNITS = ("kg", "lb")
MAX_NG = Decimal(10) ** 15  # a million tonnes: certainly a typing error


@cache
def registry() -> Any:
    """The project's one pint UnitRegistry (Decimal magnitudes); built on first use."""
    import pint  # deferred: 0.2 s to import, and the common units never need it

    return pint.UnitRegistry(non_int_type=Decimal)


def _factor_ng(unit: str, text: str, field: str) -> Decimal:
    key = unit.lower()
    if key in _FAST_UNITS:
        return _FAST_UNITS[key]
    ureg = registry()
    try:
        quantity = ureg.Quantity(Decimal(1), unit)
    except Exception as exc:  # pint raises several unrelated types for unknown names
        raise UnitError(field, text, f"has an unknown unit {unit!r} (use kg, g, lb or oz)") from exc
    if not quantity.check("[mass]"):
        raise UnitError(field, text, f"is not a mass ({unit!r} is not a unit of mass)")
    return Decimal(quantity.to("milligram").magnitude)


def parse_mass_exact(text: str, *, field: str = "mass") -> Decimal:
    """Parse a typed mass into exact milligrams (a Decimal, not yet rounded).

    Args:
        text: e.g. ``"2.5 kg"``, ``"5 lb 8 oz"``.
        field: the name of the field, used in error messages.
    Returns:
        The mass in milligrams as an exact Decimal.
    Raises:
        UnitError: empty text, a number without a unit, an unknown or non-mass unit.
    """
    source = str(text).strip()
    if not source:
        raise UnitError(field, text, "is empty; give a mass with a unit such as 2.5 kg")
    pos, total, pairs = 0, Decimal(0), 0
    while pos < len(source):
        match = _PAIR.match(source, pos)
        if match is None or match.end() == pos:
            raise UnitError(field, text, "is not a mass; write e.g. 2.5 kg, 850 g or 5 lb 8 oz")
        number, unit = match.group(1), match.group(2)
        if unit is None:
            raise UnitError(field, text, "has no unit; write e.g. 2.5 kg, 850 g or 5 lb 8 oz")
        if re.fullmatch(r"[+-]?\d{1,3},\d{3}", number):
            raise UnitError(field, text, "is ambiguous: is the comma a decimal or thousands mark?")
        try:
            value = Decimal(number.replace(",", "."))
        except InvalidOperation as exc:
            raise UnitError(field, text, "is not a number") from exc
        total += value * _factor_ng(unit, text, field)
        pairs += 1
        pos = match.end()
    if not total.is_finite():
        raise UnitError(field, text, "is not a finite number")
    return total


def parse_mass_ng(text: str, *, field: str = "mass", allow_zero: bool = False) -> int:
    """Parse a typed mass into integer milligrams, rounded half-up.

    Args:
        text: e.g. ``"2.5 kg"``.
        field: the name of the field, used in error messages.
        allow_zero: accept 0 (e.g. nothing recovered at retirement).
    Returns:
        The mass in integer milligrams.
    Raises:
        UnitError: as ``parse_mass_exact``, and for negative (or zero) masses.
    """
    exact = parse_mass_exact(text, field=field)
    if exact < 0 or (exact == 0 and not allow_zero):
        raise UnitError(field, text, "must be greater than zero")
    if exact > MAX_NG:
        raise UnitError(field, text, "is implausibly large")
    return int(exact.quantize(Decimal(1), rounding=ROUND_HALF_UP))


def ng_to_kg(mg: int) -> Decimal:
    """Exact kilograms from milligrams."""
    return Decimal(mg) / NG_PER_KG


def ng_to_lb(mg: int) -> Decimal:
    """Pounds from milligrams (exact to Decimal's 28 digits)."""
    return Decimal(mg) / NG_PER_LB


def lb_to_ng(lb: Decimal | int | str) -> Decimal:
    """Exact milligrams of a pound figure (thresholds in the US rules)."""
    return Decimal(lb) * NG_PER_LB


def format_mass(mg: int | None, unit: str = "kg", places: int = 2) -> str:
    """Show a mass in kg or lb, rounded half-up for display only.

    Args:
        mg: the mass in milligrams (None gives an empty string).
        unit: ``kg`` or ``lb``.
        places: decimals shown.
    """
    if mg is None:
        return ""
    value = ng_to_lb(mg) if unit == "lb" else ng_to_kg(mg)
    q = Decimal(1).scaleb(-places)
    return f"{value.quantize(q, rounding=ROUND_HALF_UP)} {unit}"
