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

from datetime import date
from decimal import Decimal

from ledger.domain.records import Basis
from ledger.rules import engines as en
from ledger.rules.common import CHECKED, MEMORY, POLICY, SECONDARY, Constant, ReferenceLike, fmt_kg, fmt_t
from ledger.rules.regime import Regime

CODE = "eu"
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

(B_APPLIES, B_SCOPE, B_TIERS, B_ANNEX_II, B_HERMETIC, B_RESIDENTIAL, B_DETECTION,
 B_DETECTION_CHECK, B_REPAIR, B_FOLLOW_UP) = (
    Basis(f"{_REG} {section}".rstrip(), mark, note) for section, mark, note in (
    ("(date of application)", SECONDARY,
     "applies from 11 March 2024 and repeals Reg. (EU) 517/2014"),
    ("Art 5(1)", CHECKED,
     "leak checks cover Annex I gases from 5 t CO2e and Annex II section 1 gases "
     "from 1 kg; other substances are outside this regulation's leak-check duty"),
    ("Art 5", SECONDARY,
     "CO2e tiers, intervals and their doubling with a leak detection system from the "
     "German Environment Agency FAQ and trade guidance; thresholds are in Art 5(1), "
     "the intervals in a later paragraph of Art 5 whose number was not read"),
    ("Art 5", SECONDARY,
     "Annex II section 1: \"ab 1 kg alle 12 Monate … ab 10 kg alle 6 … ab 100 kg "
     "alle 3\", doubled with a leak detection system (bfs-kaelte-klima.de)"),
    ("Art 5(1)", CHECKED,
     "hermetically sealed and labelled equipment"),
    ("Art 5(1)", CHECKED,
     "hermetically sealed equipment in residential buildings under 3 kg; applied "
     "to the fluorinated part of the charge (our reading)"),
    ("Art 6", SECONDARY,
     "leak detection system from 500 t CO2e or 100 kg Annex II section 1 "
     "(secondary source); transitional dates not checked"),
    ("Art 6", MEMORY,
     "12-month check of the detection system carried over from "
     "Reg. (EU) 517/2014 Art 5(3); not yet checked in 2024/573"),
    ("Art 4(5)", POLICY,
     "the law says 'without undue delay'; the 14 days shown are a site-policy "
     "deadline, not a legal one"),
    ("Art 4(5)", CHECKED,
     "for equipment that must be leak-checked under Art 5(1): \"frühestens nach "
     "Ablauf einer Betriebszeit von 24 Stunden, spätestens jedoch innerhalb eines "
     "Monats nach der Reparatur\" (German text quoted by Landesinnung Kälte-Klima)"),
))

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

CONSTANTS: tuple[Constant, ...] = (
    Constant("date of application", APPLIES_FROM, "date", B_APPLIES),
    Constant("leak-check threshold, Annex I part", CO2E_BANDS[-1][0], "t CO2e", B_SCOPE),
    Constant("leak-check threshold, Annex II section 1 part", ANNEX_II_BANDS[-1][0], "kg",
             B_SCOPE),
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



def annex_i_co2e_t(reference: ReferenceLike, designation: str, charge_ng: int) -> Decimal:
    """Tonnes CO2e of the Annex I gases in a charge, exactly.

    Art 5(1) counts "fluorinated greenhouse gases listed in Annex I" in CO2e, so for a
    mixture only its Annex I components count: charge kg x sum(mass fraction x GWP) / 1000
    over those components (GWP on the regulation's own basis). For a pure Annex I gas this
    is charge kg x GWP / 1000.
    """
    return _ANNEX_I_CO2E(reference, designation, charge_ng)


_ANNEX_I_CO2E = en.annex_co2e_t("I", GWP_BASIS)
# Art 4(5) repair terms, the same whichever test puts the system in scope.
_REPAIR = en.RepairTerms(REPAIR_DAYS, B_REPAIR, REPAIR_RULE, B_FOLLOW_UP)

CHECKS = en.BandedChecks(
    tests=(
        en.BandTest("annex-i", "I", _ANNEX_I_CO2E, fmt_t, "{} of Annex I gases", CO2E_BANDS,
                    B_TIERS, _REPAIR, hermetic_below=HERMETIC_CO2E_T,
                    detection_from=DETECTION_CO2E_T),
        en.BandTest("annex-ii", "II-1", en.fraction_kg("II-1"), fmt_kg,
                    "{} of Annex II section 1 gases", ANNEX_II_BANDS, B_ANNEX_II, _REPAIR,
                    hermetic_below=HERMETIC_ANNEX_II_KG, detection_from=DETECTION_ANNEX_II_KG,
                    counts_from=APPLIES_FROM, not_counted=" (not counted before 11 March 2024)"),
    ),
    scope_basis=B_SCOPE,
    out_of_scope=(("ods", "{d} is an ozone-depleting substance, governed by the EU ozone rules "
                   "rather than this regulation: out of scope"),),
    not_covered="{d} is not a fluorinated gas: out of scope",
    below="; under 5 t CO2e and 1 kg: no periodic leak check",
    hermetic_basis=B_HERMETIC,
    hermetic="; hermetically sealed and labelled, under 10 t CO2e / 2 kg: no periodic leak check",
    both="; both tests apply, the shorter interval wins",
    detection_note="; a leak detection system is required (Art 6)",
    detection_factor=DETECTION_FACTOR,
    repair_by=("annex-i", "annex-ii"),
    follow_up_by=("annex-i", "annex-ii"),
    residential=(RESIDENTIAL_HERMETIC_KG, B_RESIDENTIAL, "; hermetically sealed in a residential "
                 "building, under 3 kg: no periodic leak check"),
)

REGIME = Regime(
    code=CODE, version=REGIME_VERSION, title=TITLE, gwp_basis=GWP_BASIS, constants=CONSTANTS,
    scope_basis=B_SCOPE, classify=CHECKS,
    duties=en.banded_duties(follow_up_earliest_days=FOLLOW_UP_EARLIEST_DAYS,
                            follow_up_months=FOLLOW_UP_MONTHS, detection_basis=B_DETECTION,
                            detection_from=APPLIES_FROM, detection_check_basis=B_DETECTION_CHECK,
                            detection_check_months=DETECTION_CHECK_MONTHS),
    emit_from=APPLIES_FROM, change_dates=(APPLIES_FROM,), certified_only=True, certificate_scopes=frozenset({"eu"}),
    countries=COUNTRIES, subdivisions=SUBDIVISIONS, record_title=RECORD_TITLE,
    record_items=RECORD_ITEMS,
)
tier_of = REGIME.tier_of
compute_obligations = REGIME.compute_obligations
