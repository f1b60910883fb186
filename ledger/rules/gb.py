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

from datetime import date
from decimal import Decimal

from ledger.domain.records import Basis
from ledger.rules import engines as en
from ledger.rules import eu
from ledger.rules.common import CHECKED, POLICY, SECONDARY, Constant, fmt_kg, fmt_t
from ledger.rules.regime import Regime

CODE = "gb"
REGIME_VERSION = "gb-2"  # bump when a rule or constant here changes
TITLE = "Great Britain: F-gas Regulation (EU) 517/2014 as retained, and HCFC leak checks"
GWP_BASIS = "gb"  # Reg. (EU) 517/2014 values as retained (docs/refrigerants.md)

_FGAS = "Reg. (EU) 517/2014 as retained in GB"
_ODS = "Reg. (EC) 1005/2009 Art 23(2) as retained in GB (gov.uk ODS leak-check guidance)"

(B_APPLIES, B_SCOPE, B_TIERS, B_HERMETIC, B_DETECTION, B_DETECTION_CHECK, B_REPAIR, B_FOLLOW_UP,
 B_ODS_TIERS, B_ODS_REPAIR, B_ODS_FOLLOW_UP) = (Basis(citation, mark, note) for citation, mark, note in (
    (f"{_FGAS} Art 27", SECONDARY,
     "applies from 1 January 2015 (IHK Rostock: \"Seit dem 01.01.2015 gilt die "
     "Verordnung (EU) Nr. 517/2014\")"),
    (f"{_FGAS} Art 4(1)", CHECKED,
     "fluorinated greenhouse gases of Annex I, or mixtures containing them, from "
     "5 t CO2e"),
    (f"{_FGAS} Art 4(3)", CHECKED,
     "5 / 50 / 500 t CO2e: every 12 / 6 / 3 months, 24 / 12 / 6 with a leak "
     "detection system"),
    (f"{_FGAS} Art 4(1)", CHECKED,
     "hermetically sealed and labelled equipment under 10 t CO2e (gov.uk); the "
     "exemption is the second subparagraph of Art 4(1), Art 4(2) being the "
     "equipment list (inferred from Art 5(1)'s wording)"),
    (f"{_FGAS} Art 5(1)", CHECKED,
     "from 500 t CO2e"),
    (f"{_FGAS} Art 5(3)", CHECKED,
     "\"mindestens einmal alle 12 Monate kontrolliert\" (gesetze.legal)"),
    (f"{_FGAS} Art 3(3)", POLICY,
     eu.B_REPAIR.note),
    (f"{_FGAS} Art 3(3)", CHECKED,
     "where the equipment must be leak-checked: \"en el plazo de un mes tras la "
     "reparación\" (517/2014 Art 3(3), Spanish text)"),
    (_ODS, CHECKED,
     "HCFC/CFC equipment: 3 kg (6 kg hermetically sealed) / 30 kg / 300 kg: every "
     "12 / 6 / 3 months (gov.uk: \"12 months if … 3kg or more … 6 months … 30kg "
     "… 3 months … 300kg\")"),
    (_ODS, CHECKED,
     "\"repair it within 14 days\" (gov.uk)"),
    (_ODS, CHECKED,
     "\"repeat the test within one month\" (gov.uk)"),
))

APPLIES_FROM = date(2015, 1, 1)

# 517/2014 Art 4(3)'s bands, which 2024/573 Art 5 kept: one table, read from regime eu.
CO2E_BANDS: tuple[tuple[Decimal, int, str], ...] = eu.CO2E_BANDS
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
REPAIR_RULE = eu.REPAIR_RULE  # the same 14-day site policy for "without undue delay"
FOLLOW_UP_EARLIEST_DAYS = 0  # 517/2014 accepts a re-check straight after the repair
FOLLOW_UP_MONTHS = 1

CONSTANTS: tuple[Constant, ...] = (
    Constant("date of application", APPLIES_FROM, "date", B_APPLIES),
    Constant("leak-check threshold, fluorinated gases", CO2E_BANDS[-1][0], "t CO2e", B_SCOPE),
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


# F-gas repairs: site policy for "without undue delay"; HCFC/CFC: the guidance's 14 days.
_FGAS_TERMS = en.RepairTerms(REPAIR_DAYS, B_REPAIR, REPAIR_RULE, B_FOLLOW_UP)
_ODS_TERMS = en.RepairTerms(REPAIR_DAYS, B_ODS_REPAIR, f"within {REPAIR_DAYS} days", B_ODS_FOLLOW_UP)

CHECKS = en.BandedChecks(
    tests=(
        # Art 4(1) counts the whole mixture once it contains an Annex I gas (Annex IV method).
        en.BandTest("f-gas", "I", en.mixture_co2e_t(GWP_BASIS), fmt_t, "{}", CO2E_BANDS, B_TIERS,
                    _FGAS_TERMS, hermetic_below=HERMETIC_CO2E_T, detection_from=DETECTION_CO2E_T),
        # Only the F-gas interval is doubled by a detection system; then the shorter one wins.
        en.BandTest("ods", "ods", en.fraction_kg("ods"), fmt_kg, "{} of HCFC/CFC", ODS_BANDS,
                    B_ODS_TIERS, _ODS_TERMS, hermetic_below=ODS_HERMETIC_KG, doubles=False),
    ),
    # the sentences of each verdict, mixtures tested both ways first
    both="; both the F-gas and the HCFC tests apply, the shorter interval wins",
    detection_note="; a leak detection system is required (Art 5)",
    detection_factor=DETECTION_FACTOR,
    hermetic="; hermetically sealed and labelled, under 10 t CO2e / 6 kg HCFC: no periodic leak "
             "check",
    hermetic_basis=B_HERMETIC,
    below="; under 5 t CO2e and 3 kg HCFC/CFC: no periodic leak check",
    out_of_scope=(("II-1", "{d} holds no Annex I gas (Annex II olefins are outside the 517/2014 "
                   "leak-check duty): out of scope"),),
    not_covered="{d} is neither a fluorinated gas nor ozone-depleting: out of scope",
    scope_basis=B_SCOPE,
    repair_by=("ods", "f-gas"),  # an HCFC/CFC part brings the guidance's firm 14 days
    follow_up_by=("f-gas", "ods"),
)

REGIME = Regime(
    code=CODE, version=REGIME_VERSION, title=TITLE, gwp_basis=GWP_BASIS, constants=CONSTANTS,
    scope_basis=B_SCOPE, classify=CHECKS, emit_from=APPLIES_FROM, change_dates=(APPLIES_FROM,),
    # 517/2014 accepts a re-check straight after the repair: FOLLOW_UP_EARLIEST_DAYS is 0
    duties=en.banded_duties(detection_basis=B_DETECTION, detection_check_basis=B_DETECTION_CHECK,
                            detection_from=APPLIES_FROM, detection_check_months=DETECTION_CHECK_MONTHS,
                            follow_up_months=FOLLOW_UP_MONTHS,
                            follow_up_earliest_days=FOLLOW_UP_EARLIEST_DAYS),
    certified_only=True, certificate_scopes=frozenset({"gb"}), countries=frozenset({"GB"}),
    except_subdivisions=frozenset({"GB-NIR"}),  # Northern Ireland: regime eu
    record_title=eu.RECORD_TITLE, record_items=eu.RECORD_ITEMS,  # 517/2014 Art 6, as retained
)
tier_of = REGIME.tier_of
compute_obligations = REGIME.compute_obligations
