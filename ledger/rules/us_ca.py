"""Regime ``us-ca``: California refrigerant management program, 17 CCR 95380 ff.

Implements, for systems holding more than 50 lb of a refrigerant with GWP 150 or more (AR4),
see docs/rules/us-ca.md for sources, marks and what is left out:

* 95385 leak inspections by system size: 2 000 lb or more monthly (95385(a)(1)(A), which
  names year-round systems inside an enclosed building; outdoor systems fall under (a)(3),
  not read), waived where an automatic leak detection system is used ((a)(1)(B)); 200 to
  under 2 000 lb quarterly, also waived with automatic leak detection (95385(b)); over 50 to
  under 200 lb annually (95385(c)). Read as one inspection per calendar month / quarter /
  year, due on its last day. (Until us-ca-2 a quarterly duty was listed for 2 000 lb or more
  with automatic leak detection; no such duty was found in the text, so it is gone.)
* 95386 repair within 14 days of finding a leak (the 45-day extensions are not modelled).
* Annual report by 1 March for large (largest system 2 000 lb or more) and medium (200 to
  1 999 lb) facilities, one per calendar year from the first year the ledger holds a record
  of the site; an unfiled report stays overdue when the next one falls due (date from a
  secondary source; the section number is not confirmed).
"""

from __future__ import annotations

from datetime import date
from decimal import Decimal

from ledger.domain.records import Basis
from ledger.rules import engines as en
from ledger.rules.common import CHECKED, MONTH, QUARTER, SECONDARY, YEAR, Constant
from ledger.rules.regime import Regime

CODE = "us-ca"
REGIME_VERSION = "us-ca-2"  # bump when a rule or constant here changes
TITLE = "California refrigerant management program (17 CCR 95380 ff.)"
GWP_BASIS = "ar4"

(B_SCOPE, B_OVER, B_START, B_SIZE, B_INSPECTION_LARGE, B_ALD_WAIVER_LARGE, B_INSPECTION_MEDIUM,
 B_ALD_WAIVER_MEDIUM, B_INSPECTION_SMALL) = (Basis(citation, mark, note) for citation, mark, note in (
    ("17 CCR 95380 ff.", SECONDARY,
     "systems with more than 50 lb of a refrigerant with GWP 150 or more (AR4)"),
    ("17 CCR 95385(c)", CHECKED,
     "\"full charge greater than 50, but less than 200 pounds\" (justia, read Dec 2026)"),
    ("17 CCR 95385", CHECKED,
     "\"after January 1, 2011, the owner or operator … must conduct a leak "
     "inspection\" (justia, read Dec 2026); earlier periods are not listed"),
    ("17 CCR 95383(a)-(b), 95385(a)-(b)", CHECKED,
     "facility size by its largest system: large 2 000 lb or more, medium 200 to "
     "1 999 lb, small over 50 to under 200 lb (\"greater than or equal to 2,000 "
     "pounds\"; justia, read Dec 2026)"),
    ("17 CCR 95385(a)(1)(A)", CHECKED,
     "2 000 lb or more: monthly, for a refrigerant circuit \"located "
     "entirely within an enclosed building\"; outdoor systems fall under "
     "(a)(3), which was not read (calendar-month reading is ours)"),
    ("17 CCR 95385(a)(1)(B)", CHECKED,
     "\"A monthly leak inspection … is not required … if an automatic leak "
     "detection system … is used\" (casetext / justia, read Dec 2026)"),
    ("17 CCR 95385(b)", CHECKED,
     "200 to under 2 000 lb: \"once every three months\" (calendar-quarter "
     "reading is ours)"),
    ("17 CCR 95385(b)", CHECKED,
     "\"A leak inspection … is not required pursuant to this subsection (b) "
     "if an automatic leak detection system … is used\" (justia, read Dec 2026)"),
    ("17 CCR 95385(c)", CHECKED,
     "over 50 to under 200 lb: \"must annually conduct a leak inspection\""),
))
B_INSPECTION = B_INSPECTION_LARGE  # the basis of the section as a whole, for findings
(B_REPAIR, B_REPORT) = (Basis(citation, mark, note) for citation, mark, note in (
    ("17 CCR 95386", CHECKED,
     "repair within 14 days of detection (45-day extensions not modelled; CARB "
     "RMP page: \"leak repair within 14 days of detection\")"),
    ("17 CCR 95380 ff. (annual report)", SECONDARY,
     "annual report by 1 March for large and medium facilities (CARB list-serve "
     "2011 and CARB 2014 notice); the section number is not confirmed"),
))

PROGRAM_FROM = date(2011, 1, 1)
GWP_FROM = Decimal(150)
SYSTEM_OVER_LB = Decimal(50)  # strictly more than 50 lb
MEDIUM_LB = Decimal(200)
LARGE_LB = Decimal(2000)
REPAIR_DAYS = 14
REPORT_DAY = (3, 1)  # 1 March, for the previous calendar year



SCOPE = en.ChargeScope(
    basis=B_SCOPE, gwp_basis=GWP_BASIS, gwp_from=GWP_FROM,
    low_gwp="{d} has GWP {gwp}{note}, under 150",
    charge_lb=SYSTEM_OVER_LB, charge_strictly_over=True, too_small="{d}, {lb}: not over 50 lb",
)
# 95385 by system size, largest first; automatic leak detection waives the two larger ones.
INSPECTIONS = en.InspectionBands(SCOPE, (
    en.InspectionBand(LARGE_LB, "large", "≥ 2 000 lb", MONTH,
                      "monthly leak inspection (≥ 2 000 lb, no automatic leak detection; applies "
                      "to a circuit inside an enclosed building)", B_INSPECTION_LARGE,
                      "≥ 2 000 lb without automatic leak detection (inside a building)",
                      B_ALD_WAIVER_LARGE, "≥ 2 000 lb with automatic leak detection"),
    en.InspectionBand(MEDIUM_LB, "medium", "200–2 000 lb", QUARTER,
                      "quarterly leak inspection (200 to < 2 000 lb, no automatic leak detection)",
                      B_INSPECTION_MEDIUM, "200 to < 2 000 lb without automatic leak detection",
                      B_ALD_WAIVER_MEDIUM, "200 to < 2 000 lb with automatic leak detection"),
    en.InspectionBand(Decimal(0), "small", "50–200 lb", YEAR,
                      "annual leak inspection (> 50 to < 200 lb)", B_INSPECTION_SMALL,
                      "> 50 to < 200 lb"),
), en.RepairTerms(REPAIR_DAYS, B_REPAIR, "", B_REPAIR))


CONSTANTS: tuple[Constant, ...] = (
    *(Constant(name, value, unit, basis) for name, value, unit, basis in (
        ("program in force from", PROGRAM_FROM, "date", B_START),
        ("refrigerant GWP from (AR4)", GWP_FROM, "", B_SCOPE),
        ("system charge over", SYSTEM_OVER_LB, "lb", B_OVER),
        ("medium size from", MEDIUM_LB, "lb", B_SIZE),
        ("large size from", LARGE_LB, "lb", B_SIZE))),
    *INSPECTIONS.rows(),
    Constant("repair within", REPAIR_DAYS, "days of detection", B_REPAIR),
    Constant("annual report due", "1 March (large and medium facilities)", "", B_REPORT),
)


def size_of(full_charge_ng: int) -> str:
    """Size class of a covered system (or of a facility, by its largest system)."""
    return INSPECTIONS.band_of(full_charge_ng).size


REGIME = Regime(
    code=CODE, version=REGIME_VERSION, title=TITLE, gwp_basis=GWP_BASIS, constants=CONSTANTS,
    certificate_scopes=frozenset({"us-608"}),  # Clean Air Act section 608 (40 CFR 82.161)
    scope_basis=B_SCOPE, classify=INSPECTIONS, change_dates=(PROGRAM_FROM,),
    duties=(
        en.CalendarInspections(PROGRAM_FROM),
        en.RepairDeadline("repair the leak found{where} on {on} {rule}", PROGRAM_FROM),
    ),
    site_duties=(en.AnnualReport(PROGRAM_FROM, REPORT_DAY, B_REPORT, INSPECTIONS,
                                 frozenset({"large", "medium"})),),
    # California only; its sites show pounds and the federal leak-rate tables
    subdivisions=frozenset({"US-CA"}), mass_unit="lb", leak_rates=True,
)
tier_of = REGIME.tier_of
compute_obligations = REGIME.compute_obligations
