"""Regime ``us-wa``: Washington refrigerant management program, chapter 173-443 WAC Part II.

Owner and operator duties for systems of 50 lb or more of a refrigerant with GWP 150 or more
(173-443-020(4)), phased in by band: 1 500 lb or more from 2024, 200 to 1 499 lb from 2026,
50 to 199 lb from 2028 (-115). Declared on the engines of ``ledger.rules.engines``: calendar
inspections by band (-145), automatic leak detection on refrigeration of 1 500 lb or more
(-145(2)), repair in 14 days (-165), one registration per system (-115) and the annual report
(-185). Quotes, marks and what is left out (technician practices of -205 among them):
docs/rules/us-wa.md.
"""

from __future__ import annotations

from datetime import date
from decimal import Decimal

from ledger.domain.records import Application, Basis, Confidence
from ledger.rules import engines as en
from ledger.rules.common import MONTH, QUARTER, YEAR, Constant
from ledger.rules.regime import Regime

CODE, REGIME_VERSION, GWP_BASIS = "us-wa", "us-wa-1", "ar4"
TITLE = "Washington refrigerant management program (chapter 173-443 WAC, Part II)"
# One basis per section cited (the names in the order of the rows): the words read, or what
# stands in for a text not read.
CHECKED, MEMORY = Confidence.CHECKED, Confidence.MEMORY
(B_SCOPE, B_GWP, B_LARGE, B_MID, B_SMALL, B_DETECTION, B_REPAIR, B_REGISTER, B_REPORT,
 B_RECORDS) = (Basis(f"WAC 173-443-{section}", mark, note) for section, mark, note in (
    ("020(4)", CHECKED,
     "\"a full charge of 50 or more pounds and that uses a refrigerant with a global "
     "warming potential (GWP) of 150 or more\" (justia, read Dec 2026)"),
    ("030", MEMORY,
     "definitions not read; AR4 as for us-ca and us-84c (Ecology's GHG rules use AR4: "
     "\"the GWP of HFCs ranges from 12 to 14,800\", 2021 bill report)"),
    ("145(1)(b)(i)", CHECKED,
     "\"Beginning January 1, 2024, … Conduct a leak inspection of the full system each "
     "month … unless an automatic leak detection system … is installed and "
     "functioning correctly on the full system\" (calendar months are our reading)"),
    ("145", MEMORY,
     "200 to under 1 500 lb quarterly from 1 January 2026 unless automatic leak "
     "detection is used; the date matches 115(2) (\"By March 15, 2026\")"),
    ("145", MEMORY,
     "50 to under 200 lb once a year from 1 January 2028; the date matches 115(3)"),
    ("145(2)(a)(i)", CHECKED,
     "refrigeration systems of 1 500 lb or more: \"By January 1, 2025, install an "
     "automatic leak detection system\"; later systems from placement (our "
     "reading); the replace-by-2027 plan of (2)(a)(ii) is not recorded"),
    ("165", CHECKED,
     "14 days from detection, as 195(1)(c) cites it: \"conditions allowing more than "
     "14 days to repair a refrigerant leak after detection under WAC 173-443-165 (3) "
     "or (4)\" (those longer periods are not modelled)"),
    ("115", CHECKED,
     "\"By March 15, 2024\" (1 500 lb or more), 2026 (200 to 1,499), 2028 (50 to "
     "199) for systems operating on 1 January of that year; later ones \"By March "
     "15th of the calendar year after the year in which the … system begins "
     "operations\""),
    ("185", MEMORY,
     "annual report by 15 March for the previous year, from the band's first year "
     "(2024, 2026, 2028); text not read"),
    ("195(1)", CHECKED,
     "\"Beginning January 1, 2024, … must maintain the following records for a "
     "minimum of five years\""),
))

SYSTEM_FROM_LB, MID_LB, LARGE_LB = Decimal(50), Decimal(200), Decimal(1500)  # all "or more"
GWP_FROM = Decimal(150)  # "or more"
LARGE_FROM, MID_FROM, SMALL_FROM = date(2024, 1, 1), date(2026, 1, 1), date(2028, 1, 1)
DETECTION_BY = date(2025, 1, 1)
REFRIGERATION = frozenset({Application.COMMERCIAL_REFRIGERATION, Application.INDUSTRIAL_PROCESS,
                           Application.TRANSPORT_REFRIGERATION})  # 145(2) names refrigeration only
REPAIR_DAYS = 14
FILING_DAY = (3, 15)  # registration and annual report: 15 March
RECORD_YEARS = 5

SCOPE = en.ChargeScope(basis=B_SCOPE, gwp_basis=GWP_BASIS, gwp_from=GWP_FROM,
                       low_gwp="{d} has GWP {gwp}{note}, under 150", charge_lb=SYSTEM_FROM_LB,
                       charge_strictly_over=False, too_small="{d}, {lb}: under 50 lb")
# 145 by band, largest first; automatic leak detection waives the two larger ones' inspections.
INSPECTIONS = en.InspectionBands(SCOPE, (
    en.InspectionBand(LARGE_LB, "large", "≥ 1 500 lb", MONTH, "monthly leak inspection (≥ 1 500 lb)",
                      B_LARGE, "≥ 1 500 lb", waived_by_detection=B_LARGE, applies_from=LARGE_FROM),
    en.InspectionBand(MID_LB, "medium", "200–1 500 lb", QUARTER,
                      "quarterly leak inspection (200 to < 1 500 lb)", B_MID, "200 to < 1 500 lb",
                      waived_by_detection=B_MID, applies_from=MID_FROM),
    en.InspectionBand(Decimal(0), "small", "50–200 lb", YEAR,
                      "annual leak inspection (50 to < 200 lb)", B_SMALL, "50 to < 200 lb",
                      applies_from=SMALL_FROM),
), en.RepairTerms(REPAIR_DAYS, B_REPAIR, "", B_REPAIR), detection_lb=LARGE_LB,
    detection_applications=REFRIGERATION)

CONSTANTS: tuple[Constant, ...] = (
    Constant("system full charge from", SYSTEM_FROM_LB, "lb", B_SCOPE),
    Constant("refrigerant GWP from (AR4)", GWP_FROM, "", B_GWP),
    *(c for b in INSPECTIONS.bands for c in (
        Constant(f"inspection, {b.band}", {MONTH: 1, QUARTER: 3, YEAR: 12}[b.period],
                 f"months (calendar {b.period})" + ("; none with automatic leak detection"
                                                    if b.waived_by_detection else ""), b.basis),
        Constant(f"inspections and registration, {b.band}, from", b.applies_from or LARGE_FROM, "date",
                 b.basis))),
    Constant("automatic leak detection, refrigeration ≥ 1 500 lb, by", DETECTION_BY, "date",
             B_DETECTION),
    Constant("repair within", REPAIR_DAYS, "days of detection", B_REPAIR),
    Constant("registration due", "15 March", "", B_REGISTER),
    Constant("annual report due", "15 March (previous calendar year)", "", B_REPORT),
    Constant("records kept", RECORD_YEARS, "years (from 1 January 2024)", B_RECORDS),
)

REGIME = Regime(
    code=CODE, version=REGIME_VERSION, title=TITLE, gwp_basis=GWP_BASIS, constants=CONSTANTS,
    certificate_scopes=frozenset({"us-608"}),  # 205(1): "certificate issued under 40 C.F.R. § 82.161"
    scope_basis=B_SCOPE, classify=INSPECTIONS,
    change_dates=(LARGE_FROM, DETECTION_BY, MID_FROM, SMALL_FROM),
    duties=(
        en.CalendarInspections(LARGE_FROM),
        en.DetectionSystem(B_DETECTION, "fit automatic leak detection (refrigeration, ≥ 1 500 lb)",
                           DETECTION_BY),
        en.RepairDeadline("repair the leak found{where} on {on} {rule}", LARGE_FROM),
        en.OneTimeFiling(LARGE_FROM, FILING_DAY, B_REGISTER, INSPECTIONS,
                         "register the system with Ecology ({band}, covered from {on}); record "
                         "the filing with `refledger report filed`"),
    ),
    site_duties=(en.AnnualReport(LARGE_FROM, FILING_DAY, B_REPORT, INSPECTIONS,
                                 frozenset({"large", "medium", "small"})),),
    subdivisions=frozenset({"US-WA"}), mass_unit="lb", leak_rates=True,
)
tier_of = REGIME.tier_of
compute_obligations = REGIME.compute_obligations
