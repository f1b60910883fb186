"""Packaged refrigerant reference data (components, blends, GWP tables) and a typed loader.

The three CSV files beside this module are the table of record; `load_reference()` reads them
once through `importlib.resources` into frozen records. Everything here is exact
(`decimal.Decimal`, never float), does no other I/O, reads no clock and imports only the
standard library, so rules can take a `Reference` as a plain argument and tests can build a
small one by hand. See `docs/refrigerants.md` for the columns, sources and conventions.
"""

from __future__ import annotations

import csv
import functools
import io
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from decimal import ROUND_HALF_UP, Context, Decimal, localcontext
from types import MappingProxyType

from ledger.errors import InputError, UnknownRefrigerant

__all__ = [
    "BASES",
    "CHEM_CLASSES",
    "EU_ANNEX_MARKS",
    "Component",
    "GwpFigure",
    "Reference",
    "Refrigerant",
    "co2e_tonnes",
    "load_reference",
    "parse_reference",
    "round_half_up",
]

BASES: tuple[str, ...] = (
    "eu",  # EU F-gas convention of Reg. (EU) 2024/573: Annex I values (AR4 for saturated
    #        HFCs, PFC-116 12 400), Annex II values for olefins (R-1234yf 0.501, R-1234ze(E)
    #        1.37), the 517/2014 Annex IV figures for non-fluorinated gases (propane 3, ...)
    "gb",  # Reg. (EU) 517/2014 as retained in Great Britain: Annex I (AR4), its Annex II
    #        olefin values (R-1234yf 4, R-1234ze(E) 7, from memory), Annex IV for the rest
    "ar4",  # IPCC AR4 WG1 Table 2.14, 100-year (California RMP; US AIM Act too, from memory)
    "ar5",  # IPCC AR5 WG1 Table 8.A.1, 100-year, without climate-carbon feedback
    "ar6",  # IPCC AR6 WG1 Table 7.SM.7, 100-year
)

# Closed sets used in the CSV; a row outside them is a data error caught at load time.
CHEM_CLASSES: frozenset[str] = frozenset(
    {"HFC", "HFO", "HCFO", "HC", "HCFC", "CFC", "PFC", "natural"}
)
EU_ANNEX_MARKS: frozenset[str] = frozenset(
    {
        "I",  # Annex I fluorinated greenhouse gas (saturated HFCs, PFCs): counted in t CO2e
        "II-1",  # Annex II section 1 (unsaturated HFCs/HCFOs): counted in kg
        "ods",  # ozone-depleting substance (HCFC/CFC), governed by the ODS rules instead
        "none",  # not fluorinated (hydrocarbons, R-744, R-717)
    }
)

# Prefixes people put in front of an ASHRAE number; stripped only when a digit follows, so
# "CO2" or "carbon dioxide" are never mangled. Longest first so "HCFC" wins over "HC".
_PREFIXES: tuple[str, ...] = ("hcfo", "hcfc", "hfo", "hfc", "cfc", "pfc", "fc", "hc", "r")
# Characters dropped when normalising a name: spaces, hyphens and dash look-alikes,
# underscores and parentheses (so "R-1234ze(E)" and "1234zeE" meet).
_DROP = str.maketrans("", "", " \t-_()\u2010\u2011\u2012\u2013\u2014")
# Wide enough that sums of products of the CSV's short decimals are exact; set explicitly so a
# caller's decimal context can never change a GWP.
_EXACT = Context(prec=60)
_HUNDRED = Decimal(100)


@dataclass(frozen=True, slots=True)
class Component:
    """A pure substance from `components.csv`.

    `gwp` maps each basis code in `BASES` to the 100-year GWP, or None where that basis table
    gives no usable number (see docs/refrigerants.md).
    """

    designation: str
    aliases: tuple[str, ...]
    chem_class: str
    formula: str
    odp: Decimal
    gwp: Mapping[str, Decimal | None] = field(hash=False)
    molar_mass_g_mol: Decimal
    safety_class: str
    eu_annex: str
    source: str


@dataclass(frozen=True, slots=True)
class Refrigerant:
    """Anything a system can be charged with: a blend, or a pure component (one entry at 100)."""

    designation: str
    aliases: tuple[str, ...]
    safety_class: str
    components: tuple[tuple[str, Decimal], ...]  # (component designation, mass percent)
    is_blend: bool
    source: str


@dataclass(frozen=True, slots=True)
class GwpFigure:
    """A refrigerant's GWP under one basis, unrounded (round only for display)."""

    basis: str
    value: Decimal  # exact sum of mass fraction x component GWP
    unlisted: tuple[str, ...]  # components the basis table does not list, counted as 0


def _normalise(name: str) -> str:
    """Fold a refrigerant name to its lookup key: no case, separators or ASHRAE prefix."""
    key = name.strip().casefold().translate(_DROP)
    for prefix in _PREFIXES:
        rest = key[len(prefix) :]
        if key.startswith(prefix) and rest[:1].isdigit():
            return rest
    return key


class Reference:
    """Read-only refrigerant and component tables with lookup and mixture arithmetic.

    Build one with `load_reference()` for the packaged data, or directly from a few records
    in tests. The constructor checks the tables are consistent and raises ValueError if not.
    """

    __slots__ = ("components", "refrigerants", "_index")

    def __init__(
        self,
        components: Mapping[str, Component],
        refrigerants: Mapping[str, Refrigerant],
    ) -> None:
        """Check the tables and build the name index.

        Args:
            components: pure substances by designation.
            refrigerants: blends and pure components by designation; every pure component
                should appear here too (as a one-component refrigerant).
        """
        self.components: Mapping[str, Component] = MappingProxyType(dict(components))
        self.refrigerants: Mapping[str, Refrigerant] = MappingProxyType(dict(refrigerants))
        _check_tables(self.components, self.refrigerants)
        self._index: Mapping[str, str] = MappingProxyType(_build_index(self.refrigerants))

    def __repr__(self) -> str:
        return (
            f"Reference({len(self.components)} components, {len(self.refrigerants)} refrigerants)"
        )

    def lookup(self, name: str) -> Refrigerant:
        """Find a refrigerant by designation or alias, forgiving case, hyphens and prefixes.

        "R404A", "r-404a", "404A", "HFC-134a", "1234zeE", "CO2" and "ammonia" all resolve.

        Args:
            name: the name as typed.

        Returns:
            The matching refrigerant.

        Raises:
            UnknownRefrigerant: no match; carries up to three close designations.
        """
        exact = self.refrigerants.get(name)
        if exact is not None:
            return exact
        key = _normalise(name)
        designation = self._index.get(key)
        if designation is not None:
            return self.refrigerants[designation]
        raise UnknownRefrigerant(name, self._suggest(key))

    def _suggest(self, key: str) -> tuple[str, ...]:
        import difflib  # only needed on a miss; kept out of the import path

        if not key:
            return ()
        found: list[str] = []
        for match in difflib.get_close_matches(key, self._index.keys(), n=12, cutoff=0.5):
            designation = self._index[match]
            if designation not in found:
                found.append(designation)
        return tuple(found[:3])

    def gwp(self, designation: str, basis: str) -> GwpFigure:
        """Mass-weighted 100-year GWP of a refrigerant under one basis, unrounded.

        Components the basis does not list count as 0 and are named in `unlisted`, so a caller
        can tell "GWP 0" from "GWP unknown".

        Args:
            designation: a designation or any name `lookup` accepts.
            basis: one of `BASES`.

        Returns:
            The exact figure.

        Raises:
            InputError: unknown basis.
            UnknownRefrigerant: unknown name.
        """
        if basis not in BASES:
            raise InputError("basis", basis, "is not one of " + ", ".join(BASES))
        refrigerant = self.lookup(designation)
        total = Decimal(0)
        unlisted: list[str] = []
        with localcontext(_EXACT):
            for name, percent in refrigerant.components:
                value = self.components[name].gwp[basis]
                if value is None:
                    unlisted.append(name)
                    continue
                total += percent * value / _HUNDRED
        return GwpFigure(basis=basis, value=total, unlisted=tuple(unlisted))

    def molar_mass_g_mol(self, designation: str) -> Decimal:
        """Vapour molar mass in g/mol; for a blend 1 / sum(w_i / M_i) with mass fractions w_i.

        Args:
            designation: a designation or any name `lookup` accepts.

        Returns:
            The molar mass (a pure component's CSV value unchanged; a blend's to 28 digits).
        """
        refrigerant = self.lookup(designation)
        if not refrigerant.is_blend:
            return self.components[refrigerant.components[0][0]].molar_mass_g_mol
        with localcontext(Context(prec=28)):
            moles_per_gram = sum(
                (
                    percent / _HUNDRED / self.components[name].molar_mass_g_mol
                    for name, percent in refrigerant.components
                ),
                Decimal(0),
            )
            return Decimal(1) / moles_per_gram

    def mass_fraction_where(self, designation: str, eu_annex: str) -> Decimal:
        """Fraction (0..1) of a charge made of components carrying one `eu_annex` mark.

        For a mixture under EU 2024/573 Art 5 the Annex I part is tested in t CO2e and the
        Annex II section 1 part in kg; this gives the share of each.

        Args:
            designation: a designation or any name `lookup` accepts.
            eu_annex: one of `EU_ANNEX_MARKS` ("I", "II-1", "ods", "none").

        Returns:
            The exact mass fraction.

        Raises:
            InputError: unknown mark.
        """
        if eu_annex not in EU_ANNEX_MARKS:
            raise InputError("eu_annex", eu_annex, "is not one of I, II-1, ods, none")
        refrigerant = self.lookup(designation)
        with localcontext(_EXACT):
            return sum(
                (
                    percent / _HUNDRED
                    for name, percent in refrigerant.components
                    if self.components[name].eu_annex == eu_annex
                ),
                Decimal(0),
            )

    def chem_classes(self, designation: str) -> frozenset[str]:
        """The chemical classes present in a refrigerant (e.g. {"HFC", "HFO"} for R-513A).

        Args:
            designation: a designation or any name `lookup` accepts.
        """
        refrigerant = self.lookup(designation)
        return frozenset(self.components[name].chem_class for name, _ in refrigerant.components)

    def odp(self, designation: str) -> Decimal:
        """Mass-weighted ozone depletion potential (0 for HFCs, HFOs and natural refrigerants).

        Args:
            designation: a designation or any name `lookup` accepts.
        """
        refrigerant = self.lookup(designation)
        with localcontext(_EXACT):
            return sum(
                (
                    percent * self.components[name].odp / _HUNDRED
                    for name, percent in refrigerant.components
                ),
                Decimal(0),
            )


def round_half_up(value: Decimal, places: int = 0) -> Decimal:
    """Round for display the way regulations print figures: halves go away from zero.

    Python's `round()` rounds half to even (round(2.5) == 2); published GWPs are not.

    Args:
        value: the exact value.
        places: decimal places to keep (0 gives an integer-valued Decimal).
    """
    with localcontext(_EXACT):
        return value.quantize(Decimal(1).scaleb(-places), rounding=ROUND_HALF_UP)


def co2e_tonnes(charge_kg: Decimal, gwp: Decimal) -> Decimal:
    """Tonnes of CO2 equivalent of a charge, exactly: charge_kg x gwp / 1000.

    Args:
        charge_kg: refrigerant mass in kg.
        gwp: the refrigerant's (unrounded or rounded, as the rule requires) GWP.

    Raises:
        TypeError: a float was passed; floats would make the figure inexact.
    """
    if isinstance(charge_kg, float) or isinstance(gwp, float):
        raise TypeError("co2e_tonnes takes Decimal (or int) arguments, not float")
    with localcontext(_EXACT):
        return (Decimal(charge_kg) * Decimal(gwp)).scaleb(-3)


@functools.cache
def load_reference() -> Reference:
    """Read the packaged CSV files once and return the shared, read-only `Reference`."""
    return Reference(
        *parse_reference(
            _read("components.csv"), _read("blends.csv"), _read("blend_components.csv")
        )
    )


def _read(filename: str) -> str:
    from importlib import resources  # deferred: only the first load reads the files

    return resources.files(__name__).joinpath(filename).read_text(encoding="utf-8")


def parse_reference(
    components_csv: str, blends_csv: str, blend_components_csv: str
) -> tuple[dict[str, Component], dict[str, Refrigerant]]:
    """Parse the three CSV texts into component and refrigerant tables.

    Args:
        components_csv: text of components.csv.
        blends_csv: text of blends.csv.
        blend_components_csv: text of blend_components.csv.

    Returns:
        (components, refrigerants) by designation; pure components appear in both.

    Raises:
        ValueError: a malformed row, naming the file and line.
    """
    components: dict[str, Component] = {}
    refrigerants: dict[str, Refrigerant] = {}
    for where, row in _rows("components.csv", components_csv):
        component = _component(where, row)
        _put(components, component.designation, component, where)
        refrigerants[component.designation] = Refrigerant(
            designation=component.designation,
            aliases=component.aliases,
            safety_class=component.safety_class,
            components=((component.designation, _HUNDRED),),
            is_blend=False,
            source=component.source,
        )
    parts: dict[str, list[tuple[str, Decimal]]] = {}
    for where, row in _rows("blend_components.csv", blend_components_csv):
        parts.setdefault(row["blend"], []).append(
            (row["component"], _decimal(where, "mass_percent", row["mass_percent"]))
        )
    for where, row in _rows("blends.csv", blends_csv):
        designation = row["designation"]
        blend = Refrigerant(
            designation=designation,
            aliases=_aliases(row["aliases"]),
            safety_class=row["safety_class"],
            components=tuple(parts.pop(designation, ())),
            is_blend=True,
            source=row["source"],
        )
        _put(refrigerants, designation, blend, where)
    if parts:
        raise ValueError(f"blend_components.csv: blends not in blends.csv: {sorted(parts)}")
    return components, refrigerants


def _rows(filename: str, text: str) -> Iterable[tuple[str, dict[str, str]]]:
    reader = csv.DictReader(io.StringIO(text))
    for row in reader:
        where = f"{filename}:{reader.line_num}"
        if None in row or any(value is None for value in row.values()):
            raise ValueError(f"{where}: wrong number of fields")
        row = {key: value.strip() for key, value in row.items()}
        if not row.get("source"):
            raise ValueError(f"{where}: empty source")
        yield where, row


def _component(where: str, row: dict[str, str]) -> Component:
    gwp = {
        basis: (
            _decimal(where, f"gwp_{basis}", row[f"gwp_{basis}"]) if row[f"gwp_{basis}"] else None
        )
        for basis in BASES
    }
    if row["chem_class"] not in CHEM_CLASSES:
        raise ValueError(f"{where}: chem_class {row['chem_class']!r} unknown")
    if row["eu_annex"] not in EU_ANNEX_MARKS:
        raise ValueError(f"{where}: eu_annex {row['eu_annex']!r} unknown")
    return Component(
        designation=row["designation"],
        aliases=_aliases(row["aliases"]),
        chem_class=row["chem_class"],
        formula=row["formula"],
        odp=_decimal(where, "odp", row["odp"]),
        gwp=MappingProxyType(gwp),
        molar_mass_g_mol=_decimal(where, "molar_mass_g_mol", row["molar_mass_g_mol"]),
        safety_class=row["safety_class"],
        eu_annex=row["eu_annex"],
        source=row["source"],
    )


def _aliases(text: str) -> tuple[str, ...]:
    return tuple(alias.strip() for alias in text.split(";") if alias.strip())


def _decimal(where: str, column: str, text: str) -> Decimal:
    try:
        value = Decimal(text)
    except ArithmeticError:
        raise ValueError(f"{where}: {column} {text!r} is not a decimal number") from None
    if not value.is_finite() or value < 0:
        raise ValueError(f"{where}: {column} {text!r} must be a finite number >= 0")
    return value


def _put(table: dict, key: str, value: object, where: str) -> None:
    if key in table:
        raise ValueError(f"{where}: duplicate designation {key!r}")
    table[key] = value


def _check_tables(
    components: Mapping[str, Component], refrigerants: Mapping[str, Refrigerant]
) -> None:
    for designation, refrigerant in refrigerants.items():
        if not refrigerant.components:
            raise ValueError(f"{designation}: no components")
        missing = [name for name, _ in refrigerant.components if name not in components]
        if missing:
            raise ValueError(f"{designation}: unknown components {missing}")
        total = sum((percent for _, percent in refrigerant.components), Decimal(0))
        if total != _HUNDRED:
            raise ValueError(f"{designation}: mass percents sum to {total}, not 100")
    for designation, component in components.items():
        if set(component.gwp) != set(BASES):
            raise ValueError(f"{designation}: gwp must have exactly the bases {BASES}")


def _build_index(refrigerants: Mapping[str, Refrigerant]) -> dict[str, str]:
    index: dict[str, str] = {}
    for designation, refrigerant in refrigerants.items():
        for name in (designation, *refrigerant.aliases):
            key = _normalise(name)
            other = index.setdefault(key, designation)
            if other != designation:
                raise ValueError(f"name {name!r} of {designation} also names {other}")
    return index
