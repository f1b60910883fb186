"""Masses: parsing what people type, storing exactly, showing in the site's unit.

The ledger stores every mass as integer nanograms. A pound is exactly 0.45359237 kg
(international yard and pound agreement, 1959), so one pound is 453 592 370 000 ng and one
ounce 28 349 523 125 ng: masses typed in kg, g, lb or oz, and their sums, are all exact, and
threshold tests ("exceeds 10 %", "more than 50 lb") compare exact integers.

Parsing accepts one or more ``number unit`` pairs that are summed: ``2.5 kg``, ``850 g``,
``5 lb 8 oz``, ``40 oz``, ``3.1 lbs``, in the units of ``_FAST_UNITS`` only (exact factors,
checked against pint in the tests). Any other unit is refused with a message listing the
accepted ones; pint is loaded only then, to say whether the refused unit was a mass at all.
"""

from __future__ import annotations

import re
from decimal import ROUND_HALF_UP, Context, Decimal, InvalidOperation, localcontext
from functools import cache
from typing import Any

from ledger.errors import UnitError

NG_PER_G = 1_000_000_000
NG_PER_KG = 1000 * NG_PER_G
NG_PER_LB = 453_592_370_000  # exact: 1 lb = 0.45359237 kg (international pound, 1959 agreement)
NG_PER_OZ = 28_349_523_125  # exact: avoirdupois ounce = 1/16 lb = 28.349523125 g

# The units a refrigerant mass may be typed in; keys are lower-case. Nothing else is taken:
# tonnes, tons (short, long or "metric"?), grains, carats, drams and milligrams are refused,
# so a slip of the unit cannot store a mass a thousand times off. Spelled-out forms only.
_FAST_UNITS: dict[str, int] = {
    "kg": NG_PER_KG,
    "kgs": NG_PER_KG,
    "kilogram": NG_PER_KG,
    "kilograms": NG_PER_KG,
    "g": NG_PER_G,
    "gram": NG_PER_G,
    "grams": NG_PER_G,
    "lb": NG_PER_LB,
    "lbs": NG_PER_LB,
    "pound": NG_PER_LB,
    "pounds": NG_PER_LB,
    "oz": NG_PER_OZ,
    "ounce": NG_PER_OZ,
    "ounces": NG_PER_OZ,
}
ACCEPTED_UNITS = "kg, g, lb or oz"
_WIDE = Context(prec=120)

_PAIR = re.compile(r"\s*([+-]?(?:\d+(?:[.,]\d*)?|[.,]\d+)(?:[eE][+-]?\d+)?)\s*([^\d\s.,+-][^\d\s]*)?")

DISPLAY_UNITS = ("kg", "lb")
# The most a single typed mass may be: 100 t (the largest refrigerant charges are a few
# tonnes; common practice, no source). Stored masses are BIGINT nanograms, which hold up to
# 9.22e18 ng = 9 223 t; every sum of masses is taken in Python integers, never in SQL or
# pandas, so totals cannot overflow.
MAX_NG = 100 * 1000 * NG_PER_KG


@cache
def registry() -> Any:
    """The project's one pint UnitRegistry (Decimal magnitudes); built on first use."""
    import pint  # deferred: 0.2 s to import, and the common units never need it

    return pint.UnitRegistry(non_int_type=Decimal)


def _factor_ng(unit: str, text: str, field: str) -> int:
    key = unit.lower()
    if key in _FAST_UNITS:
        return _FAST_UNITS[key]
    ureg = registry()  # only to say what the refused unit is
    try:
        quantity = ureg.Quantity(Decimal(1), unit)
    except Exception as exc:  # pint raises several unrelated types for unknown names
        raise UnitError(field, text, f"has an unknown unit {unit!r}; use {ACCEPTED_UNITS}") from exc
    if not quantity.check("[mass]"):
        raise UnitError(field, text, f"is not a mass ({unit!r} is not a unit of mass); use {ACCEPTED_UNITS}")
    raise UnitError(field, text, f"uses {unit!r}, which the ledger does not take; use {ACCEPTED_UNITS}")


def parse_mass_exact(text: str, *, field: str = "mass") -> Decimal:
    """Parse a typed mass into exact nanograms (a Decimal, not yet checked for whole ng).

    Args:
        text: e.g. ``"2.5 kg"``, ``"5 lb 8 oz"``.
        field: the name of the field, used in error messages.
    Returns:
        The mass in nanograms as an exact Decimal.
    Raises:
        UnitError: empty text, a number without a unit, a unit other than kg, g, lb or oz.
    """
    source = str(text).strip()
    if not source:
        raise UnitError(field, text, "is empty; give a mass with a unit such as 2.5 kg")
    pos, total = 0, Decimal(0)
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
        if not value.is_finite() or abs(value.adjusted()) > 30 or len(number) > 40:
            raise UnitError(field, text, "is not a plausible number")
        with localcontext(_WIDE):  # wide enough that every product and sum here is exact
            total += value * _factor_ng(unit, text, field)
        pos = match.end()
    return total


def parse_mass_ng(text: str, *, field: str = "mass", allow_zero: bool = False) -> int:
    """Parse a typed mass into integer nanograms (exact but for sub-nanogram parts of an ounce).

    Args:
        text: e.g. ``"2.5 kg"``.
        field: the name of the field, used in error messages.
        allow_zero: accept 0 (e.g. nothing recovered at retirement).
    Returns:
        The mass in integer nanograms.
    Raises:
        UnitError: as ``parse_mass_exact``; for negative (or zero) masses, masses above
            ``MAX_NG`` and masses that round to 0 ng.
    """
    exact = parse_mass_exact(text, field=field)
    if exact < 0 or (exact == 0 and not allow_zero):
        raise UnitError(field, text, "must be greater than zero")
    if exact > MAX_NG:
        raise UnitError(field, text, "is implausibly large (more than 100 t)")
    # Whole kg, g, lb and oz figures (and kg/g/lb decimals) are whole nanograms; an odd tenth of
    # an ounce is half a nanogram (1 oz = 28 349 523 125 ng), rounded half-up: 1e-21 kg.
    stored = int(exact.quantize(Decimal(1), rounding=ROUND_HALF_UP))
    if stored == 0 and not allow_zero:
        raise UnitError(field, text, "is less than the ledger keeps (1 ng = 0.000000001 g)")
    return stored


def ng_to_kg(ng: int) -> Decimal:
    """Exact kilograms from nanograms."""
    return Decimal(ng) / NG_PER_KG


def ng_to_lb(ng: int) -> Decimal:
    """Pounds from nanograms (exact to Decimal's 28 digits)."""
    return Decimal(ng) / NG_PER_LB


def lb_to_ng(lb: Decimal | int | str) -> Decimal:
    """Exact nanograms of a pound figure (thresholds in the US rules)."""
    return Decimal(lb) * NG_PER_LB


def format_mass(ng: int | None, unit: str = "kg", places: int = 2) -> str:
    """Show a mass in kg or lb, rounded half-up for display only.

    Args:
        ng: the mass in nanograms (None gives an empty string).
        unit: ``kg`` or ``lb``.
        places: decimals shown.
    """
    if ng is None:
        return ""
    value = ng_to_lb(ng) if unit == "lb" else ng_to_kg(ng)
    q = Decimal(1).scaleb(-places)
    return f"{value.quantize(q, rounding=ROUND_HALF_UP)} {unit}"
