"""Regime ``gb``: Great Britain, Reg. (EU) 517/2014 as retained, plus the GB HCFC leak checks.

Implements, for each system (see docs/rules/gb.md for sources, marks and what is left out):

* 517/2014 Art 4(1), 4(3): equipment holding fluorinated greenhouse gases (Annex I gases or
  mixtures containing them) of 5 t CO2e or more is checked every 12 months, from 50 t every 6,
  from 500 t every 3; a leak detection system doubles each interval. CO2e = charge kg x the
  mixture's GWP (Annex IV method: all components counted) / 1000. Hermetically sealed and
  labelled equipment under 10 t CO2e is exempt (Art 4(1), second subparagraph).
* Art 5: a leak detection system from 500 t CO2e, checked every 12 months.
* Art 3(3): repair without undue delay (14 days shown, site policy) and, for equipment that
  must be leak-checked, a check within one month after the repair (an immediate re-check
  counts).
* Ozone-depleting (HCFC/CFC) equipment, by kg of the ozone-depleting part: from 3 kg (6 kg if
  hermetically sealed) every 12 months, from 30 kg every 6, from 300 kg every 3; repair within
  14 days; re-test within one month (gov.uk guidance; Reg. (EC) 1005/2009 Art 23(2) as
  retained). A mixture tested both ways takes the shorter interval.

517/2014 applied from 1 January 2015; duties falling due earlier are not listed.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import replace
from datetime import date
from decimal import Decimal
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
from ledger.rules import eu
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

REGIME = "gb"
REGIME_VERSION = "gb-2"  # bump when a rule or constant here changes
TITLE = "Great Britain: F-gas Regulation (EU) 517/2014 as retained, and HCFC leak checks"
GWP_BASIS = "gb"  # Reg. (EU) 517/2014 values as retained (docs/refrigerants.md)

# Where the regime applies, and how a site under it is shown (`ledger.rules.site_profile`).
COUNTRIES: frozenset[str] = frozenset({"GB"})
EXCEPT_SUBDIVISIONS: frozenset[str] = frozenset({"GB-NIR"})  # Northern Ireland: regime eu
MASS_UNIT = "kg"
LEAK_RATES = False
RECORD_TITLE = eu.RECORD_TITLE  # 517/2014 Art 6 itself, as retained
RECORD_ITEMS = eu.RECORD_ITEMS

_FGAS = "Reg. (EU) 517/2014 as retained in GB"
_ODS = "Reg. (EC) 1005/2009 Art 23(2) as retained in GB (gov.uk ODS leak-check guidance)"

B_APPLIES = Basis(f"{_FGAS} Art 27", Confidence.SECONDARY,
                  "applies from 1 January 2015 (IHK Rostock: \"Seit dem 01.01.2015 gilt die "
                  "Verordnung (EU) Nr. 517/2014\")")
B_SCOPE = Basis(f"{_FGAS} Art 4(1)", Confidence.CHECKED,
                "fluorinated greenhouse gases of Annex I, or mixtures containing them, from "
                "5 t CO2e")
B_TIERS = Basis(f"{_FGAS} Art 4(3)", Confidence.CHECKED,
                "5 / 50 / 500 t CO2e: every 12 / 6 / 3 months, 24 / 12 / 6 with a leak "
                "detection system")
B_HERMETIC = Basis(f"{_FGAS} Art 4(1)", Confidence.CHECKED,
                   "hermetically sealed and labelled equipment under 10 t CO2e (gov.uk); the "
                   "exemption is the second subparagraph of Art 4(1), Art 4(2) being the "
                   "equipment list (inferred from Art 5(1)'s wording)")
B_DETECTION = Basis(f"{_FGAS} Art 5(1)", Confidence.CHECKED, "from 500 t CO2e")
B_DETECTION_CHECK = Basis(f"{_FGAS} Art 5(3)", Confidence.CHECKED,
                          "\"mindestens einmal alle 12 Monate kontrolliert\" (gesetze.legal)")
B_REPAIR = Basis(f"{_FGAS} Art 3(3)", Confidence.POLICY,
                 "the law says 'without undue delay'; the 14 days shown are a site-policy "
                 "deadline, not a legal one")
B_FOLLOW_UP = Basis(f"{_FGAS} Art 3(3)", Confidence.CHECKED,
                    "where the equipment must be leak-checked: \"en el plazo de un mes tras la "
                    "reparación\" (517/2014 Art 3(3), Spanish text)")
B_ODS_TIERS = Basis(_ODS, Confidence.CHECKED,
                    "HCFC/CFC equipment: 3 kg (6 kg hermetically sealed) / 30 kg / 300 kg: every "
                    "12 / 6 / 3 months (gov.uk: \"12 months if … 3kg or more … 6 months … 30kg "
                    "… 3 months … 300kg\")")
B_ODS_REPAIR = Basis(_ODS, Confidence.CHECKED, "\"repair it within 14 days\" (gov.uk)")
B_ODS_FOLLOW_UP = Basis(_ODS, Confidence.CHECKED,
                        "\"repeat the test within one month\" (gov.uk)")

APPLIES_FROM = date(2015, 1, 1)

CO2E_BANDS: tuple[tuple[Decimal, int, str], ...] = (
    (Decimal(500), 3, "≥ 500 t CO2e"),
    (Decimal(50), 6, "50–500 t CO2e"),
    (Decimal(5), 12, "5–50 t CO2e"),
)
ODS_BANDS: tuple[tuple[Decimal, int, str], ...] = (
    (Decimal(300), 3, "≥ 300 kg HCFC/CFC"),
    (Decimal(30), 6, "30–300 kg HCFC/CFC"),
    (Decimal(3), 12, "3–30 kg HCFC/CFC"),
)
ODS_HERMETIC_KG = Decimal(6)  # hermetically sealed HCFC/CFC equipment: checked from 6 kg
DETECTION_FACTOR = 2
HERMETIC_CO2E_T = Decimal(10)
DETECTION_CO2E_T = Decimal(500)
DETECTION_CHECK_MONTHS = 12
REPAIR_DAYS = 14  # F-gas: site policy for "without undue delay"; HCFC: the guidance's 14 days
REPAIR_RULE = "'without undue delay': 14-day site-policy deadline, not a legal one"
FOLLOW_UP_EARLIEST_DAYS = 0  # 517/2014 accepts a re-check straight after the repair
FOLLOW_UP_MONTHS = 1

DETECTION = DetectionRule(B_DETECTION, APPLIES_FROM, DETECTION_CHECK_MONTHS, B_DETECTION_CHECK)

CONSTANTS: tuple[Constant, ...] = (
    Constant("date of application", APPLIES_FROM, "date", B_APPLIES),
    Constant("leak-check threshold, fluorinated gases", Decimal(5), "t CO2e", B_SCOPE),
    *(Constant(f"interval {band}", months, "months", B_TIERS) for _, months, band in CO2E_BANDS),
    Constant("interval factor with a leak detection system", DETECTION_FACTOR, "x", B_TIERS),
    Constant("hermetically sealed exemption, below", HERMETIC_CO2E_T, "t CO2e", B_HERMETIC),
    Constant("leak detection system required from", DETECTION_CO2E_T, "t CO2e", B_DETECTION),
    Constant("leak detection system checked every", DETECTION_CHECK_MONTHS, "months",
             B_DETECTION_CHECK),
    Constant("repair deadline, fluorinated gases (site policy)", REPAIR_DAYS, "days", B_REPAIR),
    Constant("follow-up check within", FOLLOW_UP_MONTHS, "months after the repair", B_FOLLOW_UP),
    *(Constant(f"interval {band}", months, "months", B_ODS_TIERS) for _, months, band in ODS_BANDS),
    Constant("HCFC/CFC leak-check threshold, hermetically sealed", ODS_HERMETIC_KG, "kg",
             B_ODS_TIERS),
    Constant("repair deadline, HCFC/CFC", REPAIR_DAYS, "days", B_ODS_REPAIR),
    Constant("re-test within, HCFC/CFC", FOLLOW_UP_MONTHS, "months after the repair",
             B_ODS_FOLLOW_UP),
)


def _band(value: Decimal, bands: Sequence[tuple[Decimal, int, str]]) -> tuple[int, str] | None:
    for bound, months, band in bands:
        if value >= bound:
            return months, band
    return None


def assess(reference: ReferenceLike, system: System, state: SystemState, day: date) -> Assessment:
    """The leak-check band of an in-service system (memoised ``_assess``; see eu.assess)."""
    return _assess_memo(reference, state.refrigerant, state.full_charge_ng, state.detection_system,
                        system.hermetic, system.residential)


@lru_cache(maxsize=1 << 16)
def _assess_memo(reference: ReferenceLike, refrigerant: str | None, charge_ng: int, detection: bool,
                 hermetic: bool, residential: bool) -> Assessment:
    system = System(id=0, site_code="", tag="", hermetic=hermetic, residential=residential)
    state = replace(EMPTY_STATE, in_service=True, refrigerant=refrigerant, full_charge_ng=charge_ng,
                    detection_system=detection)
    return _assess(reference, system, state, APPLIES_FROM)


def _assess(reference: ReferenceLike, system: System, state: SystemState, day: date) -> Assessment:
    """The leak-check band of an in-service system: 517/2014 Art 4 and the HCFC rules.

    Args:
        reference: the refrigerant tables.
        system: the system's static facts (hermetic).
        state: its state on ``day``.
        day: the day (unused: the GB rules here have no dated steps after 2015).
    """
    designation = resolve(reference, state.refrigerant)
    if designation is None:
        return Assessment(UNKNOWN_REFRIGERANT,
                          f"refrigerant {state.refrigerant!r} is not in the reference data",
                          B_SCOPE, None, in_scope=False)
    part_f = reference.mass_fraction_where(designation, "I")
    part_ods = reference.mass_fraction_where(designation, "ods")
    if part_f == 0 and part_ods == 0:
        if reference.mass_fraction_where(designation, "II-1") > 0:
            why = (f"{designation} holds no Annex I gas (Annex II olefins are outside the "
                   "517/2014 leak-check duty): out of scope")
        else:
            why = f"{designation} is neither a fluorinated gas nor ozone-depleting: out of scope"
        return Assessment(OUT_OF_SCOPE, why, B_SCOPE, None, in_scope=False)

    charge_kg = kg_of(state.full_charge_ng)
    # Art 4(1) counts the whole mixture once it contains an Annex I gas (Annex IV method).
    tonnes = charge_kg * Decimal(reference.gwp(designation, GWP_BASIS).value) / 1000
    kg_ods = charge_kg * part_ods
    figures = []
    if part_f > 0:
        figures.append(fmt_t(tonnes))
    if part_ods > 0:
        figures.append(f"{fmt_kg(kg_ods)} of HCFC/CFC")
    said = f"{designation}, {fmt_kg(charge_kg)} charge: " + " and ".join(figures)
    duty = {"repair_days": REPAIR_DAYS,
            "repair_basis": B_ODS_REPAIR if part_ods > 0 else B_REPAIR,
            "repair_rule": "within 14 days" if part_ods > 0 else REPAIR_RULE,
            "follow_up_basis": B_ODS_FOLLOW_UP if part_f == 0 else B_FOLLOW_UP}

    candidates: list[tuple[int, str, Basis, bool]] = []  # (months, band, basis, doubles)
    sealed_off = False
    if part_f > 0:
        hit = _band(tonnes, CO2E_BANDS)
        if hit and system.hermetic and tonnes < HERMETIC_CO2E_T:
            sealed_off = True
        elif hit:
            candidates.append((hit[0], hit[1], B_TIERS, True))
    if part_ods > 0:
        hit = _band(kg_ods, ODS_BANDS)
        if hit and system.hermetic and kg_ods < ODS_HERMETIC_KG:
            sealed_off = True
        elif hit:
            candidates.append((hit[0], hit[1], B_ODS_TIERS, False))
    detection_required = part_f > 0 and tonnes >= DETECTION_CO2E_T

    if not candidates:
        if sealed_off:
            return Assessment(EXEMPT, f"{said}; hermetically sealed and labelled, under "
                              "10 t CO2e / 6 kg HCFC: no periodic leak check", B_HERMETIC, None,
                              **duty)
        return Assessment(BELOW_THRESHOLD, f"{said}; under 5 t CO2e and 3 kg HCFC/CFC: no "
                          "periodic leak check", B_SCOPE, None, **duty)

    # Only the F-gas interval is doubled by a detection system; then the shorter one wins.
    options = []
    for months, band, basis, doubles in candidates:
        note = ""
        if doubles and state.detection_system:
            months *= DETECTION_FACTOR
            note = ", leak detection system fitted: interval doubled"
        options.append((months, band, note, basis))
    months, band, note, basis = min(options, key=lambda o: o[0])
    reason = said
    if len(candidates) == 2:
        reason += "; both the F-gas and the HCFC tests apply, the shorter interval wins"
    if detection_required:
        reason += "; a leak detection system is required (Art 5)"
    cadence = Cadence(f"{months}-month leak check ({band}{note})", basis, months=months)
    return Assessment(band, reason, basis, cadence,
                      detection_required=detection_required, **duty)


def tier_of(history: SystemHistory, reference: ReferenceLike, as_of: date) -> Tier:
    """The system's leak-check band on ``as_of`` under the GB rules.

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
    """Leak checks, repairs, follow-up checks and detection-system duties under the GB rules.

    517/2014 Art 3-5 as retained, and the HCFC leak-check rules; see docs/rules/gb.md.

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
