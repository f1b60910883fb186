"""Regime ``us-82f``: US 40 CFR Part 82 Subpart F (Clean Air Act section 608), ODS appliances.

Implements, for appliances with a full charge of 50 lb or more of an ozone-depleting
refrigerant (a class I or II substance, or a blend containing one; chemical class HCFC or
CFC in any component), see docs/rules/us-82f.md for sources, marks and what is left out:

* 82.157(b), (c): the leak rate at every addition (annualizing or rolling-average method, as
  the facility chose), against 20 % (commercial refrigeration), 30 % (industrial process
  refrigeration) or 10 % (comfort cooling and all other appliances). "Exceeds" = strictly
  greater.
* 82.157(d): repair within 30 days of the exceedance (the 120-day shutdown extension and the
  retrofit/retirement plan are not modelled; a recorded retrofit or retirement ends the duty).
* 82.157(e): initial verification test after the repair, by the repair deadline; follow-up
  verification test within 10 days of a passing initial test.
* 82.157(g): leak inspections after an exceedance, quarterly for commercial refrigeration and
  industrial process refrigeration of 500 lb or more, else annually, until a year after the
  last exceedance (from memory).
* 82.157(j): a report when 125 % or more of the full charge is added in a calendar year, due
  1 March of the next year (EPA fact sheet).

Additions before 10 April 2020 (when the section came to apply to ODS appliances only in this
form) open nothing.
"""

from __future__ import annotations

from datetime import date
from decimal import Decimal

from ledger.domain.leak_rate import YEAR_DAYS
from ledger.domain.records import Basis
from ledger.rules import engines as en
from ledger.rules.common import CHECKED, MEMORY, SECONDARY, Constant, ReferenceLike
from ledger.rules.regime import Regime

CODE = "us-82f"
REGIME_VERSION = "us-82f-2"  # bump when a rule or constant here changes
TITLE = "US 40 CFR Part 82 Subpart F: ozone-depleting refrigerants, appliances of 50 lb and up"
GWP_BASIS = "ar4"

ODS_CLASSES = frozenset({"HCFC", "CFC"})  # class II / class I refrigerants

(B_APPLIES, B_THRESHOLDS, B_RATE, B_ROLLING_RESET, B_REPAIR, B_INITIAL, B_FOLLOW_UP, B_INSPECTION,
 B_REPORT) = (Basis(citation, mark, note) for citation, mark, note in (
    ("40 CFR 82.157(a)", CHECKED,
     "\"As of April 10, 2020, this section applies only to appliances with a full "
     "charge of 50 or more pounds of any class I or class II refrigerant\" (eCFR "
     "text; 85 FR 14150)"),
    ("40 CFR 82.157(c)(2)", CHECKED,
     "20 % commercial refrigeration, 30 % industrial process refrigeration, "
     "10 % comfort cooling and other appliances"),
    ("40 CFR 82.152 (leak rate)", SECONDARY,
     "annualizing and rolling-average methods over 365 days"),
    ("40 CFR 82.152 (leak rate)", MEMORY,
     "rolling average counted only since the last successful follow-up "
     "verification test, if shorter than 365 days"),
    ("40 CFR 82.157(d)", SECONDARY,
     "repair within 30 days of the exceedance (120-day shutdown extension and "
     "retrofit/retirement plans not modelled)"),
    ("40 CFR 82.157(e)", SECONDARY,
     "initial verification test after the repair, within the repair period"),
    ("40 CFR 82.157(e)", SECONDARY,
     "follow-up verification test within 10 days of the initial test"),
    ("40 CFR 82.157(g)", MEMORY,
     "quarterly (commercial / industrial process refrigeration of 500 lb or more) "
     "or annual leak inspections until a year under the threshold; "
     "calendar-period reading is ours"),
    ("40 CFR 82.157(j)", SECONDARY,
     "125 % of the full charge added in a calendar year: report by 1 March of the "
     "next year (EPA fact sheet)"),
))

APPLIES_FROM = date(2020, 4, 10)
FULL_CHARGE_LB = Decimal(50)  # = 22 679 618 500 000 ng exactly
REPAIR_DAYS = 30
VERIFICATION_DAYS = 10
INSPECTION_QUARTERLY_LB = Decimal(500)
INSPECTION_MONTHS = 12
REPORT_PERCENT = Decimal(125)
CHRONIC_PERCENT = REPORT_PERCENT  # share of full charge added in a year that calls for a report
REPORT_DUE = (3, 1)  # 1 March of the next year

# The leak-rate duties of 82.157(d), (e), (g), (j), configured by the constants above.
REPAIRS = en.LeakRateRepair(APPLIES_FROM, REPAIR_DAYS, B_REPAIR, VERIFICATION_DAYS, B_INITIAL,
                            B_FOLLOW_UP)
INSPECTIONS = en.ExceedanceInspections(APPLIES_FROM, B_INSPECTION, INSPECTION_QUARTERLY_LB,
                                       INSPECTION_MONTHS)
REPORTS = en.ChronicReport(APPLIES_FROM, REPORT_PERCENT, B_REPORT, REPORT_DUE)

CONSTANTS: tuple[Constant, ...] = (
    Constant("applies from", APPLIES_FROM, "date", B_APPLIES),
    Constant("full charge from", FULL_CHARGE_LB, "lb", B_APPLIES),
    *en.threshold_rows(B_THRESHOLDS),
    Constant("leak-rate window", YEAR_DAYS, "days", B_RATE),
    Constant("rolling average restarts at a passing follow-up verification test", "yes", "",
             B_ROLLING_RESET),
    *REPAIRS.rows(), *INSPECTIONS.rows(), *REPORTS.rows(),
)


SCOPE = en.ChargeScope(
    basis=B_APPLIES, gwp_basis=GWP_BASIS, charge_lb=FULL_CHARGE_LB, charge_strictly_over=False,
    too_small="{d}, {lb} full charge: under 50 lb", ods_classes=ODS_CLASSES, ods=True,
    ods_text="{d} is not ozone-depleting: out of scope of Subpart F",
)


def is_ods(reference: ReferenceLike, designation: str) -> bool:
    """True when any component is an HCFC or CFC (a class II or class I substance)."""
    return SCOPE.is_ods(reference, designation)


REGIME = Regime(
    code=CODE, version=REGIME_VERSION, title=TITLE, gwp_basis=GWP_BASIS, constants=CONSTANTS,
    certificate_scopes=frozenset({"us-608"}),  # Clean Air Act section 608 (40 CFR 82.161)
    scope_basis=B_APPLIES,
    classify=en.LeakRateScope(SCOPE, "≥ 50 lb ozone-depleting", B_THRESHOLDS),
    duties=(REPAIRS, INSPECTIONS, REPORTS),
    # a US site: masses in pounds, leak-rate tables, the chronic-leak report share
    countries=frozenset({"US"}), mass_unit="lb", leak_rates=True, chronic_percent=CHRONIC_PERCENT,
)
tier_of = REGIME.tier_of
compute_obligations = REGIME.compute_obligations
