"""Refrigerant flows over a period and the corporate scope-1 estimates built on them.

Pure: records in, numbers out; no I/O, no clock. Masses are integer nanograms until the very
end, so every total reconciles with the events to the nanogram; emission estimates that apply
percentage factors are exact ``Decimal`` kilograms.

Three published methods (GHG Protocol / US EPA Center for Corporate Climate Leadership, "Direct
Fugitive Emissions from Refrigeration, Air Conditioning, Fire Suppression, and Industrial
Gases", Nov 2014), each per refrigerant, then t CO2e = E (kg) x GWP / 1000:

* **material balance**: E = (inventory start - end) + (acquired - disbursed)
  + (full charge start - end);
* **simplified material balance**: E = (PN - CN) + PS + (CD - RD);
* **screening**: E = Cn x k + C x x x T + Cd x y x (1 - z), with the default factors of
  IPCC 2006 Guidelines Vol 3 Ch 7 Table 7.9 at the top of each range, as the EPA guidance does.

How the ledger's events feed the inputs (our conventions, documented in docs/reports.md):

* the ledger does not track cylinder stock, so the inventory change is taken as zero and
  refrigerant charged into equipment is taken as acquired in the year it was charged;
* a new unit (placed in service, or the new gas of a retrofit) counts its full charge as both
  the refrigerant bought to charge it (PN) and its nameplate charge (CN);
* additions on the day a unit was placed in service or retrofitted are part of its initial
  charge (the convention of ``ledger.domain.leak_rate``), not servicing;
* servicing (PS) = every other addition;
* retirements: a retired unit's full charge (CD) and what was recovered from it on its last day
  (RD: the retire event's mass plus recover events of the same day); a retrofit retires the old
  gas the same way;
* disbursed (material balance) = everything recovered (recover and retire events), whatever its
  destination.
"""

from __future__ import annotations

import enum
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from datetime import date, timedelta
from decimal import Context, Decimal, localcontext
from types import MappingProxyType

from ledger.domain.booking import Booking, book
from ledger.domain.records import (
    Application,
    Confidence,
    EquipmentForm,
    EventKind,
    System,
    SystemHistory,
)

NG_PER_KG = Decimal(10**12)
UNKNOWN_REFRIGERANT = "unknown"  # label for mass moved while no refrigerant is recorded
_EXACT = Context(prec=60)  # wide enough that sums of ng x percent x GWP products stay exact

MATERIAL_BALANCE = "material-balance"
SIMPLIFIED_MATERIAL_BALANCE = "simplified-material-balance"
SCREENING = "screening"
METHODS = (MATERIAL_BALANCE, SIMPLIFIED_MATERIAL_BALANCE, SCREENING)

GUIDANCE = (
    "GHG Protocol / US EPA Center for Corporate Climate Leadership, Direct Fugitive Emissions "
    "from Refrigeration, Air Conditioning, Fire Suppression, and Industrial Gases (Nov 2014)"
)
TABLE_7_9 = "IPCC 2006 Guidelines Vol 3 Ch 7 Table 7.9"


class ScreeningCategory(enum.StrEnum):
    """Equipment rows of IPCC 2006 Vol 3 Ch 7 Table 7.9 that our systems map to."""

    DOMESTIC = "domestic-refrigeration"  # household fridges and freezers
    STAND_ALONE = "stand-alone-commercial"  # plug-in cabinets, vending, small self-contained
    COMMERCIAL = "medium-large-commercial"  # supermarket racks, condensing units
    TRANSPORT = "transport-refrigeration"  # trucks, trailers, containers
    INDUSTRIAL = "industrial-refrigeration"  # incl. food processing and cold storage
    CHILLERS = "chillers"  # liquid chillers
    AIR_CONDITIONING = "residential-commercial-ac"  # incl. heat pumps


@dataclass(frozen=True, slots=True)
class ScreeningFactors:
    """Default factors of one Table 7.9 row, at the top of each published range (percent)."""

    category: ScreeningCategory
    label: str
    k_percent: Decimal  # installation emission, % of the initial charge
    x_percent: Decimal  # operating emission, % of the full charge per year
    y_percent: Decimal  # charge remaining at disposal, % of the full charge
    z_percent: Decimal  # recovery efficiency, % of the remaining charge
    source: str
    confidence: Confidence


def _factors(
    category: ScreeningCategory, label: str, k: str, x: str, y: str, z: str, confidence: Confidence
) -> ScreeningFactors:
    source = f"{TABLE_7_9}, top of each range (as US EPA 2014 uses)"
    if confidence is Confidence.MEMORY:
        source += "; values from memory, to be checked against the table"
    return ScreeningFactors(category, label, Decimal(k), Decimal(x), Decimal(y), Decimal(z), source,
                            confidence)


# The medium & large commercial row is the one the project's reference notes carry (k 3 %,
# x 35 %/yr, y 100 %, z 70 %, US EPA 2014); the other rows are recalled and marked as such.
SCREENING_FACTORS: Mapping[ScreeningCategory, ScreeningFactors] = MappingProxyType(
    {
        f.category: f
        for f in (
            _factors(ScreeningCategory.DOMESTIC, "Domestic refrigeration",
                     "1", "0.5", "80", "70", Confidence.MEMORY),
            _factors(ScreeningCategory.STAND_ALONE, "Stand-alone commercial applications",
                     "3", "15", "80", "70", Confidence.MEMORY),
            _factors(ScreeningCategory.COMMERCIAL, "Medium & large commercial refrigeration",
                     "3", "35", "100", "70", Confidence.SECONDARY),
            _factors(ScreeningCategory.TRANSPORT, "Transport refrigeration",
                     "1", "50", "50", "70", Confidence.MEMORY),
            _factors(ScreeningCategory.INDUSTRIAL,
                     "Industrial refrigeration incl. food processing and cold storage",
                     "3", "25", "100", "90", Confidence.MEMORY),
            _factors(ScreeningCategory.CHILLERS, "Chillers",
                     "1", "15", "100", "95", Confidence.MEMORY),
            _factors(ScreeningCategory.AIR_CONDITIONING,
                     "Residential and commercial A/C including heat pumps",
                     "1", "10", "80", "80", Confidence.MEMORY),
        )
    }
)


def screening_category(system: System) -> ScreeningCategory:
    """The Table 7.9 row a system is screened with (our mapping; see docs/reports.md).

    Args:
        system: the system's static facts (application class, equipment form, residential).
    Returns:
        Chillers by form first; then transport, industrial and comfort cooling by application;
        commercial and other refrigeration by form (self-contained: stand-alone, or domestic in
        a residential building; split: A/C; anything else: medium & large commercial).
    """
    form, app = system.equipment_form, system.application
    if form is EquipmentForm.CHILLER:
        return ScreeningCategory.CHILLERS
    if app is Application.TRANSPORT_REFRIGERATION:
        return ScreeningCategory.TRANSPORT
    if app is Application.INDUSTRIAL_PROCESS:
        return ScreeningCategory.INDUSTRIAL
    if app is Application.COMFORT_COOLING or form is EquipmentForm.SPLIT:
        return ScreeningCategory.AIR_CONDITIONING
    if form is EquipmentForm.SELF_CONTAINED:
        return ScreeningCategory.DOMESTIC if system.residential else ScreeningCategory.STAND_ALONE
    return ScreeningCategory.COMMERCIAL


# --- flows ------------------------------------------------------------------------------------


@dataclass(frozen=True, slots=True)
class Addition:
    """One addition of refrigerant with the refrigerant the system held that day."""

    event_id: int
    on: date
    refrigerant: str
    mass_ng: int
    initial: bool  # on the in-service or retrofit day: part of the initial charge


@dataclass(frozen=True, slots=True)
class Flow:
    """One system's movements of one refrigerant over a period (integer nanograms).

    A system has one flow per refrigerant it held in the period (two across a retrofit).
    """

    system_id: int
    refrigerant: str
    period_days: int
    charge_start_ng: int = 0  # full charge held at the start (0 if not in service)
    charge_end_ng: int = 0  # full charge held at the end (0 if retired or retrofitted away)
    last_charge_ng: int = 0  # full charge on the last day this gas was in the system
    added_ng: int = 0  # every addition
    initial_fill_ng: int = 0  # additions on the in-service / retrofit day (part of the charge)
    recovered_ng: int = 0  # recover events plus the mass recovered at retirement
    recovered_to: tuple[tuple[str, int], ...] = ()  # (destination, ng), by destination
    new_charge_ng: int = 0  # CN: full charge of units placed in service (or retrofitted to it)
    retired_charge_ng: int = 0  # CD: full charge of units retired (or retrofitted away)
    retired_recovered_ng: int = 0  # RD: recovered from those units on their last day
    charge_revised_ng: int = 0  # net change of the full charge by charge-revised events
    operating_ng_days: int = 0  # sum over days in service of that day's full charge
    in_service_days: int = 0
    pn_ng: int = 0  # PN: charged into new units (initial fill by cylinder weights, else CN)

    @property
    def service_added_ng(self) -> int:
        """Additions that were not part of an initial charge (PS: servicing, leaks)."""
        return self.added_ng - self.initial_fill_ng

    @property
    def net_loss_ng(self) -> int:
        """Material balance of this flow: start + charged in - recovered - end."""
        return (
            self.charge_start_ng + self.new_charge_ng + self.service_added_ng
            - self.recovered_ng - self.charge_end_ng
        )


@dataclass(slots=True)
class _FlowBuilder:
    system_id: int
    refrigerant: str
    period_days: int
    charge_start_ng: int = 0
    charge_end_ng: int = 0
    last_charge_ng: int = 0
    added_ng: int = 0
    initial_fill_ng: int = 0
    recovered_ng: int = 0
    recovered_to: dict[str, int] = field(default_factory=dict)
    new_charge_ng: int = 0
    retired_charge_ng: int = 0
    retired_recovered_ng: int = 0
    charge_revised_ng: int = 0
    operating_ng_days: int = 0
    in_service_days: int = 0
    pn_ng: int = 0

    def freeze(self) -> Flow:
        return Flow(
            system_id=self.system_id,
            refrigerant=self.refrigerant,
            period_days=self.period_days,
            charge_start_ng=self.charge_start_ng,
            charge_end_ng=self.charge_end_ng,
            last_charge_ng=self.last_charge_ng,
            added_ng=self.added_ng,
            initial_fill_ng=self.initial_fill_ng,
            recovered_ng=self.recovered_ng,
            recovered_to=tuple(sorted(self.recovered_to.items())),
            new_charge_ng=self.new_charge_ng,
            retired_charge_ng=self.retired_charge_ng,
            retired_recovered_ng=self.retired_recovered_ng,
            charge_revised_ng=self.charge_revised_ng,
            operating_ng_days=self.operating_ng_days,
            in_service_days=self.in_service_days,
            pn_ng=self.pn_ng,
        )


def additions(history: SystemHistory | Booking) -> tuple[Addition, ...]:
    """Every (effective) addition with the refrigerant the system held that day.

    The refrigerant and whether an addition is an initial fill come from the booking's state
    at the end of the day (the fold the rules read): an addition on an in-service or retrofit
    day is that day's initial fill into the refrigerant the system holds from that day, in
    whichever order the day's events were recorded.

    Args:
        history: one system's history (booked here) or its Booking.
    Returns:
        Additions in date order; ``initial`` marks those on an in-service or retrofit day.
    """
    booking = history if isinstance(history, Booking) else book(history)
    found: list[Addition] = []
    for e in booking.events:
        if e.kind is EventKind.ADD:
            state = booking.state(e.performed_on)
            found.append(
                Addition(e.id, e.performed_on, state.refrigerant or UNKNOWN_REFRIGERANT, e.mass_ng or 0,
                         e.performed_on in (state.refrigerant_since, state.in_service_on))
            )
    return tuple(found)


def period_flows(history: SystemHistory | Booking, start: date, end: date) -> tuple[Flow, ...]:
    """One system's refrigerant flows between two days (both included), from its booking.

    The state on entering the period and each addition's refrigerant and initial-fill mark
    are the booking's (the fold the rules read), as in `additions`.

    Args:
        history: the system and all its events (booked here), or its Booking.
        start: first day of the period.
        end: last day of the period.
    Returns:
        One Flow per refrigerant the system held (or moved) in the period, in the order they
        appeared; empty when the system was not in service in the period and nothing moved.
    Raises:
        ValueError: end before start.
    """
    if end < start:
        raise ValueError(f"period ends ({end}) before it starts ({start})")
    days = (end - start).days + 1
    booking = history if isinstance(history, Booking) else book(history)
    events = booking.events
    before = booking.state(start - timedelta(days=1)) if start > date.min else booking.state(start)
    in_service, refrigerant, charge = before.in_service, before.refrigerant, before.full_charge_ng
    flows: dict[str, _FlowBuilder] = {}

    def flow(name: str | None) -> _FlowBuilder:
        key = name or UNKNOWN_REFRIGERANT
        if key not in flows:
            flows[key] = _FlowBuilder(booking.system.id, key, days)
        return flows[key]

    since = start  # first day of the current stretch at constant charge and refrigerant

    def close(upto: date) -> None:
        """Credit the days [since, upto) in service at the current charge."""
        nonlocal since
        if in_service and upto > since:
            f = flow(refrigerant)
            n = (upto - since).days
            f.operating_ng_days += charge * n
            f.in_service_days += n
            f.last_charge_ng = charge
        since = upto

    if in_service:
        f = flow(refrigerant)
        f.charge_start_ng = f.last_charge_ng = charge
    # Recovered from a unit since its last addition: counted in RD when the unit is retired
    # or retrofitted later (the whole charge is often recovered a day or more before).
    recovered_since_add: dict[str, int] = {}
    # (day, full charge, replaced): a new unit's PN is its full charge until an initial fill
    # weighed out of a cylinder (before / after weights) is recorded on its in-service or
    # retrofit day; a fill typed as a mass may be a trim of a factory pre-charge.
    pending_pn: dict[str, tuple[date, int, bool]] = {}
    for e in events:
        if e.performed_on < start:
            continue
        if e.performed_on > end:
            break
        on = e.performed_on
        match e.kind:
            case EventKind.IN_SERVICE:
                close(on)
                in_service, refrigerant = True, e.refrigerant
                charge = e.charge_ng or 0
                f = flow(refrigerant)
                f.new_charge_ng += charge
                f.pn_ng += charge
                pending_pn[f.refrigerant] = (on, charge, False)
                f.last_charge_ng = charge
            case EventKind.RETROFIT:
                close(on)
                old = flow(refrigerant)
                old.retired_charge_ng += charge
                old.retired_recovered_ng += recovered_since_add.pop(old.refrigerant, 0)
                refrigerant = e.refrigerant  # as the booking's fold has it
                charge = e.charge_ng or charge
                new = flow(refrigerant)
                new.new_charge_ng += charge
                new.pn_ng += charge
                pending_pn[new.refrigerant] = (on, charge, False)
                new.last_charge_ng = charge
            case EventKind.CHARGE_REVISED:
                close(on)
                revised = e.charge_ng or charge
                flow(refrigerant).charge_revised_ng += revised - charge
                charge = revised
                flow(refrigerant).last_charge_ng = charge
            case EventKind.ADD:
                day = booking.state(on)
                f = flow(day.refrigerant)
                f.added_ng += e.mass_ng or 0
                recovered_since_add.pop(f.refrigerant, None)
                if on in (day.refrigerant_since, day.in_service_on):
                    f.initial_fill_ng += e.mass_ng or 0
                    pending = pending_pn.get(f.refrigerant)
                    weighed = e.cylinder_before_ng is not None and e.cylinder_after_ng is not None
                    if weighed and pending is not None and pending[0] == on:
                        if not pending[2]:
                            f.pn_ng -= pending[1]
                            pending_pn[f.refrigerant] = (on, pending[1], True)
                        f.pn_ng += e.mass_ng or 0
            case EventKind.RECOVER | EventKind.RETIRE:
                f = flow(refrigerant)
                mass = e.mass_ng or 0
                f.recovered_ng += mass
                if mass:
                    where = e.destination or "unknown"
                    f.recovered_to[where] = f.recovered_to.get(where, 0) + mass
                if e.kind is EventKind.RETIRE:
                    close(on)
                    f.retired_charge_ng += charge
                    f.retired_recovered_ng += recovered_since_add.pop(f.refrigerant, 0) + mass
                    f.last_charge_ng = charge
                    in_service = False
                else:
                    recovered_since_add[f.refrigerant] = recovered_since_add.get(f.refrigerant, 0) + mass
            case _:
                pass
    if in_service:
        close(end + timedelta(days=1))
        flow(refrigerant).charge_end_ng = charge
    return tuple(f.freeze() for f in flows.values())


# --- the three methods ------------------------------------------------------------------------


def kg(ng: int | Decimal) -> Decimal:
    """Exact kilograms of a nanogram figure."""
    with localcontext(_EXACT):
        return Decimal(ng) / NG_PER_KG


def co2e_t(mass_kg: Decimal, gwp: Decimal) -> Decimal:
    """Tonnes CO2e of a mass: kg x GWP / 1000, exactly."""
    with localcontext(_EXACT):
        return mass_kg * gwp / 1000


def material_balance_kg(
    *,
    inventory_start_kg: Decimal = Decimal(0),
    inventory_end_kg: Decimal = Decimal(0),
    acquired_kg: Decimal,
    disbursed_kg: Decimal,
    charge_start_kg: Decimal,
    charge_end_kg: Decimal,
) -> Decimal:
    """Material balance (US EPA 2014 guidance, section 2.3).

    E = (inventory start - inventory end) + (acquired - disbursed)
        + (total full charge at start - total full charge at end)
    """
    with localcontext(_EXACT):
        return (
            (inventory_start_kg - inventory_end_kg)
            + (acquired_kg - disbursed_kg)
            + (charge_start_kg - charge_end_kg)
        )


def simplified_material_balance_kg(
    *, pn_kg: Decimal, cn_kg: Decimal, ps_kg: Decimal, cd_kg: Decimal, rd_kg: Decimal
) -> Decimal:
    """Simplified material balance (US EPA 2014 guidance, section 2.4).

    E = (PN - CN) + PS + (CD - RD): PN bought to charge new units, CN their full charge, PS
    bought for servicing, CD full charge of retired units, RD recovered from them.
    """
    with localcontext(_EXACT):
        return (pn_kg - cn_kg) + ps_kg + (cd_kg - rd_kg)


def screening_kg(
    *, cn_kg: Decimal, c_t_kg: Decimal, cd_kg: Decimal, factors: ScreeningFactors
) -> Decimal:
    """Screening method (US EPA 2014 guidance, section 2.1.1; IPCC 2006 Vol 3 Ch 7 Table 7.9).

    E = Cn x k + C x x x T + Cd x y x (1 - z)

    Args:
        cn_kg: full charge of new units charged in the year.
        c_t_kg: full charge of operating units times the share of the year in use (C x T).
        cd_kg: full charge of units disposed of in the year.
        factors: k, x, y, z of the equipment's Table 7.9 row (percent).
    """
    with localcontext(_EXACT):
        h = Decimal(100)
        return (
            cn_kg * factors.k_percent / h
            + c_t_kg * factors.x_percent / h
            + cd_kg * factors.y_percent / h * (1 - factors.z_percent / h)
        )


@dataclass(frozen=True, slots=True)
class MethodPart:
    """One refrigerant (and, for screening, one equipment row) of a method's estimate."""

    refrigerant: str
    inputs_kg: tuple[tuple[str, Decimal], ...]  # (input name, kg), in formula order
    emissions_kg: Decimal
    gwp: Decimal
    co2e_t: Decimal
    category: str | None = None  # screening: the Table 7.9 row


@dataclass(frozen=True, slots=True)
class MethodResult:
    """A scope-1 estimate by one method: inputs and results per refrigerant, and totals."""

    method: str
    label: str
    formula: str
    source: str
    assumptions: tuple[str, ...]
    parts: tuple[MethodPart, ...]
    emissions_kg: Decimal  # scope 1 total: Kyoto-gas parts with a balance of 0 or more
    co2e_t: Decimal
    factors: tuple[ScreeningFactors, ...] = ()
    # HCFC/CFC parts: the GHG Protocol covers Kyoto gases only, so they are reported beside
    # scope 1, never in it.
    outside_scope1: tuple[MethodPart, ...] = ()
    flags: tuple[str, ...] = ()  # e.g. a negative balance, which is shown and not netted

    def inputs_kg(self) -> dict[str, Decimal]:
        """Each input summed over refrigerants (kg)."""
        totals: dict[str, Decimal] = {}
        with localcontext(_EXACT):
            for part in self.parts:
                for name, value in part.inputs_kg:
                    totals[name] = totals.get(name, Decimal(0)) + value
        return totals


ASSUMPTIONS_COMMON = (
    "inputs derive from the ledger's events; the ledger does not track cylinder stock",
    "additions on a unit's in-service or retrofit day are part of its initial charge",
)


def _result(
    method: str, label: str, formula: str, source: str, assumptions: Sequence[str],
    parts: Sequence[MethodPart], factors: Sequence[ScreeningFactors] = (),
    ods: frozenset[str] = frozenset(),
) -> MethodResult:
    kyoto = [p for p in parts if p.refrigerant not in ods]
    outside = tuple(p for p in parts if p.refrigerant in ods)
    flags = [f"{label}: {p.refrigerant}{'' if p.category is None else f' ({p.category})'}: negative balance "
             f"{p.emissions_kg.normalize():f} kg; not netted against the other refrigerants "
             "(check for missing additions or recoveries counted twice)"
             for p in kyoto if p.emissions_kg < 0]
    flags += [f"{label}: {p.refrigerant}: ozone-depleting (HCFC/CFC), reported outside scope 1: "
              f"{p.emissions_kg.normalize():f} kg" for p in outside]
    counted = [p for p in kyoto if p.emissions_kg >= 0]
    with localcontext(_EXACT):
        emissions = sum((p.emissions_kg for p in counted), Decimal(0))
        tonnes = sum((p.co2e_t for p in counted), Decimal(0))
    return MethodResult(method, label, formula, source, tuple(assumptions), tuple(kyoto), emissions,
                        tonnes, tuple(factors), outside, tuple(flags))


def _by_refrigerant(flows: Iterable[Flow]) -> dict[str, list[Flow]]:
    grouped: dict[str, list[Flow]] = {}
    for f in flows:
        grouped.setdefault(f.refrigerant, []).append(f)
    return grouped


def material_balance(flows: Iterable[Flow], gwp: Mapping[str, Decimal],
                     ods: frozenset[str] = frozenset()) -> MethodResult:
    """Material-balance estimate over flows, per refrigerant.

    Args:
        flows: period flows (any systems).
        gwp: refrigerant designation -> GWP under the chosen basis.
    """
    parts = []
    for name, group in _by_refrigerant(flows).items():
        acquired = kg(sum(f.new_charge_ng + f.service_added_ng for f in group))
        disbursed = kg(sum(f.recovered_ng for f in group))
        start = kg(sum(f.charge_start_ng for f in group))
        end = kg(sum(f.charge_end_ng for f in group))
        e = material_balance_kg(acquired_kg=acquired, disbursed_kg=disbursed, charge_start_kg=start,
                                charge_end_kg=end)
        inputs = (("inventory_change_kg", Decimal(0)), ("acquired_kg", acquired),
                  ("disbursed_kg", disbursed), ("charge_start_kg", start), ("charge_end_kg", end))
        parts.append(MethodPart(name, inputs, e, gwp.get(name, Decimal(0)),
                                co2e_t(e, gwp.get(name, Decimal(0)))))
    return _result(
        MATERIAL_BALANCE,
        "Material balance",
        "E = (inventory start - end) + (acquired - disbursed) + (full charge start - end)",
        f"{GUIDANCE}, section 2.3",
        ASSUMPTIONS_COMMON + (
            "inventory change taken as 0: refrigerant is taken as acquired when it is charged "
            "(new units' full charge and servicing additions)",
            "disbursed = all refrigerant recovered (recover and retire events), any destination",
            "a revision of a full charge moves the balance by the revision",
        ),
        parts,
        ods=ods,
    )


def simplified_material_balance(flows: Iterable[Flow], gwp: Mapping[str, Decimal],
                                ods: frozenset[str] = frozenset()) -> MethodResult:
    """Simplified material-balance estimate over flows, per refrigerant."""
    parts = []
    for name, group in _by_refrigerant(flows).items():
        cn = kg(sum(f.new_charge_ng for f in group))
        pn = kg(sum(f.pn_ng for f in group))
        ps = kg(sum(f.service_added_ng for f in group))
        cd = kg(sum(f.retired_charge_ng for f in group))
        rd = kg(sum(f.retired_recovered_ng for f in group))
        e = simplified_material_balance_kg(pn_kg=pn, cn_kg=cn, ps_kg=ps, cd_kg=cd, rd_kg=rd)
        inputs = (("pn_kg", pn), ("cn_kg", cn), ("ps_kg", ps), ("cd_kg", cd), ("rd_kg", rd))
        parts.append(MethodPart(name, inputs, e, gwp.get(name, Decimal(0)),
                                co2e_t(e, gwp.get(name, Decimal(0)))))
    return _result(
        SIMPLIFIED_MATERIAL_BALANCE,
        "Simplified material balance",
        "E = (PN - CN) + PS + (CD - RD)",
        f"{GUIDANCE}, section 2.4",
        ASSUMPTIONS_COMMON + (
            "PN (bought to charge new units) = the initial fill weighed out of cylinders on the "
            "in-service or retrofit day, else CN (their full charge); a retrofit "
            "charges new units of the new gas and retires the old gas",
            "PS = additions other than initial charges",
            "RD = recovered from a unit since its last addition, up to the day it was retired "
            "or retrofitted (the charge is often recovered a day or more before)",
            "recovery from units that stay in service is not an input of this method",
        ),
        parts,
        ods=ods,
    )


def screening(
    flows: Iterable[Flow], gwp: Mapping[str, Decimal], categories: Mapping[int, ScreeningCategory],
    ods: frozenset[str] = frozenset(),
) -> MethodResult:
    """Screening estimate with Table 7.9 factors, per refrigerant and equipment row.

    Args:
        flows: period flows (any systems).
        gwp: refrigerant designation -> GWP.
        categories: system id -> its Table 7.9 row (``screening_category``).
    """
    grouped: dict[tuple[str, ScreeningCategory], list[Flow]] = {}
    for f in flows:
        grouped.setdefault((f.refrigerant, categories[f.system_id]), []).append(f)
    parts = []
    used: dict[ScreeningCategory, ScreeningFactors] = {}
    for (name, category), group in grouped.items():
        factors = SCREENING_FACTORS[category]
        used[category] = factors
        cn = kg(sum(f.new_charge_ng for f in group))
        with localcontext(_EXACT):
            c_t = sum((kg(f.operating_ng_days) / f.period_days for f in group), Decimal(0))
        cd = kg(sum(f.retired_charge_ng for f in group))
        e = screening_kg(cn_kg=cn, c_t_kg=c_t, cd_kg=cd, factors=factors)
        inputs = (("cn_kg", cn), ("c_t_kg", c_t), ("cd_kg", cd))
        parts.append(MethodPart(name, inputs, e, gwp.get(name, Decimal(0)),
                                co2e_t(e, gwp.get(name, Decimal(0))), category.value))
    return _result(
        SCREENING,
        "Screening",
        "E = Cn x k + C x x x T + Cd x y x (1 - z)",
        f"{GUIDANCE}, section 2.1.1; default factors {TABLE_7_9}",
        ASSUMPTIONS_COMMON + (
            "C x T = full charge x days in service / days in the period, summed over units",
            "factors at the top of each Table 7.9 range, as US EPA 2014 does",
            "equipment row chosen from the system's application and form (docs/reports.md)",
        ),
        parts,
        [used[c] for c in sorted(used, key=lambda c: c.value)],
        ods=ods,
    )


def scope1(
    flows: Sequence[Flow], gwp: Mapping[str, Decimal], categories: Mapping[int, ScreeningCategory],
    ods: frozenset[str] = frozenset(),
) -> tuple[MethodResult, MethodResult, MethodResult]:
    """All three estimates over the same flows (material balance, simplified, screening).

    Args:
        ods: refrigerants holding an HCFC or CFC; their estimates are reported outside scope 1
            (GHG Protocol: Kyoto gases only).
    """
    return (
        material_balance(flows, gwp, ods),
        simplified_material_balance(flows, gwp, ods),
        screening(flows, gwp, categories, ods),
    )


def recommended_method(flows: Sequence[Flow]) -> tuple[str, str]:
    """Which method suits the data the ledger holds, and why (US EPA 2014 guidance, ch. 2).

    The material balance needs the change of refrigerant held in stock (cylinders), which the
    ledger does not track; the simplified material balance needs what was charged into new
    units, added in service and recovered from retired units, which the ledger records; the
    screening method is for when such records are missing.
    """
    recorded = any(f.added_ng or f.recovered_ng or f.new_charge_ng or f.retired_charge_ng
                   for f in flows)
    if recorded:
        return (SIMPLIFIED_MATERIAL_BALANCE,
                "the ledger records every charge of new units, each top-up and the recovery from "
                "retired or retrofitted units, but not the stock of refrigerant in cylinders, "
                "which the material balance needs: the simplified material balance (US EPA 2014, "
                "section 2.4) uses exactly the records held")
    return (SCREENING,
            "no charges, top-ups or recoveries are recorded in the period: only the screening "
            "method (US EPA 2014, section 2.1.1) can estimate emissions, from full charges and "
            "default factors")
