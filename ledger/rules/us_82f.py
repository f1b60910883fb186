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

from collections.abc import Sequence
from datetime import date
from decimal import Decimal

from ledger.domain.leak_rate import THRESHOLD_PERCENT
from ledger.domain.records import (
    Basis,
    Confidence,
    Finding,
    Obligation,
    SystemHistory,
    SystemState,
    Tier,
)
from ledger.domain.state import state_of
from ledger.rules.common import (
    BELOW_THRESHOLD,
    OUT_OF_SCOPE,
    UNKNOWN_REFRIGERANT,
    Constant,
    LeakRateRule,
    ReferenceLike,
    at_least_lb,
    events_until,
    fmt_lb,
    history_findings,
    leak_rate_obligations,
    obligation_sort_key,
    resolve,
    tier_for_state,
)

REGIME = "us-82f"
REGIME_VERSION = "us-82f-2"  # bump when a rule or constant here changes
TITLE = "US 40 CFR Part 82 Subpart F: ozone-depleting refrigerants, appliances of 50 lb and up"
GWP_BASIS = "ar4"

# Where the regime applies, and how a site under it is shown (`ledger.rules.site_profile`).
COUNTRIES: frozenset[str] = frozenset({"US"})
MASS_UNIT = "lb"
LEAK_RATES = True  # duties follow the leak rate at each addition

ODS_CLASSES = frozenset({"HCFC", "CFC"})  # class II / class I refrigerants

B_APPLIES = Basis("40 CFR 82.157(a)", Confidence.CHECKED,
                  "\"As of April 10, 2020, this section applies only to appliances with a full "
                  "charge of 50 or more pounds of any class I or class II refrigerant\" (eCFR "
                  "text; 85 FR 14150)")
B_THRESHOLDS = Basis("40 CFR 82.157(c)(2)", Confidence.CHECKED,
                     "20 % commercial refrigeration, 30 % industrial process refrigeration, "
                     "10 % comfort cooling and other appliances")
B_RATE = Basis("40 CFR 82.152 (leak rate)", Confidence.SECONDARY,
               "annualizing and rolling-average methods over 365 days")
B_ROLLING_RESET = Basis("40 CFR 82.152 (leak rate)", Confidence.MEMORY,
                        "rolling average counted only since the last successful follow-up "
                        "verification test, if shorter than 365 days")
B_REPAIR = Basis("40 CFR 82.157(d)", Confidence.SECONDARY,
                 "repair within 30 days of the exceedance (120-day shutdown extension and "
                 "retrofit/retirement plans not modelled)")
B_INITIAL = Basis("40 CFR 82.157(e)", Confidence.SECONDARY,
                  "initial verification test after the repair, within the repair period")
B_FOLLOW_UP = Basis("40 CFR 82.157(e)", Confidence.SECONDARY,
                    "follow-up verification test within 10 days of the initial test")
B_INSPECTION = Basis("40 CFR 82.157(g)", Confidence.MEMORY,
                     "quarterly (commercial / industrial process refrigeration of 500 lb or more) "
                     "or annual leak inspections until a year under the threshold; "
                     "calendar-period reading is ours")
B_REPORT = Basis("40 CFR 82.157(j)", Confidence.SECONDARY,
                 "125 % of the full charge added in a calendar year: report by 1 March of the "
                 "next year (EPA fact sheet)")

APPLIES_FROM = date(2020, 4, 10)
FULL_CHARGE_LB = Decimal(50)  # = 22 679 618 500 000 ng exactly
REPAIR_DAYS = 30
VERIFICATION_DAYS = 10
INSPECTION_QUARTERLY_LB = Decimal(500)
INSPECTION_MONTHS = 12
REPORT_PERCENT = Decimal(125)
CHRONIC_PERCENT = REPORT_PERCENT  # share of full charge added in a year that calls for a report

CONSTANTS: tuple[Constant, ...] = (
    Constant("applies from", APPLIES_FROM, "date", B_APPLIES),
    Constant("full charge from", FULL_CHARGE_LB, "lb", B_APPLIES),
    *(Constant(f"leak-rate threshold, {app.value}", pct, "%", B_THRESHOLDS)
      for app, pct in THRESHOLD_PERCENT.items()),
    Constant("leak-rate window", 365, "days", B_RATE),
    Constant("rolling average restarts at a passing follow-up verification test", "yes", "",
             B_ROLLING_RESET),
    Constant("repair within", REPAIR_DAYS, "days after the exceedance", B_REPAIR),
    Constant("initial verification test by", REPAIR_DAYS, "days after the exceedance",
             B_INITIAL),
    Constant("follow-up verification test within", VERIFICATION_DAYS,
             "days after the initial test", B_FOLLOW_UP),
    Constant("quarterly inspections from (commercial / industrial process)",
             INSPECTION_QUARTERLY_LB, "lb", B_INSPECTION),
    Constant("inspections continue after the last exceedance", INSPECTION_MONTHS, "months",
             B_INSPECTION),
    Constant("chronic-leak report from", REPORT_PERCENT, "% of full charge per calendar year",
             B_REPORT),
    Constant("chronic-leak report due", "1 March of the next year", "", B_REPORT),
)


def is_ods(reference: ReferenceLike, designation: str) -> bool:
    """True when any component is an HCFC or CFC (a class II or class I substance)."""
    return bool(reference.chem_classes(designation) & ODS_CLASSES)


def covers(reference: ReferenceLike, state: SystemState) -> bool:
    """True when an in-service state is an ODS appliance of 50 lb or more."""
    designation = resolve(reference, state.refrigerant)
    return (designation is not None and is_ods(reference, designation)
            and at_least_lb(state.full_charge_ng, FULL_CHARGE_LB))


def rule(reference: ReferenceLike) -> LeakRateRule:
    """The leak-rate rule of this regime, bound to a reference."""
    return LeakRateRule(
        regime=REGIME,
        applies_from=APPLIES_FROM,
        in_scope=lambda state, _day: covers(reference, state),
        threshold_basis=B_THRESHOLDS,
        repair_days=REPAIR_DAYS,
        repair_basis=B_REPAIR,
        verification_days=VERIFICATION_DAYS,
        initial_basis=B_INITIAL,
        follow_up_basis=B_FOLLOW_UP,
        inspection_basis=B_INSPECTION,
        inspection_quarterly_lb=INSPECTION_QUARTERLY_LB,
        inspection_months=INSPECTION_MONTHS,
        report_percent=REPORT_PERCENT,
        report_basis=B_REPORT,
    )


def tier_of(history: SystemHistory, reference: ReferenceLike, as_of: date) -> Tier:
    """Whether 40 CFR 82 Subpart F covers the appliance on ``as_of``, and its threshold.

    There is no periodic check without an exceedance, so ``interval_months`` is None.

    Args:
        history: the system and its events.
        reference: the refrigerant tables.
        as_of: the day.
    """
    state = state_of(events_until(history, as_of), as_of)
    idle = tier_for_state(REGIME, state, B_APPLIES)
    if idle is not None:
        return idle
    designation = resolve(reference, state.refrigerant)
    if designation is None:
        return Tier(REGIME, UNKNOWN_REFRIGERANT, None, B_APPLIES,
                    f"refrigerant {state.refrigerant!r} is not in the reference data")
    if not is_ods(reference, designation):
        return Tier(REGIME, OUT_OF_SCOPE, None, B_APPLIES,
                    f"{designation} is not ozone-depleting: out of scope of Subpart F")
    charge = fmt_lb(state.full_charge_ng)
    if not at_least_lb(state.full_charge_ng, FULL_CHARGE_LB):
        return Tier(REGIME, BELOW_THRESHOLD, None, B_APPLIES,
                    f"{designation}, {charge} full charge: under 50 lb")
    threshold = THRESHOLD_PERCENT[history.system.application]
    return Tier(REGIME, "≥ 50 lb ozone-depleting", None, B_THRESHOLDS,
                f"{designation}, {charge} full charge; leak rate at each addition against "
                f"{threshold} % ({history.system.application.value})")


def compute_obligations(
    histories: Sequence[SystemHistory], reference: ReferenceLike, as_of: date
) -> tuple[list[Obligation], list[Finding]]:
    """Duties opened by leak-rate exceedances under 40 CFR 82.157.

    Args:
        histories: systems (of one or several sites) with their events.
        reference: the refrigerant tables.
        as_of: the day of evaluation; later events are ignored.
    Returns:
        (obligations earliest due first, findings about the data).
    """
    bound = rule(reference)
    obligations: list[Obligation] = []
    findings: list[Finding] = []
    for history in histories:
        findings.extend(history_findings(history, reference, as_of))
        obs, found = leak_rate_obligations(history, as_of, bound)
        obligations.extend(obs)
        findings.extend(found)
    obligations.sort(key=obligation_sort_key)
    return obligations, findings
