"""Refrigerant views: composition, GWP per basis, CO2e of a charge, safety cautions."""

from __future__ import annotations

from typing import Any

from ledger.reference import BASES, load_reference, round_half_up
from ledger.units import ng_to_kg


def safety_caution(safety_class: str) -> str:
    """The usual caution for a flammable or toxic safety class ('' for A1)."""
    parts = []
    if safety_class.startswith("B"):
        parts.append("higher toxicity (ASHRAE 34 class B): exposure limits, ventilation and detection apply")
    if safety_class.endswith(("2L", "2", "3")):
        parts.append(
            f"flammable (ASHRAE 34 class {safety_class}): charge limits, ventilation, ignition "
            "sources and detection apply"
        )
    if not parts:
        return ""
    return "; ".join(parts) + ". Follow local codes, standards and licensed practice."


def refrigerant_view(name: str, *, charge_ng: int | None = None) -> dict[str, Any]:
    """Everything the `refrigerant show` contract prints about one refrigerant.

    Args:
        name: any accepted spelling.
        charge_ng: optional charge to convert to CO2e under each basis.
    """
    reference = load_reference()
    ref = reference.lookup(name)
    figures = {basis: reference.gwp(ref.designation, basis) for basis in BASES}
    view: dict[str, Any] = {
        "designation": ref.designation,
        "safety_class": ref.safety_class,
        "components": [{"designation": d, "mass_percent": pct} for d, pct in ref.components],
        "gwp": {b: f.value for b, f in figures.items()},
        "gwp_rounded": {b: int(round_half_up(f.value)) for b, f in figures.items()},
        "unlisted": {b: list(f.unlisted) for b, f in figures.items() if f.unlisted},
        "molar_mass_g_mol": reference.molar_mass_g_mol(ref.designation),
        "odp": reference.odp(ref.designation),
        "notes": [
            f"{b}: {', '.join(f.unlisted)} not listed in that table, counted as 0"
            for b, f in figures.items()
            if f.unlisted
        ],
        "caution": safety_caution(ref.safety_class),
    }
    if charge_ng is not None:
        charge_kg = ng_to_kg(charge_ng)
        co2e = {b: charge_kg * f.value / 1000 for b, f in figures.items()}
        view["charge_kg"] = charge_kg
        view["co2e_t"] = co2e
        view["co2e_display"] = {b: str(round_half_up(v, 2)) for b, v in co2e.items()}
    return view


def refrigerant_list() -> list[dict[str, Any]]:
    """Every refrigerant with its GWP per basis (display-rounded and exact)."""
    reference = load_reference()
    rows = []
    for designation in sorted(reference.refrigerants):
        ref = reference.refrigerants[designation]
        gwp = {b: reference.gwp(designation, b).value for b in BASES}
        rows.append(
            {
                "designation": designation,
                "safety_class": ref.safety_class,
                "kind": "blend" if ref.is_blend else "/".join(sorted(reference.chem_classes(designation))),
                "gwp": gwp,
                "gwp_display": {b: str(round_half_up(v)) for b, v in gwp.items()},
            }
        )
    return rows
