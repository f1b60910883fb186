"""Parameterised duty engines and classifiers; a regime module configures them with its constants.

Classifiers (a regime's ``classify``: the band of an in-service system on a day):

* `BandedChecks`: periodic leak checks by band, from one or more tests of the charge (t CO2e
  of some gases, kg of others), with hermetic / residential exemptions, a detection-system
  factor and threshold (EU 2024/573, GB 517/2014 + HCFC rules).
* `LeakRateScope`: coverage by refrigerant class, GWP and full charge in pounds, for duties
  that follow the leak rate at each addition (US 40 CFR 82 F, 84 C).
* `InspectionBands`: the same coverage, then a calendar inspection period by charge band,
  optionally waived by automatic leak detection (California 17 CCR 95385).

Duties (each `run(job)` adds one system's obligations to a `ledger.rules.regime.Job`):

* `PeriodicCheck`: "every N months from the last check" from the classifier's cadence.
* `CalendarInspections`: one inspection per calendar month / quarter / year from it.
* `RepairDeadline`: a found leak repaired within the classifier's repair days.
* `FollowUpWindow`: a follow-up check not before / within a time after each repair.
* `DetectionSystem`: fit a leak detection system where required, and check it.
* `LeakRateRepair`: repair and verification tests after a leak-rate exceedance.
* `ExceedanceInspections`: inspections by calendar period after an exceedance.
* `ChronicReport`: a report when a year's additions reach a share of the full charge.
* `AnnualReport` (a site duty): a yearly facility report by the size of its largest system.

Nothing here knows a regulation: thresholds, periods, texts and citations come from the
regime's declarations (see DEVELOPERS.md, "Adding a regime").
"""

from __future__ import annotations

import calendar
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from datetime import date, timedelta
from decimal import Context, Decimal, localcontext
from typing import Any, cast

from ledger.domain.booking import Booking
from ledger.domain.dates import add_months
from ledger.domain.leak_rate import ANNUALIZING, METHODS, THRESHOLD_PERCENT, LeakRate, leak_rates
from ledger.domain.records import (
    Application,
    Basis,
    Event,
    EventId,
    EventKind,
    Finding,
    FollowUpResult,
    Obligation,
    ObligationKind,
    Severity,
    System,
    SystemHistory,
    SystemState,
)
from ledger.rules.common import (
    BELOW_THRESHOLD,
    EXEMPT,
    NG_PER_LB,
    OUT_OF_SCOPE,
    QUARTER,
    UNKNOWN_REFRIGERANT,
    YEAR,
    Cadence,
    Constant,
    ReferenceLike,
    Segment,
    Window,
    at_least_lb,
    calendar_windows,
    cause_on,
    detection_triggers,
    first_event,
    fmt_kg,
    fmt_lb,
    interval_windows,
    kg_of,
    leak_found_events,
    resolve,
    retired_between,
    service_segments,
    status_of,
)
from ledger.rules.regime import PERIOD_MONTHS, Assessment, Job, Regime

__all__ = [
    "AnnualReport", "BandTest", "BandedChecks", "CalendarInspections", "ChargeScope",
    "ChronicReport", "DetectionSystem", "ExceedanceInspections", "FollowUpWindow",
    "InspectionBand", "InspectionBands", "LeakRateRepair", "LeakRateScope", "OneTimeFiling",
    "PeriodicCheck",
    "RepairDeadline", "RepairTerms", "annex_co2e_t", "fraction_kg", "mixture_co2e_t",
    "unknown_refrigerant",
]

_EXACT = Context(prec=60)
Measure = Callable[[ReferenceLike, str, int], Decimal]  # (reference, designation, charge ng)


def unknown_refrigerant(state: SystemState, basis: Basis) -> Assessment:
    """The verdict on a refrigerant the reference data does not know: no duty can be tiered."""
    return Assessment(UNKNOWN_REFRIGERANT,
                      f"refrigerant {state.refrigerant!r} is not in the reference data",
                      basis, None, in_scope=False)


# --- measures of a charge -------------------------------------------------------------------


def annex_co2e_t(annex: str, basis: str) -> Measure:
    """t CO2e of the components of one annex only: charge kg x sum(mass fraction x GWP) / 1000
    over them, GWP on ``basis`` (exact)."""

    def measure(reference: ReferenceLike, designation: str, charge_ng: int) -> Decimal:
        with localcontext(_EXACT):
            per_kg = Decimal(0)
            for name, percent in reference.lookup(designation).components:
                component = reference.components[name]
                gwp = component.gwp.get(basis)
                if component.eu_annex == annex and gwp is not None:
                    per_kg += Decimal(percent) / 100 * Decimal(gwp)
            return kg_of(charge_ng) * per_kg / 1000

    return measure


def mixture_co2e_t(basis: str) -> Measure:
    """t CO2e of the whole charge: kg x the mixture's GWP on ``basis`` / 1000."""

    def measure(reference: ReferenceLike, designation: str, charge_ng: int) -> Decimal:
        return kg_of(charge_ng) * Decimal(reference.gwp(designation, basis).value) / 1000

    return measure


def fraction_kg(fraction: str) -> Measure:
    """kg of the part of the charge in one class (``mass_fraction_where``: "II-1", "ods", ...)."""

    def measure(reference: ReferenceLike, designation: str, charge_ng: int) -> Decimal:
        return kg_of(charge_ng) * reference.mass_fraction_where(designation, fraction)

    return measure


# --- banded periodic checks (EU, GB) --------------------------------------------------------


@dataclass(frozen=True, slots=True)
class RepairTerms:
    """The repair deadline after a leak is found, and the follow-up check's basis."""

    days: int
    basis: Basis
    rule: str  # how the deadline reads in a sentence, e.g. "within 14 days"
    follow_up_basis: Basis


@dataclass(frozen=True, eq=False)
class BandTest:
    """One test of a charge against bands: (lower bound, interval in months, band), from the
    top, the first bound met wins."""

    name: str  # named by BandedChecks.repair_by / follow_up_by
    fraction: str  # the class whose share of the charge makes the test apply ("I", "ods"...)
    measure: Measure  # the figure tested
    show: Callable[[Decimal], str]  # how the figure reads (fmt_t, fmt_kg)
    figure: str  # "{} of Annex I gases": the figure in the reason
    bands: tuple[tuple[Decimal, int, str], ...]
    basis: Basis
    repair: RepairTerms
    hermetic_below: Decimal | None = None  # hermetically sealed: exempt below this figure
    doubles: bool = True  # a fitted leak detection system multiplies the interval
    detection_from: Decimal | None = None  # a leak detection system is required from this
    counts_from: date | None = None  # the test counts only from this day
    not_counted: str = ""  # said after the figure before ``counts_from``


@dataclass(frozen=True, eq=False)
class BandedChecks:
    """Classifier of a periodic-check regime: the shortest interval of the tests that apply."""

    tests: tuple[BandTest, ...]
    scope_basis: Basis
    out_of_scope: tuple[tuple[str, str], ...]  # (class present, "{d} ... : out of scope")
    not_covered: str  # "{d} is not a fluorinated gas: out of scope"
    below: str  # "; under 5 t CO2e and 1 kg: no periodic leak check"
    hermetic_basis: Basis
    hermetic: str  # "; hermetically sealed and labelled, under ...: no periodic leak check"
    both: str  # "; both tests apply, the shorter interval wins"
    detection_note: str  # "; a leak detection system is required (Art 6)"
    detection_factor: int
    repair_by: tuple[str, ...]  # test names, the first present gives the repair terms
    follow_up_by: tuple[str, ...]  # test names, the first present gives the follow-up basis
    # (below kg, basis, sentence): hermetically sealed in a residential building, exempt
    residential: tuple[Decimal, Basis, str] | None = None

    def __call__(self, reference: ReferenceLike, system: System, state: SystemState,
                 day: date) -> Assessment:
        designation = resolve(reference, state.refrigerant)
        if designation is None:
            return unknown_refrigerant(state, self.scope_basis)
        parts = {t.name: reference.mass_fraction_where(designation, t.fraction) for t in self.tests}
        if not any(parts.values()):
            why = next((text for fraction, text in self.out_of_scope
                        if reference.mass_fraction_where(designation, fraction) > 0),
                       self.not_covered)
            return Assessment(OUT_OF_SCOPE, why.format(d=designation), self.scope_basis, None,
                              in_scope=False)

        charge_kg = kg_of(state.full_charge_ng)
        present = [t for t in self.tests if parts[t.name] > 0]
        counted = [t for t in present if t.counts_from is None or day >= t.counts_from]
        values = {t.name: t.measure(reference, designation, state.full_charge_ng) for t in present}
        figures = [t.figure.format(t.show(values[t.name]))
                   + ("" if t in counted else t.not_counted) for t in present]
        said = f"{designation}, {fmt_kg(charge_kg)} charge: " + " and ".join(figures)
        terms = next(t.repair for name in self.repair_by for t in present if t.name == name)
        follow = next(t.repair for name in self.follow_up_by for t in present if t.name == name)
        duty: dict[str, Any] = {"repair_days": terms.days, "repair_basis": terms.basis,
                "repair_rule": terms.rule, "follow_up_basis": follow.follow_up_basis}

        if self.residential is not None and system.hermetic and system.residential:
            below_kg, basis, sentence = self.residential
            if charge_kg * sum(parts.values()) < below_kg:
                return Assessment(EXEMPT, said + sentence, basis, None, **duty)

        options: list[tuple[int, str, str, Basis]] = []  # (months, band, note, basis)
        sealed_off = False
        for t in counted:
            value = values[t.name]
            hit = next(((m, band) for bound, m, band in t.bands if value >= bound), None)
            if hit and system.hermetic and t.hermetic_below is not None and value < t.hermetic_below:
                sealed_off = True
            elif hit:
                months, note = hit[0], ""
                if t.doubles and state.detection_system:
                    months *= self.detection_factor
                    note = ", leak detection system fitted: interval doubled"
                options.append((months, hit[1], note, t.basis))
        detection_required = any(t.detection_from is not None and values[t.name] >= t.detection_from
                                 for t in counted)
        if not options:
            if sealed_off:
                return Assessment(EXEMPT, said + self.hermetic, self.hermetic_basis, None, **duty)
            return Assessment(BELOW_THRESHOLD, said + self.below, self.scope_basis, None, **duty)

        months, band, note, basis = min(options, key=lambda o: o[0])  # ties keep the first test
        reason = said + (self.both if len(options) > 1 else "")
        if detection_required:
            reason += self.detection_note
        cadence = Cadence(f"{months}-month leak check ({band}{note})", basis, months=months)
        return Assessment(band, reason, basis, cadence, detection_required=detection_required,
                          **duty)


# --- coverage by charge in pounds (US) ------------------------------------------------------


@dataclass(frozen=True, eq=False)
class ChargeScope:
    """Which systems a regime covers, tested in order: residential, refrigerant known,
    ozone-depleting or not, GWP, full charge in pounds. Sentences take {d} (designation),
    {lb} (full charge), {gwp} and {note} (components the GWP basis does not list)."""

    basis: Basis
    gwp_basis: str
    charge_lb: Decimal
    charge_strictly_over: bool  # "more than 50 lb" rather than "50 lb or more"
    too_small: str  # "{d}, {lb} full charge: under 50 lb"
    ods_classes: frozenset[str] = frozenset({"HCFC", "CFC"})
    ods: bool | None = None  # True: only ozone-depleting; False: those are excluded
    ods_text: str = ""  # "{d} is not ozone-depleting: out of scope of Subpart F"
    gwp_from: Decimal | None = None
    gwp_strictly_above: bool = False
    low_gwp: str = ""  # "{d} has GWP {gwp}{note}, under 150"
    residential: str | None = None  # excluded residential systems: the sentence

    def is_ods(self, reference: ReferenceLike, designation: str) -> bool:
        """True when any component is of an ozone-depleting class (HCFC, CFC)."""
        return bool(reference.chem_classes(designation) & self.ods_classes)

    def excluded(self, reference: ReferenceLike, system: System,
                 state: SystemState) -> Assessment | None:
        """The verdict on a system this scope leaves out, else None."""
        if self.residential is not None and system.residential:
            return Assessment(OUT_OF_SCOPE, self.residential, self.basis, None, in_scope=False)
        designation = resolve(reference, state.refrigerant)
        if designation is None:
            return unknown_refrigerant(state, self.basis)
        if self.ods is not None and self.is_ods(reference, designation) is not self.ods:
            return Assessment(OUT_OF_SCOPE, self.ods_text.format(d=designation), self.basis, None,
                              in_scope=False)
        if self.gwp_from is not None:
            figure = reference.gwp(designation, self.gwp_basis)
            gwp = Decimal(figure.value)
            if (gwp <= self.gwp_from) if self.gwp_strictly_above else (gwp < self.gwp_from):
                unlisted = getattr(figure, "unlisted", ())
                note = f" ({', '.join(unlisted)} not listed in AR4, counted as 0)" if unlisted else ""
                return Assessment(OUT_OF_SCOPE, self.low_gwp.format(
                    d=designation, gwp=f"{gwp.normalize():f}", note=note), self.basis, None,
                    in_scope=False)
        mass = Decimal(state.full_charge_ng)
        limit = self.charge_lb * NG_PER_LB
        if (mass <= limit) if self.charge_strictly_over else (mass < limit):
            return Assessment(BELOW_THRESHOLD, self.too_small.format(
                d=designation, lb=fmt_lb(state.full_charge_ng)), self.basis, None, in_scope=False)
        return None


@dataclass(frozen=True, eq=False)
class LeakRateScope:
    """Classifier of a leak-rate regime: covered systems are judged at each addition."""

    scope: ChargeScope
    band: str  # e.g. "≥ 50 lb ozone-depleting"
    basis: Basis  # of the thresholds
    applies_from: date | None = None
    pending: str = ""  # said before ``applies_from``, e.g. "; duties start on 1 January 2026"
    detection_lb: Decimal | None = None  # automatic leak detection from this charge...
    detection_applications: frozenset[Application] = frozenset()  # ...for these applications

    def __call__(self, reference: ReferenceLike, system: System, state: SystemState,
                 day: date) -> Assessment:
        excluded = self.scope.excluded(reference, system, state)
        if excluded is not None:
            return excluded
        threshold = THRESHOLD_PERCENT[system.application]
        when = self.pending if self.applies_from is not None and day < self.applies_from else ""
        detection = (self.detection_lb is not None
                     and system.application in self.detection_applications
                     and at_least_lb(state.full_charge_ng, self.detection_lb))
        return Assessment(self.band, f"{resolve(reference, state.refrigerant)}, "
                          f"{fmt_lb(state.full_charge_ng)} full charge; leak rate at each "
                          f"addition against {threshold} % ({system.application.value}){when}",
                          self.basis, None, detection_required=detection)


@dataclass(frozen=True, slots=True)
class InspectionBand:
    """A charge band of a calendar inspection schedule (from ``from_lb`` up to the next band)."""

    from_lb: Decimal
    size: str  # the facility size a largest system of this band makes ("large", ...)
    band: str  # e.g. "≥ 2 000 lb"
    period: str  # MONTH, QUARTER or YEAR
    label: str  # the inspection in a sentence
    basis: Basis
    printed: str  # the row `refledger rules` prints: "inspection, <printed>"
    waived_by_detection: Basis | None = None  # automatic leak detection waives it
    printed_waived: str = ""  # the row of the waiver, if any
    applies_from: date | None = None  # the band's duties start on this day (a phase-in by size;
    # the regime lists it in ``change_dates``): no inspection before it, no report for earlier years

    def rows(self) -> tuple[Constant, ...]:
        """The constants printed for this band: its period in months, and its waiver."""
        rows = [Constant(f"inspection, {self.printed}", PERIOD_MONTHS[self.period],
                         f"months (calendar {self.period})", self.basis)]
        if self.waived_by_detection is not None:
            rows.append(Constant(f"inspection, {self.printed_waived}", "none (waived)", "",
                                 self.waived_by_detection))
        return tuple(rows)


@dataclass(frozen=True, eq=False)
class InspectionBands:
    """Classifier of a calendar-inspection regime: coverage, then the band of the charge."""

    scope: ChargeScope
    bands: tuple[InspectionBand, ...]  # largest first; the last one starts at 0 lb
    repair: RepairTerms
    pending: str = "; from {on}"  # said of a band whose ``applies_from`` has not come
    detection_lb: Decimal | None = None  # automatic leak detection required from this charge...
    detection_applications: frozenset[Application] = frozenset()  # ...for these applications

    def rows(self) -> tuple[Constant, ...]:
        """The constants printed for the bands, largest first."""
        return tuple(row for b in self.bands for row in b.rows())

    def band_of(self, full_charge_ng: int) -> InspectionBand:
        """The band of a full charge (of a covered system)."""
        return next(b for b in self.bands if at_least_lb(full_charge_ng, b.from_lb))

    def __call__(self, reference: ReferenceLike, system: System, state: SystemState,
                 day: date) -> Assessment:
        excluded = self.scope.excluded(reference, system, state)
        if excluded is not None:
            return excluded
        b = self.band_of(state.full_charge_ng)
        said = f"{resolve(reference, state.refrigerant)}, {fmt_lb(state.full_charge_ng)}: "
        duty: dict[str, Any] = {"repair_days": self.repair.days, "repair_basis": self.repair.basis,
                "repair_rule": self.repair.rule, "detection_required": (
                    self.detection_lb is not None and system.application in self.detection_applications
                    and at_least_lb(state.full_charge_ng, self.detection_lb))}
        if b.waived_by_detection is not None and state.detection_system:
            return Assessment(b.band, f"{said}automatic leak detection used, periodic "
                              f"inspections waived ({b.waived_by_detection.citation})",
                              b.waived_by_detection, None, **duty)
        if b.applies_from is not None and day < b.applies_from:
            return Assessment(b.band, said + b.label + self.pending.format(on=b.applies_from.isoformat()),
                              b.basis, None, **duty)
        cadence = Cadence(b.label, b.basis, period=b.period)
        return Assessment(b.band, said + b.label, b.basis, cadence, **duty)


# --- duties ---------------------------------------------------------------------------------


def _window_detail(w: Window, what: str) -> str:
    detail = w.cadence.label
    if w.missed:
        detail += f"; missed: no {what} from {w.opens_on.isoformat()} to {w.due_on.isoformat()}"
    if w.carried_from is not None:
        detail += (f"; due {w.carried_from.isoformat()} under the earlier law and still "
                   "outstanding when this rule took effect")
    return detail


def _cadence_at(job: Job) -> Callable[[date], Cadence | None]:
    def cadence_at(day: date) -> Cadence | None:
        a = job.assessment(day)
        return None if a is None else a.cadence

    return cadence_at


@dataclass(frozen=True)
class PeriodicCheck:
    """Periodic leak checks, each due the classifier's months after the last (interval walk,
    `common.interval_windows`); windows due before the regime's ``emit_from`` belong to
    earlier law."""

    def run(self, job: Job) -> None:
        for w in interval_windows(segments=service_segments(job.events), cadence_at=_cadence_at(job),
                                  change_dates=job.changes, checks=job.of_kind(EventKind.CHECK),
                                  events=job.events, as_of=job.as_of,
                                  emit_from=job.regime.emit_from):
            job.add(ObligationKind.LEAK_CHECK, w.due_on, w.cadence.basis, w.met_by, w.cause,
                    _window_detail(w, "leak check"), opens=w.opens_on)


@dataclass(frozen=True)
class CalendarInspections:
    """One inspection per calendar period of the classifier's cadence while it applies, from
    ``applies_from`` (`common.calendar_windows`)."""

    applies_from: date

    def run(self, job: Job) -> None:
        checks = job.of_kind(EventKind.CHECK)
        for seg in service_segments(job.events):
            start = max(seg.start_on, self.applies_from)
            if seg.end_on is not None and start >= seg.end_on:
                continue
            _inspections(job, [(start, None, seg.cause)], seg.end_on, _cadence_at(job), checks,
                         [*job.changes, self.applies_from])


def _inspections(job: Job, spans: list[tuple[date, date | None, EventId | None]],
                 stop_on: date | None, cadence_at: Callable[[date], Cadence | None],
                 checks: Sequence[Any], change_dates: Sequence[date]) -> None:
    for w in calendar_windows(spans=spans, stop_on=stop_on, cadence_at=cadence_at,
                              change_dates=change_dates, checks=checks, as_of=job.as_of):
        job.add(ObligationKind.LEAK_INSPECTION, w.due_on, w.cadence.basis, w.met_by, w.cause,
                _window_detail(w, "inspection"), w.opens_on)


@dataclass(frozen=True)
class RepairDeadline:
    """Each found leak (a check finding one, a failed follow-up) repaired within the
    classifier's repair days; a retirement before the deadline ends the duty.

    ``wording`` takes {where}, {what} (the event finding it), {on} and {rule}.
    """

    wording: str
    applies_from: date | None = None  # leaks found earlier open nothing

    def run(self, job: Job) -> None:
        for leak in leak_found_events(job.events):
            if self.applies_from is not None and leak.performed_on < self.applies_from:
                continue
            a = job.assessment(leak.performed_on)
            if a is None or not a.in_scope or a.repair_basis is None:
                continue
            due = leak.performed_on + timedelta(days=a.repair_days)
            met = first_event(job.events, (EventKind.REPAIR,), on_or_after=leak.performed_on)
            if met is None and retired_between(job.events, leak.performed_on, due):
                continue
            what = "leak check" if leak.kind is EventKind.CHECK else "failed follow-up check"
            where = f" at {leak.location}" if leak.location else ""
            rule = a.repair_rule or f"within {a.repair_days} days"
            job.add(ObligationKind.REPAIR, due, a.repair_basis, met, leak.id, self.wording.format(
                where=where, what=what, on=leak.performed_on.isoformat(), rule=rule))


@dataclass(frozen=True)
class FollowUpWindow:
    """A follow-up check after each repair: not before ``earliest_days``, within ``months``.

    Only where the classifier gives a follow-up basis and a periodic check applies that day
    (equipment that must be leak-checked)."""

    earliest_days: int
    months: int

    def run(self, job: Job) -> None:
        follow_ups = job.of_kind(EventKind.FOLLOW_UP)
        for repair in job.of_kind(EventKind.REPAIR):
            a = job.assessment(repair.performed_on)
            if a is None or not a.in_scope or a.follow_up_basis is None or a.cadence is None:
                continue
            earliest = repair.performed_on + timedelta(days=self.earliest_days)
            due = add_months(repair.performed_on, self.months)
            met = first_event(follow_ups, (EventKind.FOLLOW_UP,), on_or_after=earliest, after=repair)
            if met is None and retired_between(job.events, repair.performed_on, due):
                continue
            job.add(ObligationKind.FOLLOW_UP_CHECK, due, a.follow_up_basis, met, repair.id,
                    f"follow-up check of the repair of {repair.performed_on.isoformat()}", earliest)


@dataclass(frozen=True)
class DetectionSystem:
    """A leak detection system fitted where the classifier requires one, and (if
    ``check_months``) checked that often while required and fitted.

    ``detail`` takes {trigger} (the day it became required) and {installed} (the day the
    system was placed in service). Fitting is due no earlier than ``due_from``; with
    ``installed_from``, systems placed in service before it owe nothing, and with
    ``existing_by`` those placed in service before ``due_from`` have until then.
    """

    basis: Basis
    detail: str
    due_from: date
    installed_from: date | None = None
    existing_by: date | None = None
    check_months: int | None = None
    check_basis: Basis | None = None

    def run(self, job: Job) -> None:
        events = job.events
        installed = first_event(events, (EventKind.IN_SERVICE,))
        if installed is None or (self.installed_from is not None
                                 and installed.performed_on < self.installed_from):
            return
        floor = self.due_from
        if self.existing_by is not None and installed.performed_on < self.due_from:
            floor = self.existing_by

        def required_at(day: date) -> bool:
            a = job.assessment(day)
            return a is not None and a.detection_required

        def present_at(day: date) -> bool:
            return job.state(day).detection_system

        ons = job.of_kind(EventKind.DETECTION_ON)
        for trigger, lapse in detection_triggers(job.changes, required_at, present_at):
            if trigger > job.as_of:
                continue
            due = max(trigger, floor)
            met: Event | None
            if present_at(trigger):
                met = [e for e in ons if e.performed_on <= trigger][-1]
            else:
                met = first_event(ons, (EventKind.DETECTION_ON,), on_or_after=trigger, before=lapse)
            if met is None and ((lapse is not None and lapse <= due)
                                or retired_between(events, trigger, due)):
                continue
            job.add(ObligationKind.DETECTION_SYSTEM, due, self.basis, met, cause_on(events, trigger),
                    self.detail.format(trigger=trigger.isoformat(),
                                       installed=installed.performed_on.isoformat()))
        if self.check_months is not None and self.check_basis is not None:
            self._checks(job, required_at, present_at, ons)

    def _checks(self, job: Job, required_at: Callable[[date], bool],
                present_at: Callable[[date], bool], ons: Sequence[Any]) -> None:
        months, basis = self.check_months, self.check_basis
        assert months is not None and basis is not None

        def cadence(day: date) -> Cadence | None:
            if not (required_at(day) and present_at(day)):
                return None
            return Cadence(f"{months}-month check of the leak detection system", basis,
                           months=months)

        spans: list[Segment] = []
        for on in ons:
            off = first_event(job.events, (EventKind.DETECTION_OFF, EventKind.RETIRE), after=on)
            if spans and spans[-1].end_on is None:
                continue  # already fitted: a second "installed" event does not restart anything
            spans.append(Segment(on.performed_on, on.id, None if off is None else off.performed_on))
        merged: list[Segment] = []  # drop spans starting inside an earlier one
        for s in spans:
            if not (merged and (merged[-1].end_on is None or s.start_on < merged[-1].end_on)):
                merged.append(s)
        for w in interval_windows(segments=merged, cadence_at=cadence, change_dates=job.changes,
                                  checks=job.of_kind(EventKind.DETECTION_CHECK), events=job.events,
                                  as_of=job.as_of, emit_from=job.regime.emit_from):
            job.add(ObligationKind.DETECTION_SYSTEM_CHECK, w.due_on, w.cadence.basis, w.met_by,
                    w.cause, _window_detail(w, "check"))


@dataclass(frozen=True)
class OneTimeFiling:
    """One filing per system (a registration), due on (month, day) of the year its band's
    duties start (`InspectionBand.applies_from`, else ``applies_from``) when the system was
    covered by then, else of the year after the one it became covered in.

    ``detail`` takes {band} and {on} (the first day the regime covers the system). A filing
    recorded with `refledger report filed` for the year before the due date meets it.
    """

    applies_from: date
    due: tuple[int, int]  # (month, day)
    basis: Basis
    bands: InspectionBands
    detail: str

    def run(self, job: Job) -> None:
        begun = next((d for d in job.booked.dates
                      if (a := job.assessment(d)) is not None and a.in_scope), None)
        if begun is None:
            return
        band = self.bands.band_of(job.state(begun).full_charge_ng)
        start = band.applies_from or self.applies_from
        year = start.year if begun <= start else begun.year + 1
        job.add(ObligationKind.REPORT, date(year, *self.due), self.basis, None,
                cause_on(job.events, begun), self.detail.format(band=band.band, on=begun.isoformat()))


def banded_duties(*, follow_up_earliest_days: int, follow_up_months: int, detection_basis: Basis,
                  detection_from: date, detection_check_months: int,
                  detection_check_basis: Basis) -> tuple[Any, ...]:
    """The duties of a banded periodic-check regime (`BandedChecks`): periodic leak checks,
    repairs of found leaks, follow-up checks, and a leak detection system fitted where
    required and checked every ``detection_check_months``."""
    return (
        PeriodicCheck(),
        RepairDeadline("repair the leak found{where} by the {what} of {on} ({rule})"),
        FollowUpWindow(follow_up_earliest_days, follow_up_months),
        DetectionSystem(detection_basis, "fit a leak detection system (required from {trigger})",
                        detection_from, check_months=detection_check_months,
                        check_basis=detection_check_basis),
    )


# --- leak-rate duties (US) ------------------------------------------------------------------


_FIXES = (EventKind.REPAIR, EventKind.RETROFIT, EventKind.RETIRE)
_QUARTERLY_APPLICATIONS = frozenset({Application.COMMERCIAL_REFRIGERATION,
                                     Application.INDUSTRIAL_PROCESS})


def _leak_rows(job: Job, applies_from: date) -> tuple[str, list[LeakRate]]:
    """(method, counted leak rates of additions on covered days), once per job; an unknown
    method is said once and annualizing used."""
    key = ("leak-rows", applies_from)
    if key not in job.memo:
        site = job.booked.site
        method = site.leak_rate_method
        if method not in METHODS:
            job.findings.append(Finding(
                f"{site.code}/{job.system.tag}", f"site {site.code}: leak-rate method {method!r} "
                f"is not one of {', '.join(METHODS)}; annualizing used", Severity.WARNING,
                "leak_rate_method"))
            method = ANNUALIZING

        def covered(day: date) -> bool:
            a = job.assessment(day)
            return a is not None and day >= applies_from and a.in_scope

        history = SystemHistory(site, job.system, job.events)
        job.memo[key] = (method, [r for r in leak_rates(history, method)
                                  if r.counted and covered(r.added_on)])
    return cast(tuple[str, list[LeakRate]], job.memo[key])


def threshold_rows(basis: Basis) -> tuple[Constant, ...]:
    """The leak-rate thresholds by application (`ledger.domain.leak_rate.THRESHOLD_PERCENT`,
    the ones every leak rate is judged against), as printed constants."""
    return tuple(Constant(f"leak-rate threshold, {app.value}", pct, "%", basis)
                 for app, pct in THRESHOLD_PERCENT.items())


def _pct(value: Decimal | None) -> str:
    return "?" if value is None else str(value.quantize(Decimal("0.01"), rounding="ROUND_DOWN"))


@dataclass(frozen=True)
class LeakRateRepair:
    """After a leak rate over the threshold: repair within ``repair_days``, an initial
    verification test by then and, once it passes, a follow-up test within
    ``verification_days``. Exceedances before the repair (or a retrofit or retirement, which
    end the duty) belong to the same episode."""

    applies_from: date  # additions before this day open nothing
    repair_days: int
    repair_basis: Basis
    verification_days: int
    initial_basis: Basis
    follow_up_basis: Basis

    def rows(self, *, initial: bool = True) -> tuple[Constant, ...]:
        """The constants `refledger rules` prints for this duty (the ones it runs on)."""
        return (
            Constant("repair within", self.repair_days, "days after the exceedance", self.repair_basis),
            *((Constant("initial verification test by", self.repair_days, "days after the exceedance",
                        self.initial_basis),) if initial else ()),
            Constant("follow-up verification test within", self.verification_days,
                     "days after the initial test", self.follow_up_basis),
        )

    def run(self, job: Job) -> None:
        method, rows = _leak_rows(job, self.applies_from)
        events = job.events
        episodes: list[list[LeakRate]] = []
        for r in (r for r in rows if r.exceeded):
            if episodes and first_event(events, _FIXES, on_or_after=episodes[-1][0].added_on,
                                        before=r.added_on) is None:
                episodes[-1].append(r)
                continue
            episodes.append([r])
        for first, *_ in episodes:
            x = first.added_on
            due = x + timedelta(days=self.repair_days)
            fix = first_event(events, _FIXES, on_or_after=x)
            said = (f"leak rate {_pct(first.percent)} % over the "
                    f"{first.threshold_percent.normalize():f} % "
                    f"threshold at the addition of {x.isoformat()} ({method} method)")
            how = "" if fix is None or fix.kind is EventKind.REPAIR else f" (ended by {fix.kind.value})"
            job.add(ObligationKind.REPAIR, due, self.repair_basis, fix, first.event_id,
                    f"repair: {said}{how}")
            if fix is not None and fix.kind is not EventKind.REPAIR:
                continue
            initial = None if fix is None else first_event(events, (EventKind.FOLLOW_UP,), after=fix)
            if initial is None and retired_between(events, x, due):
                continue
            job.add(ObligationKind.VERIFICATION_TEST, due, self.initial_basis, initial,
                    first.event_id, "initial verification test of the repair after the "
                    f"exceedance of {x.isoformat()}", x)
            if initial is None:
                continue
            if initial.result == FollowUpResult.FAIL:
                job.findings.append(Finding(
                    f"{job.booked.site.code}/{job.system.tag}", f"initial verification test "
                    f"{initial.id} of {initial.performed_on.isoformat()} failed: the repair is "
                    "not verified; repair again and re-test", Severity.WARNING, "result"))
                continue
            follow_due = initial.performed_on + timedelta(days=self.verification_days)
            follow = first_event(events, (EventKind.FOLLOW_UP,), after=initial)
            if follow is None and retired_between(events, initial.performed_on, follow_due):
                continue
            job.add(ObligationKind.VERIFICATION_TEST, follow_due, self.follow_up_basis, follow,
                    initial.id, f"follow-up verification test, within {self.verification_days} "
                    f"days of the initial test of {initial.performed_on.isoformat()}",
                    initial.performed_on)


@dataclass(frozen=True)
class ExceedanceInspections:
    """Leak inspections after an exceedance, each calendar quarter (commercial and industrial
    process refrigeration of ``quarterly_lb`` or more) or year (others), until ``months``
    after the last exceedance."""

    applies_from: date
    basis: Basis
    quarterly_lb: Decimal
    months: int

    def rows(self) -> tuple[Constant, ...]:
        """The constants `refledger rules` prints for this duty."""
        return (Constant("quarterly inspections from (commercial / industrial process)",
                         self.quarterly_lb, "lb", self.basis),
                Constant("inspections continue after the last exceedance", self.months, "months",
                         self.basis))

    def run(self, job: Job) -> None:
        _, rows = _leak_rows(job, self.applies_from)
        exceeded = [r for r in rows if r.exceeded]

        def cadence_at(day: date) -> Cadence | None:
            st = job.state(day)
            if not st.in_service:
                return None
            if (job.system.application in _QUARTERLY_APPLICATIONS
                    and at_least_lb(st.full_charge_ng, self.quarterly_lb)):
                return Cadence("quarterly leak inspection after a leak-rate exceedance "
                               "(commercial or industrial process refrigeration, "
                               f"≥ {self.quarterly_lb} lb)", self.basis, period=QUARTER)
            return Cadence("annual leak inspection after a leak-rate exceedance", self.basis,
                           period=YEAR)

        checks = job.of_kind(EventKind.CHECK)
        for seg in service_segments(job.events):
            spans: list[tuple[date, date | None, EventId | None]] = []
            for r in exceeded:
                if r.added_on < seg.start_on or (seg.end_on is not None and r.added_on >= seg.end_on):
                    continue
                last = add_months(r.added_on, self.months)
                if spans and spans[-1][1] is not None and r.added_on <= spans[-1][1]:
                    spans[-1] = (spans[-1][0], max(last, spans[-1][1]), spans[-1][2])
                else:
                    spans.append((r.added_on, last, r.event_id))
            _inspections(job, spans, seg.end_on, cadence_at, checks, job.booked.dates)


@dataclass(frozen=True)
class ChronicReport:
    """A report when a calendar year's additions reach ``percent`` of the full charge, due on
    (month, day) of the next year."""

    applies_from: date
    percent: Decimal
    basis: Basis
    due: tuple[int, int]  # (month, day) of the next year

    def rows(self, *, due: bool = True) -> tuple[Constant, ...]:
        """The constants `refledger rules` prints for this duty."""
        when = f"{self.due[1]} {calendar.month_name[self.due[0]]}"
        return (Constant("chronic-leak report from", self.percent, "% of full charge per calendar year",
                         self.basis),
                *((Constant("chronic-leak report due", f"{when} of the next year", "", self.basis),)
                  if due else ()))

    def run(self, job: Job) -> None:
        _, rows = _leak_rows(job, self.applies_from)
        totals: dict[int, int] = {}
        reported: set[int] = set()
        for r in rows:
            year = r.added_on.year
            totals[year] = totals.get(year, 0) + r.added_ng
            if year in reported or r.full_charge_ng <= 0:
                continue
            if Decimal(totals[year]) * 100 >= self.percent * r.full_charge_ng:
                reported.add(year)
                share = Decimal(totals[year]) * 100 / r.full_charge_ng
                job.add(ObligationKind.REPORT, date(year + 1, *self.due), self.basis, None, r.event_id,
                        f"report a chronically leaking appliance: {_pct(share)} % of the full "
                        f"charge added in {year} (≥ {self.percent.normalize():f} %); record the "
                        "filing with `refledger report filed`")


# --- site duties ----------------------------------------------------------------------------


def first_record_year(booked: Sequence[Booking]) -> int | None:
    """The first calendar year the ledger holds a record of these systems, placement included.

    Every year from then on has its report (from the program's start). A later record never
    removes an earlier year's duty: a system placed in service long before its records were
    moved into the ledger has those years' reports listed until their filings are recorded.
    """
    years = [e.performed_on.year for b in booked for e in b.history.events]
    return min(years) if years else None


@dataclass(frozen=True)
class AnnualReport:
    """One report per calendar year of a facility whose largest covered system (in service
    at some time in the year) makes it one of ``sizes`` (`InspectionBands` sizes), from the
    first year the ledger holds records of the site; due on (month, day) of the next year.
    An unfiled one stays overdue after the next falls due; a filing recorded with `refledger
    report filed` meets it (services.obligations.apply_filings)."""

    applies_from: date
    due: tuple[int, int]  # (month, day) of the next year
    basis: Basis
    bands: InspectionBands
    sizes: frozenset[str]

    def run_site(self, regime: Regime, site_code: str, booked: Sequence[Booking],
                 reference: ReferenceLike, as_of: date) -> list[Obligation]:
        month, day = self.due
        last = as_of.year - 1 if as_of <= date(as_of.year, month, day) else as_of.year
        first = first_record_year(booked)
        if first is None:
            return []
        out: list[Obligation] = []
        for year in range(max(first, self.applies_from.year), last + 1):
            largest = self._largest_in_year(regime, booked, reference, year, as_of)
            if largest is None:
                continue
            band = self.bands.band_of(largest[0])
            size = band.size
            if size not in self.sizes or (band.applies_from is not None
                                          and year < band.applies_from.year):
                continue
            due = date(year + 1, month, day)
            out.append(Obligation(regime.code, ObligationKind.REPORT, due, self.basis,
                                  status_of(due, None, as_of), None, site_code, None, None, None,
                                  f"annual report for {year} ({size} facility: largest system "
                                  f"{largest[1]}, {fmt_lb(largest[0])}); record the filing with "
                                  "`refledger report filed`"))
        return out

    @staticmethod
    def _largest_in_year(regime: Regime, booked: Sequence[Booking], reference: ReferenceLike,
                         year: int, as_of: date) -> tuple[int, str] | None:
        # (charge, tag) of the largest covered system in service at some time in ``year``.
        start, end = date(year, 1, 1), min(date(year, 12, 31), as_of)
        best: tuple[int, str] | None = None
        for b in booked:
            view = b.until(end)
            st = view.state(end)
            if not st.in_service:
                if st.retired_on is None or st.retired_on <= start:
                    continue
                st = view.state(st.retired_on - timedelta(days=1))
                if not st.in_service:
                    continue
            if not regime.assess(reference, b.system, st, end).in_scope:
                continue
            if best is None or st.full_charge_ng > best[0]:
                best = (st.full_charge_ng, b.system.tag)
        return best
