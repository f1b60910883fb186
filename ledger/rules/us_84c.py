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

from collections.abc import Sequence
from datetime import date
from decimal import Decimal

from ledger.domain.leak_rate import THRESHOLD_PERCENT
from ledger.domain.records import (
    Application,
    Basis,
    Confidence,
    EventKind,
    Finding,
    Obligation,
    ObligationKind,
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
    Timeline,
    at_least_lb,
    cause_on,
    detection_triggers,
    events_until,
    first_event,
    fmt_lb,
    history_findings,
    late_note,
    leak_rate_obligations,
    obligation_sort_key,
    resolve,
    retired_between,
    status_of,
    tier_for_state,
)
from ledger.rules.us_82f import is_ods

REGIME = "us-84c"
REGIME_VERSION = "us-84c-2"  # bump when a rule or constant here changes
TITLE = "US 40 CFR Part 84 Subpart C: HFC refrigerants above GWP 53, appliances of 15 lb and up"
GWP_BASIS = "ar4"

# Where the regime applies, and how a site under it is shown (`ledger.rules.site_profile`).
COUNTRIES: frozenset[str] = frozenset({"US"})
MASS_UNIT = "lb"
LEAK_RATES = True

_SUBPART = "40 CFR 84 Subpart C (89 FR 82682)"
_REPAIR = "40 CFR 84.106"  # leak repair; section per Hixson (EH&S consultancy), Apr 2025
_ALD = "40 CFR 84.108"  # automatic leak detection; same source

B_SCOPE = Basis(_SUBPART, Confidence.SECONDARY,
                "from 1 January 2026, appliances with 15 lb or more of a refrigerant with GWP "
                "above 53; residential and light-commercial air conditioning excluded (trade "
                "press)")
B_GWP = Basis(_SUBPART, Confidence.MEMORY, "GWP values of the AIM Act framework are AR4")
B_THRESHOLDS = Basis(_SUBPART, Confidence.SECONDARY,
                     "20 % commercial refrigeration, 30 % industrial process refrigeration, "
                     "10 % comfort cooling, transport and other")
B_REPAIR = Basis(_REPAIR, Confidence.SECONDARY,
                 "\"Repair within 30 days (120 days if an industrial process shutdown is "
                 "required)\" (Hixson, citing 84.106)")
B_INITIAL = Basis(_REPAIR, Confidence.SECONDARY,
                  "\"Verification test on each repair must be within 30 days\" (Hixson)")
B_FOLLOW_UP = Basis(_REPAIR, Confidence.SECONDARY,
                    "\"Follow-up verification test must be performed within 10 days of initial "
                    "verification test\" (Hixson)")
B_INSPECTION = Basis(f"{_REPAIR}(g)", Confidence.MEMORY,
                     "leak inspections after an exceedance, as in 40 CFR 82.157(g); the 500 lb "
                     "and 12-month figures were not found for Part 84")
B_REPORT = Basis(f"{_REPAIR}(m)", Confidence.MEMORY,
                 "125 % of the full charge added in a calendar year: report by 1 March (not "
                 "found in a source for Part 84)")
B_DETECTION_SIZE = Basis(_ALD, Confidence.SECONDARY,
                         "automatic leak detection for commercial / industrial process "
                         "refrigeration \"with a charge of 1,500 pounds or more\" (HVACInsider)")
B_DETECTION = Basis(_ALD, Confidence.MEMORY,
                    "automatic leak detection for commercial / industrial process refrigeration "
                    "of 1 500 lb or more (secondary): at installation from 2026, by 1 January "
                    "2027 for systems installed 2017-2025 (dates from memory)")

APPLIES_FROM = date(2026, 1, 1)
GWP_ABOVE = Decimal(53)
FULL_CHARGE_LB = Decimal(15)  # = 6 803 885 550 000 ng exactly
REPAIR_DAYS = 30
VERIFICATION_DAYS = 10
INSPECTION_QUARTERLY_LB = Decimal(500)
INSPECTION_MONTHS = 12
REPORT_PERCENT = Decimal(125)
CHRONIC_PERCENT = REPORT_PERCENT
DETECTION_LB = Decimal(1500)
DETECTION_INSTALLED_FROM = date(2017, 1, 1)  # older systems need no automatic leak detection
DETECTION_EXISTING_BY = date(2027, 1, 1)  # systems installed 2017-2025
DETECTION_APPLICATIONS = frozenset({Application.COMMERCIAL_REFRIGERATION,
                                    Application.INDUSTRIAL_PROCESS})

CONSTANTS: tuple[Constant, ...] = (
    Constant("applies from", APPLIES_FROM, "date", B_SCOPE),
    Constant("GWP above (AR4)", GWP_ABOVE, "", B_SCOPE),
    Constant("GWP basis", GWP_BASIS, "", B_GWP),
    Constant("full charge from", FULL_CHARGE_LB, "lb", B_SCOPE),
    *(Constant(f"leak-rate threshold, {app.value}", pct, "%", B_THRESHOLDS)
      for app, pct in THRESHOLD_PERCENT.items()),
    Constant("repair within", REPAIR_DAYS, "days after the exceedance", B_REPAIR),
    Constant("follow-up verification test within", VERIFICATION_DAYS,
             "days after the initial test", B_FOLLOW_UP),
    Constant("quarterly inspections from (commercial / industrial process)",
             INSPECTION_QUARTERLY_LB, "lb", B_INSPECTION),
    Constant("inspections continue after the last exceedance", INSPECTION_MONTHS, "months",
             B_INSPECTION),
    Constant("chronic-leak report from", REPORT_PERCENT, "% of full charge per calendar year",
             B_REPORT),
    Constant("automatic leak detection from", DETECTION_LB, "lb", B_DETECTION_SIZE),
    Constant("automatic leak detection: systems installed from", DETECTION_INSTALLED_FROM,
             "date", B_DETECTION),
    Constant("automatic leak detection: systems installed before 2026, by",
             DETECTION_EXISTING_BY, "date", B_DETECTION),
)


def _excluded_reason(reference: ReferenceLike, history: SystemHistory,
                     state: SystemState) -> tuple[str, str] | None:
    """(band, reason) when the appliance is outside this subpart, else None."""
    if history.system.residential:
        return OUT_OF_SCOPE, "residential appliance: excluded from Subpart C"
    designation = resolve(reference, state.refrigerant)
    if designation is None:
        return (UNKNOWN_REFRIGERANT,
                f"refrigerant {state.refrigerant!r} is not in the reference data")
    if is_ods(reference, designation):
        return OUT_OF_SCOPE, f"{designation} is ozone-depleting: covered by 40 CFR 82, not here"
    figure = reference.gwp(designation, GWP_BASIS)
    gwp = Decimal(figure.value)
    if gwp <= GWP_ABOVE:
        unlisted = getattr(figure, "unlisted", ())
        note = f" ({', '.join(unlisted)} not listed in AR4, counted as 0)" if unlisted else ""
        return OUT_OF_SCOPE, f"{designation} has GWP {gwp.normalize():f}{note}, not above 53"
    if not at_least_lb(state.full_charge_ng, FULL_CHARGE_LB):
        return BELOW_THRESHOLD, (f"{designation}, {fmt_lb(state.full_charge_ng)} full charge: "
                                 "under 15 lb")
    return None


def covers(reference: ReferenceLike, history: SystemHistory, state: SystemState) -> bool:
    """True when an in-service state is an appliance this subpart covers."""
    return _excluded_reason(reference, history, state) is None


def rule(reference: ReferenceLike, history: SystemHistory) -> LeakRateRule:
    """The leak-rate rule of this regime, bound to a reference and one system."""
    return LeakRateRule(
        regime=REGIME,
        applies_from=APPLIES_FROM,
        in_scope=lambda state, _day: covers(reference, history, state),
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
    """Whether 40 CFR 84 Subpart C covers the appliance on ``as_of``, and its threshold.

    Args:
        history: the system and its events.
        reference: the refrigerant tables.
        as_of: the day.
    """
    state = state_of(events_until(history, as_of), as_of)
    idle = tier_for_state(REGIME, state, B_SCOPE)
    if idle is not None:
        return idle
    excluded = _excluded_reason(reference, history, state)
    if excluded is not None:
        return Tier(REGIME, excluded[0], None, B_SCOPE, excluded[1])
    designation = resolve(reference, state.refrigerant)
    threshold = THRESHOLD_PERCENT[history.system.application]
    when = "" if as_of >= APPLIES_FROM else "; duties start on 1 January 2026"
    return Tier(REGIME, "≥ 15 lb, GWP > 53", None, B_THRESHOLDS,
                f"{designation}, {fmt_lb(state.full_charge_ng)} full charge; leak rate at each "
                f"addition against {threshold} % ({history.system.application.value}){when}")


def _detection_obligations(history: SystemHistory, reference: ReferenceLike,
                           as_of: date) -> list[Obligation]:
    events = events_until(history, as_of)
    installed = first_event(events, (EventKind.IN_SERVICE,))
    if installed is None or installed.performed_on < DETECTION_INSTALLED_FROM:
        return []
    due_from = (APPLIES_FROM if installed.performed_on >= APPLIES_FROM
                else DETECTION_EXISTING_BY)
    timeline = Timeline(events)

    def required_at(day: date) -> bool:
        st = timeline.state(day)
        return (st.in_service and history.system.application in DETECTION_APPLICATIONS
                and at_least_lb(st.full_charge_ng, DETECTION_LB)
                and covers(reference, history, st))

    def present_at(day: date) -> bool:
        return timeline.state(day).detection_system

    ons = [e for e in events if e.kind is EventKind.DETECTION_ON]
    out: list[Obligation] = []
    for trigger, lapse in detection_triggers([*timeline.dates, APPLIES_FROM], required_at,
                                             present_at):
        if trigger > as_of:
            continue
        due = max(trigger, due_from)
        if present_at(trigger):
            met = [e for e in ons if e.performed_on <= trigger][-1]
        else:
            met = first_event(ons, (EventKind.DETECTION_ON,), on_or_after=trigger, before=lapse)
        if met is None and ((lapse is not None and lapse <= due)
                            or retired_between(events, trigger, due)):
            continue
        out.append(Obligation(
            REGIME, ObligationKind.DETECTION_SYSTEM, due, B_DETECTION,
            status_of(due, met, as_of), history.system.id, history.site.code, None,
            cause_on(events, trigger), None if met is None else met.id,
            f"fit automatic leak detection (≥ {DETECTION_LB} lb, installed "
            f"{installed.performed_on.isoformat()}){late_note(due, met)}"))
    return out


def compute_obligations(
    histories: Sequence[SystemHistory], reference: ReferenceLike, as_of: date
) -> tuple[list[Obligation], list[Finding]]:
    """Duties under 40 CFR 84 Subpart C: leak-rate exceedances and automatic leak detection.

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
        obs, found = leak_rate_obligations(history, as_of, rule(reference, history))
        obligations.extend(obs)
        obligations.extend(_detection_obligations(history, reference, as_of))
        findings.extend(found)
    obligations.sort(key=obligation_sort_key)
    return obligations, findings
