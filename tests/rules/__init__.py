"""A small reference table for the rules tests, built with the real `ledger.reference` classes.

Real substances carry the figures of /work/shared/reference-notes.md: AR4 100-year GWPs from
IPCC AR4 WG1 Table 2.14 (also the EU Annex I values), olefins under the `eu` basis with the
2024/573 Annex II values (R-1234yf 0.501, R-1234ze(E) 1.37: bfs-kaelte-klima.de extract, in the
notes' "Checked in December 2026") and under `gb` with the 517/2014 Annex II values (4 and 7:
from memory, marked so in the notes), blend compositions from
ASHRAE 34 as listed in the notes. The "TEST-" substances are fictitious, with round GWPs
chosen so that regulatory boundaries fall on whole milligrams; they exist only here.
"""

from __future__ import annotations

from decimal import Decimal

from ledger.reference import Component, Reference, Refrigerant

_BASES = ("eu", "gb", "ar4", "ar5", "ar6")


def _component(designation: str, chem_class: str, eu_annex: str,
               eu: str | None, ar4: str | None, odp: str = "0",
               gb: str | None = None) -> Component:
    gwp = {"eu": eu, "gb": gb or eu, "ar4": ar4, "ar5": None, "ar6": None}
    return Component(
        designation=designation, aliases=(), chem_class=chem_class, formula="", odp=Decimal(odp),
        gwp={b: None if gwp[b] is None else Decimal(gwp[b]) for b in _BASES},
        molar_mass_g_mol=Decimal(100), safety_class="A1", eu_annex=eu_annex, source="test table",
    )


COMPONENTS = {
    c.designation: c
    for c in (
        # AR4 WG1 Table 2.14 = EU Annex I values (reference-notes.md, GWP data)
        _component("R-32", "HFC", "I", "675", "675"),
        _component("R-125", "HFC", "I", "3500", "3500"),
        _component("R-134a", "HFC", "I", "1430", "1430"),
        _component("R-143a", "HFC", "I", "4470", "4470"),
        _component("R-23", "HFC", "I", "14800", "14800"),
        # EU 2024/573 Annex II / GB 517/2014 Annex II (reference-notes.md); AR4 lists no olefins
        _component("R-1234yf", "HFO", "II-1", "0.501", None, gb="4"),
        _component("R-1234ze(E)", "HFO", "II-1", "1.37", None, gb="7"),
        # natural refrigerants; EU values per 517/2014 Annex IV (reference-notes.md)
        _component("R-744", "natural", "none", "1", "1"),
        _component("R-717", "natural", "none", "0", None),
        _component("R-290", "HC", "none", "3", None),
        # HCFC-22: AR4 1810, ODP 0.055 (reference-notes.md)
        _component("R-22", "HCFC", "ods", "1810", "1810", odp="0.055"),
        # fictitious, round GWPs on every basis
        _component("TEST-1000", "HFC", "I", "1000", "1000"),
        _component("TEST-150", "HFC", "I", "150", "150"),
        _component("TEST-53", "HFC", "I", "53", "53"),
    )
}

# ASHRAE 34 mass % as listed in reference-notes.md; TEST-HCFC-MIX is fictitious.
BLENDS = {
    "R-404A": (("R-125", "44"), ("R-143a", "52"), ("R-134a", "4")),
    "R-410A": (("R-32", "50"), ("R-125", "50")),
    "R-448A": (("R-32", "26"), ("R-125", "26"), ("R-1234yf", "20"), ("R-134a", "21"),
               ("R-1234ze(E)", "7")),
    "R-454B": (("R-32", "68.9"), ("R-1234yf", "31.1")),
    "R-455A": (("R-744", "3"), ("R-32", "21.5"), ("R-1234yf", "75.5")),
    "R-513A": (("R-1234yf", "56"), ("R-134a", "44")),
    "TEST-HCFC-MIX": (("R-22", "50"), ("R-134a", "50")),
}


def small_reference() -> Reference:
    """The test table as a real `Reference`."""
    refrigerants = {
        name: Refrigerant(name, (), c.safety_class, ((name, Decimal(100)),), False, "test table")
        for name, c in COMPONENTS.items()
    }
    for name, parts in BLENDS.items():
        refrigerants[name] = Refrigerant(
            name, (), "A1", tuple((c, Decimal(p)) for c, p in parts), True, "test table")
    return Reference(COMPONENTS, refrigerants)


REF = small_reference()


def of_kind(obligations, kind):
    """The obligations of one kind, in the order given (earliest due first)."""
    return [o for o in obligations if o.kind is kind]


def summary(obligations):
    """(kind, due_on, status, caused_by, met_by) tuples: compact to compare in a test."""
    return [(o.kind.value, o.due_on, o.status.value, o.caused_by, o.met_by) for o in obligations]
