"""Regime ``eu``: Regulation (EU) 2024/573 on fluorinated greenhouse gases (EU member states).

Implements, for each system (see docs/rules/eu.md for sources, marks and what is left out):

* Art 5 periodic leak checks (thresholds and exemptions in Art 5(1), intervals in a later
  paragraph of Art 5 whose number was not read). Two tests, the shorter interval wins: the
  Annex I part of the charge in t CO2e (5 / 50 / 500 t -> every 12 / 6 / 3 months) and the
  Annex II section 1 part (unsaturated HFCs/HCFOs) in kg (1 / 10 / 100 kg -> 12 / 6 / 3
  months, secondary source). A
  fitted leak detection system doubles the interval. Hermetically sealed equipment is exempt
  under 10 t CO2e (Annex I) or 2 kg (Annex II s.1); in residential buildings under 3 kg.
* Art 6 leak detection system where the charge is >= 500 t CO2e or >= 100 kg Annex II s.1,
  and its own check every 12 months (from memory, carried over from 517/2014).
* Art 4(5) repair of a found leak (the law says "without undue delay"; we show 14 days as a
  site-policy deadline) and, for equipment that must be leak-checked under Art 5(1), a
  follow-up check at least 24 h after and within one month of each repair.

The regulation applies from 11 March 2024; duties falling due earlier are left to the law of
that time (Reg. (EU) 517/2014). Each constant's basis names the source it was read from and
how sure we are of it.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import replace
from datetime import date, timedelta
from decimal import Context, Decimal, localcontext
from functools import lru_cache, partial

from ledger.domain.records import (
    Basis,
    Confidence,
    Finding,
    Obligation,
    System,
    SystemHistory,
    SystemState,
    Tier,
)
from ledger.domain.state import EMPTY_STATE, state_of
from ledger.rules.common import (
    BELOW_THRESHOLD,
    EXEMPT,
    OUT_OF_SCOPE,
    UNKNOWN_REFRIGERANT,
    Assessment,
    Cadence,
    Constant,
    DetectionRule,
    ReferenceLike,
    events_until,
    fmt_kg,
    fmt_t,
    history_findings,
    kg_of,
    obligation_sort_key,
    periodic_check_obligations,
    resolve,
    tier_for_state,
)

REGIME = "eu"
REGIME_VERSION = "eu-2"  # bump when a rule or constant here changes
TITLE = "Regulation (EU) 2024/573 on fluorinated greenhouse gases"
GWP_BASIS = "eu"

# Where the regime applies, and how a site under it is shown (`ledger.rules.site_profile`).
# ISO 3166-1 alpha-2 codes of the 27 EU member states; "EL" is the EU's own code for Greece.
COUNTRIES: frozenset[str] = frozenset({
    "AT", "BE", "BG", "HR", "CY", "CZ", "DK", "EE", "FI", "FR", "DE", "GR", "EL", "HU", "IE",
    "IT", "LV", "LT", "LU", "MT", "NL", "PL", "PT", "RO", "SK", "SI", "ES", "SE",
})
# Northern Ireland: the EU F-gas Regulation applies under the Windsor Framework (from memory).
SUBDIVISIONS: frozenset[str] = frozenset({"GB-NIR"})
MASS_UNIT = "kg"
LEAK_RATES = False  # no leak-rate test: periodic checks by band
RECORD_TITLE = "EU 517/2014 Art 6"
# EU 517/2014 Art 6 record items (kept by Reg. (EU) 2024/573 Art 7) and where a logbook shows
# each; the PDF and the spreadsheet print this table, and tests check each mapping.
RECORD_ITEMS: tuple[tuple[str, str, str], ...] = (
    ("(a)", "quantity and type of fluorinated gas installed",
     "system sheet: refrigerant, composition, full charge; events 'placed in service' and "
     "'retrofit': refrigerant, full charge (kg)"),
    ("(b)", "quantities added during installation, maintenance or servicing or due to leakage",
     "events 'refrigerant added': quantity (kg), added for (installation / servicing / leak)"),
    ("(c)", "whether recycled or reclaimed gas was used, with the facility and its certificate",
     "events: 'recycled or reclaimed gas' column, cylinder and cylinder kind; the recycling, "
     "reclamation or destruction facility (name, address) and its certificate number on additions "
     "and recoveries (--facility, --facility-certificate)"),
    ("(d)", "quantity of gas recovered",
     "events 'refrigerant recovered' and 'taken out of service': quantity (kg), recovered gas to"),
    ("(e)", "identity of the undertaking that installed, serviced, checked or decommissioned, "
     "with its certificate number",
     "events: technician, company, company certificate, certificate (scheme, number) and a "
     "warning where none was valid for the work; system sheet: the companies' certificates"),
    ("(f)", "dates and results of the checks",
     "events 'leak check', 'follow-up check', 'detection system check': date, result, location, "
     "check method"),
    ("(g)", "recovery and disposal measures at final decommissioning",
     "event 'taken out of service': date, quantity (kg), recovered gas to, note"),
)

_REG = "Reg. (EU) 2024/573"

B_APPLIES = Basis(f"{_REG} (date of application)", Confidence.SECONDARY,
                  "applies from 11 March 2024 and repeals Reg. (EU) 517/2014")
B_SCOPE = Basis(f"{_REG} Art 5(1)", Confidence.CHECKED,
                "leak checks cover Annex I gases from 5 t CO2e and Annex II section 1 gases "
                "from 1 kg; other substances are outside this regulation's leak-check duty")
B_TIERS = Basis(f"{_REG} Art 5", Confidence.SECONDARY,
                "CO2e tiers, intervals and their doubling with a leak detection system from the "
                "German Environment Agency FAQ and trade guidance; thresholds are in Art 5(1), "
                "the intervals in a later paragraph of Art 5 whose number was not read")
B_ANNEX_II = Basis(f"{_REG} Art 5", Confidence.SECONDARY,
                   "Annex II section 1: \"ab 1 kg alle 12 Monate … ab 10 kg alle 6 … ab 100 kg "
                   "alle 3\", doubled with a leak detection system (bfs-kaelte-klima.de)")
B_HERMETIC = Basis(f"{_REG} Art 5(1)", Confidence.CHECKED,
                   "hermetically sealed and labelled equipment")
B_RESIDENTIAL = Basis(f"{_REG} Art 5(1)", Confidence.CHECKED,
                      "hermetically sealed equipment in residential buildings under 3 kg; applied "
                      "to the fluorinated part of the charge (our reading)")
B_DETECTION = Basis(f"{_REG} Art 6", Confidence.SECONDARY,
                    "leak detection system from 500 t CO2e or 100 kg Annex II section 1 "
                    "(secondary source); transitional dates not checked")
B_DETECTION_CHECK = Basis(f"{_REG} Art 6", Confidence.MEMORY,
                          "12-month check of the detection system carried over from "
                          "Reg. (EU) 517/2014 Art 5(3); not yet checked in 2024/573")
B_REPAIR = Basis(f"{_REG} Art 4(5)", Confidence.POLICY,
                 "the law says 'without undue delay'; the 14 days shown are a site-policy "
                 "deadline, not a legal one")
B_FOLLOW_UP = Basis(f"{_REG} Art 4(5)", Confidence.CHECKED,
                    "for equipment that must be leak-checked under Art 5(1): \"frühestens nach "
                    "Ablauf einer Betriebszeit von 24 Stunden, spätestens jedoch innerhalb eines "
                    "Monats nach der Reparatur\" (German text quoted by Landesinnung Kälte-Klima)")

APPLIES_FROM = date(2024, 3, 11)  # earlier windows belong to 517/2014 (regime gb's text)

# (lower bound, interval in months, band). Checked from the top: the first bound met wins.
CO2E_BANDS: tuple[tuple[Decimal, int, str], ...] = (
    (Decimal(500), 3, "≥ 500 t CO2e"),
    (Decimal(50), 6, "50–500 t CO2e"),
    (Decimal(5), 12, "5–50 t CO2e"),
)
ANNEX_II_BANDS: tuple[tuple[Decimal, int, str], ...] = (
    (Decimal(100), 3, "≥ 100 kg Annex II s.1"),
    (Decimal(10), 6, "10–100 kg Annex II s.1"),
    (Decimal(1), 12, "1–10 kg Annex II s.1"),
)
DETECTION_FACTOR = 2  # a fitted leak detection system doubles each interval
HERMETIC_CO2E_T = Decimal(10)  # hermetically sealed: exempt below this (Annex I part)
HERMETIC_ANNEX_II_KG = Decimal(2)  # hermetically sealed: exempt below this (Annex II s.1)
RESIDENTIAL_HERMETIC_KG = Decimal(3)  # hermetically sealed, residential building
DETECTION_CO2E_T = Decimal(500)
DETECTION_ANNEX_II_KG = Decimal(100)
DETECTION_CHECK_MONTHS = 12
REPAIR_DAYS = 14  # site policy standing in for "without undue delay"
REPAIR_RULE = "'without undue delay': 14-day site-policy deadline, not a legal one"
FOLLOW_UP_EARLIEST_DAYS = 1  # at least 24 h of operation after the repair
FOLLOW_UP_MONTHS = 1

DETECTION = DetectionRule(B_DETECTION, APPLIES_FROM, DETECTION_CHECK_MONTHS, B_DETECTION_CHECK)

CONSTANTS: tuple[Constant, ...] = (
    Constant("date of application", APPLIES_FROM, "date", B_APPLIES),
    Constant("leak-check threshold, Annex I part", Decimal(5), "t CO2e", B_SCOPE),
    Constant("leak-check threshold, Annex II section 1 part", Decimal(1), "kg", B_SCOPE),
    *(Constant(f"interval {band}", months, "months", B_TIERS) for _, months, band in CO2E_BANDS),
    *(Constant(f"interval {band}", months, "months", B_ANNEX_II)
      for _, months, band in ANNEX_II_BANDS),
    Constant("interval factor with a leak detection system", DETECTION_FACTOR, "x", B_TIERS),
    Constant("hermetically sealed exemption, Annex I part, below", HERMETIC_CO2E_T, "t CO2e",
             B_HERMETIC),
    Constant("hermetically sealed exemption, Annex II section 1 part, below",
             HERMETIC_ANNEX_II_KG, "kg", B_HERMETIC),
    Constant("hermetically sealed in a residential building, exempt below",
             RESIDENTIAL_HERMETIC_KG, "kg", B_RESIDENTIAL),
    Constant("leak detection system required from, Annex I part", DETECTION_CO2E_T, "t CO2e",
             B_DETECTION),
    Constant("leak detection system required from, Annex II section 1 part",
             DETECTION_ANNEX_II_KG, "kg", B_DETECTION),
    Constant("leak detection system checked every", DETECTION_CHECK_MONTHS, "months",
             B_DETECTION_CHECK),
    Constant("repair deadline after a leak is found (site policy)", REPAIR_DAYS, "days",
             B_REPAIR),
    Constant("follow-up check not before", FOLLOW_UP_EARLIEST_DAYS, "days after the repair",
             B_FOLLOW_UP),
    Constant("follow-up check within", FOLLOW_UP_MONTHS, "months after the repair", B_FOLLOW_UP),
)

_EXACT = Context(prec=60)


def annex_i_co2e_t(reference: ReferenceLike, designation: str, charge_ng: int) -> Decimal:
    """Tonnes CO2e of the Annex I gases in a charge, exactly.

    Art 5(1) counts "fluorinated greenhouse gases listed in Annex I" in CO2e, so for a
    mixture only its Annex I components count: charge kg x sum(mass fraction x GWP) / 1000
    over those components (GWP on the regulation's own basis). For a pure Annex I gas this
    is charge kg x GWP / 1000.

    Args:
        reference: the refrigerant tables.
        designation: a designation the reference knows.
        charge_ng: the full charge.
    """
    with localcontext(_EXACT):
        per_kg = Decimal(0)
        for name, percent in reference.lookup(designation).components:
            component = reference.components[name]
            gwp = component.gwp.get(GWP_BASIS)
            if component.eu_annex == "I" and gwp is not None:
                per_kg += Decimal(percent) / 100 * Decimal(gwp)
        return kg_of(charge_ng) * per_kg / 1000


def _band(value: Decimal, bands: Sequence[tuple[Decimal, int, str]]) -> tuple[int, str] | None:
    for bound, months, band in bands:
        if value >= bound:
            return months, band
    return None


def assess(reference: ReferenceLike, system: System, state: SystemState, day: date) -> Assessment:
    """The leak-check band of an in-service system on a day (memoised ``_assess``).

    The verdict depends only on the refrigerant, full charge, detection system, the sealed
    and residential flags and whether Annex II gases count yet, so an estate's thousands of
    (system, day) questions reduce to a few distinct answers.
    """
    return _assess_memo(reference, state.refrigerant, state.full_charge_ng, state.detection_system,
                        system.hermetic, system.residential, day >= APPLIES_FROM)


@lru_cache(maxsize=1 << 16)
def _assess_memo(reference: ReferenceLike, refrigerant: str | None, charge_ng: int, detection: bool,
                 hermetic: bool, residential: bool, counts_ii: bool) -> Assessment:
    system = System(id=0, site_code="", tag="", hermetic=hermetic, residential=residential)
    state = replace(EMPTY_STATE, in_service=True, refrigerant=refrigerant, full_charge_ng=charge_ng,
                    detection_system=detection)
    return _assess(reference, system, state, APPLIES_FROM if counts_ii else APPLIES_FROM - timedelta(days=1))


def _assess(reference: ReferenceLike, system: System, state: SystemState, day: date) -> Assessment:
    """The leak-check band of an in-service system on a day, Art 5(1) and Art 6.

    Args:
        reference: the refrigerant tables.
        system: the system's static facts (hermetic, residential).
        state: its state on ``day``.
        day: the day; Annex II section 1 gases count only from the date of application.
    Returns:
        The band, the cadence of its leak checks (None where none apply) and the
        detection-system verdict.
    """
    designation = resolve(reference, state.refrigerant)
    if designation is None:
        return Assessment(UNKNOWN_REFRIGERANT,
                          f"refrigerant {state.refrigerant!r} is not in the reference data",
                          B_SCOPE, None, in_scope=False)
    part_i = reference.mass_fraction_where(designation, "I")
    part_ii = reference.mass_fraction_where(designation, "II-1")
    if part_i == 0 and part_ii == 0:
        if reference.mass_fraction_where(designation, "ods") > 0:
            why = (f"{designation} is an ozone-depleting substance, governed by the EU ozone "
                   "rules rather than this regulation: out of scope")
        else:
            why = f"{designation} is not a fluorinated gas: out of scope"
        return Assessment(OUT_OF_SCOPE, why, B_SCOPE, None, in_scope=False)

    counts_ii = day >= APPLIES_FROM
    charge_kg = kg_of(state.full_charge_ng)
    tonnes = annex_i_co2e_t(reference, designation, state.full_charge_ng)
    kg_ii = charge_kg * part_ii
    figures = []
    if part_i > 0:
        figures.append(f"{fmt_t(tonnes)} of Annex I gases")
    if part_ii > 0:
        figures.append(f"{fmt_kg(kg_ii)} of Annex II section 1 gases"
                       + ("" if counts_ii else " (not counted before 11 March 2024)"))
    said = f"{designation}, {fmt_kg(charge_kg)} charge: " + " and ".join(figures)
    duty = {"repair_days": REPAIR_DAYS, "repair_basis": B_REPAIR, "repair_rule": REPAIR_RULE,
            "follow_up_basis": B_FOLLOW_UP}

    fluorinated_kg = charge_kg * (part_i + part_ii)
    if system.hermetic and system.residential and fluorinated_kg < RESIDENTIAL_HERMETIC_KG:
        return Assessment(EXEMPT, f"{said}; hermetically sealed in a residential building, "
                          "under 3 kg: no periodic leak check", B_RESIDENTIAL, None, **duty)

    candidates: list[tuple[int, str, Basis]] = []
    sealed_off = False
    if part_i > 0:
        hit = _band(tonnes, CO2E_BANDS)
        if hit and system.hermetic and tonnes < HERMETIC_CO2E_T:
            sealed_off = True
        elif hit:
            candidates.append((hit[0], hit[1], B_TIERS))
    if part_ii > 0 and counts_ii:
        hit = _band(kg_ii, ANNEX_II_BANDS)
        if hit and system.hermetic and kg_ii < HERMETIC_ANNEX_II_KG:
            sealed_off = True
        elif hit:
            candidates.append((hit[0], hit[1], B_ANNEX_II))
    detection_required = (tonnes >= DETECTION_CO2E_T
                          or (counts_ii and kg_ii >= DETECTION_ANNEX_II_KG))

    if not candidates:
        if sealed_off:
            return Assessment(EXEMPT, f"{said}; hermetically sealed and labelled, under "
                              "10 t CO2e / 2 kg: no periodic leak check", B_HERMETIC, None, **duty)
        return Assessment(BELOW_THRESHOLD, f"{said}; under 5 t CO2e and 1 kg: no periodic leak "
                          "check", B_SCOPE, None, **duty)

    months, band, basis = min(candidates, key=lambda c: c[0])  # ties keep the Annex I test
    note = ""
    if state.detection_system:
        months *= DETECTION_FACTOR
        note = ", leak detection system fitted: interval doubled"
    reason = said
    if len(candidates) == 2:
        reason += "; both tests apply, the shorter interval wins"
    if detection_required:
        reason += "; a leak detection system is required (Art 6)"
    cadence = Cadence(f"{months}-month leak check ({band}{note})", basis, months=months)
    return Assessment(band, reason, basis, cadence, detection_required=detection_required, **duty)


def tier_of(history: SystemHistory, reference: ReferenceLike, as_of: date) -> Tier:
    """The system's leak-check band on ``as_of`` under Reg. (EU) 2024/573 Art 5(1).

    Args:
        history: the system and its events.
        reference: the refrigerant tables.
        as_of: the day.
    Returns:
        The band, its interval in months (None where no periodic check applies), the basis
        and a sentence with the figures.
    """
    state = state_of(events_until(history, as_of), as_of)
    idle = tier_for_state(REGIME, state, B_SCOPE)
    if idle is not None:
        return idle
    a = assess(reference, history.system, state, as_of)
    return Tier(REGIME, a.band, None if a.cadence is None else a.cadence.months, a.basis, a.reason)


def compute_obligations(
    histories: Sequence[SystemHistory], reference: ReferenceLike, as_of: date
) -> tuple[list[Obligation], list[Finding]]:
    """Leak checks, repairs, follow-up checks and detection-system duties, Reg. (EU) 2024/573.

    Art 4(5), Art 5(1) and Art 6; see the module docstring and docs/rules/eu.md.

    Args:
        histories: systems (of one or several sites) with their events.
        reference: the refrigerant tables.
        as_of: the day of evaluation; later events are ignored.
    Returns:
        (obligations earliest due first, findings about the data).
    """
    obligations: list[Obligation] = []
    findings: list[Finding] = []
    for history in histories:
        findings.extend(history_findings(history, reference, as_of))
        obligations.extend(periodic_check_obligations(
            history, as_of, regime=REGIME,
            assess=partial(assess, reference, history.system),
            emit_from=APPLIES_FROM, extra_change_dates=(APPLIES_FROM,),
            follow_up_earliest_days=FOLLOW_UP_EARLIEST_DAYS, detection=DETECTION,
        ))
    obligations.sort(key=obligation_sort_key)
    return obligations, findings

