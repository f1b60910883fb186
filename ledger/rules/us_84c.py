"""Regime ``us-84c``: US 40 CFR Part 84 Subpart C (AIM Act), HFC and substitute refrigerants.

Implements, from 1 January 2026, for appliances with a full charge of 15 lb or more of a
refrigerant that is not ozone-depleting and has a GWP above 53 (AR4 basis); residential
appliances are excluded (we use System.residential for the excluded residential and
light-commercial air conditioning and heat pumps). See docs/rules/us-84c.md for sources,
marks and what is left out:

* leak rate at every addition against 20 / 30 / 10 % (as in Part 82; the Part 84 section
  numbers are not yet checked), repair within 30 days, initial and follow-up verification
  tests, inspections after an exceedance, and the 125 % chronic-leak report (from memory for
  Part 84);
* automatic leak detection for commercial refrigeration and industrial process refrigeration
  of 1 500 lb or more: at installation for systems installed from 2026, by 1 January 2027 for
  systems installed 2017-2025 (secondary / from memory).

Citations name the sections a secondary source gives (leak repair 40 CFR 84.106, with
inspections in 84.106(g), records 84.106(l) and reports 84.106(m); automatic leak detection
84.108); the section texts themselves were not read (docs/rules/us-84c.md).
"""

from __future__ import annotations

from datetime import date
from decimal import Decimal

from ledger.domain.records import Application, Basis
from ledger.rules import engines as en
from ledger.rules import us_82f
from ledger.rules.common import MEMORY, SECONDARY, Constant
from ledger.rules.regime import Regime

CODE = "us-84c"
REGIME_VERSION = "us-84c-2"  # bump when a rule or constant here changes
TITLE = "US 40 CFR Part 84 Subpart C: HFC refrigerants above GWP 53, appliances of 15 lb and up"
GWP_BASIS = "ar4"

_SUBPART = "40 CFR 84 Subpart C (89 FR 82682)"
_REPAIR = "40 CFR 84.106"  # leak repair; section per Hixson (EH&S consultancy), Apr 2025
_ALD = "40 CFR 84.108"  # automatic leak detection; same source

(B_SCOPE, B_GWP, B_THRESHOLDS, B_REPAIR, B_INITIAL, B_FOLLOW_UP, B_INSPECTION, B_REPORT,
 B_DETECTION_SIZE, B_DETECTION) = (Basis(citation, mark, note) for citation, mark, note in (
    (_SUBPART, SECONDARY,
     "from 1 January 2026, appliances with 15 lb or more of a refrigerant with GWP "
     "above 53; residential and light-commercial air conditioning excluded (trade "
     "press)"),
    (_SUBPART, MEMORY,
     "GWP values of the AIM Act framework are AR4"),
    (_SUBPART, SECONDARY,
     "20 % commercial refrigeration, 30 % industrial process refrigeration, "
     "10 % comfort cooling, transport and other"),
    (_REPAIR, SECONDARY,
     "\"Repair within 30 days (120 days if an industrial process shutdown is "
     "required)\" (Hixson, citing 84.106)"),
    (_REPAIR, SECONDARY,
     "\"Verification test on each repair must be within 30 days\" (Hixson)"),
    (_REPAIR, SECONDARY,
     "\"Follow-up verification test must be performed within 10 days of initial "
     "verification test\" (Hixson)"),
    (f"{_REPAIR}(g)", MEMORY,
     "leak inspections after an exceedance, as in 40 CFR 82.157(g); the 500 lb "
     "and 12-month figures were not found for Part 84"),
    (f"{_REPAIR}(m)", MEMORY,
     "125 % of the full charge added in a calendar year: report by 1 March (not "
     "found in a source for Part 84)"),
    (_ALD, SECONDARY,
     "automatic leak detection for commercial / industrial process "
     "refrigeration \"with a charge of 1,500 pounds or more\" (HVACInsider)"),
    (_ALD, MEMORY,
     "automatic leak detection for commercial / industrial process refrigeration "
     "of 1 500 lb or more (secondary): at installation from 2026, by 1 January "
     "2027 for systems installed 2017-2025 (dates from memory)"),
))

APPLIES_FROM = date(2026, 1, 1)
GWP_ABOVE = Decimal(53)
FULL_CHARGE_LB = Decimal(15)  # = 6 803 885 550 000 ng exactly
REPAIR_DAYS = 30
VERIFICATION_DAYS = 10
# Inspections and the chronic-leak report as in 40 CFR 82.157(g), (j): their Part 84 figures
# were not found (B_INSPECTION, B_REPORT), so Part 82's are used.
INSPECTION_QUARTERLY_LB = us_82f.INSPECTION_QUARTERLY_LB
INSPECTION_MONTHS = us_82f.INSPECTION_MONTHS
REPORT_PERCENT = CHRONIC_PERCENT = us_82f.REPORT_PERCENT
REPORT_DUE = us_82f.REPORT_DUE
DETECTION_LB = Decimal(1500)
DETECTION_INSTALLED_FROM = date(2017, 1, 1)  # older systems need no automatic leak detection
DETECTION_EXISTING_BY = date(2027, 1, 1)  # systems installed 2017-2025
DETECTION_APPLICATIONS = frozenset({Application.COMMERCIAL_REFRIGERATION,
                                    Application.INDUSTRIAL_PROCESS})

# Part 84 duties, as Part 82's leak-rate duties plus automatic leak detection (84.108).
REPAIRS = en.LeakRateRepair(APPLIES_FROM, REPAIR_DAYS, B_REPAIR, VERIFICATION_DAYS, B_INITIAL,
                            B_FOLLOW_UP)
LEAK_DUTIES = (
    REPAIRS,
    en.ExceedanceInspections(APPLIES_FROM, B_INSPECTION, INSPECTION_QUARTERLY_LB, INSPECTION_MONTHS),
    en.ChronicReport(APPLIES_FROM, REPORT_PERCENT, B_REPORT, REPORT_DUE),
    # at installation from 2026, by 1 January 2027 for systems installed 2017-2025
    en.DetectionSystem(B_DETECTION, f"fit automatic leak detection (≥ {DETECTION_LB} lb, "
                       "installed {installed})", APPLIES_FROM, installed_from=DETECTION_INSTALLED_FROM,
                       existing_by=DETECTION_EXISTING_BY),
)

CONSTANTS: tuple[Constant, ...] = (
    Constant("applies from", APPLIES_FROM, "date", B_SCOPE),
    Constant("GWP above (AR4)", GWP_ABOVE, "", B_SCOPE),
    Constant("GWP basis", GWP_BASIS, "", B_GWP),
    Constant("full charge from", FULL_CHARGE_LB, "lb", B_SCOPE),
    *en.threshold_rows(B_THRESHOLDS), *REPAIRS.rows(initial=False), *LEAK_DUTIES[1].rows(),
    *LEAK_DUTIES[2].rows(due=False),
    Constant("automatic leak detection from", DETECTION_LB, "lb", B_DETECTION_SIZE),
    Constant("automatic leak detection: systems installed from", DETECTION_INSTALLED_FROM,
             "date", B_DETECTION),
    Constant("automatic leak detection: systems installed before 2026, by",
             DETECTION_EXISTING_BY, "date", B_DETECTION),
)


SCOPE = en.ChargeScope(
    basis=B_SCOPE, gwp_basis=GWP_BASIS, residential="residential appliance: excluded from Subpart C",
    ods_classes=us_82f.ODS_CLASSES, ods=False,
    ods_text="{d} is ozone-depleting: covered by 40 CFR 82, not here",
    gwp_from=GWP_ABOVE, gwp_strictly_above=True, low_gwp="{d} has GWP {gwp}{note}, not above 53",
    charge_lb=FULL_CHARGE_LB, charge_strictly_over=False,
    too_small="{d}, {lb} full charge: under 15 lb",
)

REGIME = Regime(
    code=CODE, version=REGIME_VERSION, title=TITLE, gwp_basis=GWP_BASIS, constants=CONSTANTS,
    certificate_scopes=frozenset({"us-608"}),  # Clean Air Act section 608 (40 CFR 82.161)
    scope_basis=B_SCOPE, change_dates=(APPLIES_FROM,),
    classify=en.LeakRateScope(SCOPE, "≥ 15 lb, GWP > 53", B_THRESHOLDS, APPLIES_FROM,
                              "; duties start on 1 January 2026", DETECTION_LB,
                              DETECTION_APPLICATIONS),
    duties=LEAK_DUTIES,
    chronic_percent=CHRONIC_PERCENT, leak_rates=True, mass_unit="lb", countries=frozenset({"US"}),
)
tier_of = REGIME.tier_of
compute_obligations = REGIME.compute_obligations
