"""A regime is a value: its declarations, how it classifies a system, and its duties.

A `Regime` holds everything `ledger.rules` knows of one regulation: code, version, title,
GWP basis, the constants `refledger rules` prints, where it applies (countries and
subdivisions), how a site under it is shown (mass unit, leak-rate tables, record-item map),
a classifier (`classify`: the band of an in-service system on a day) and its duties, each a
configured engine from `ledger.rules.engines`. The regime modules only declare values; the
engines are configured from the same constants they print, so what is printed is what runs.

`Regime.run` takes booked histories (`ledger.domain.booking`): each history is folded once
and every regime of its site reads that one fold.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field, replace
from datetime import date, timedelta
from decimal import Decimal
from functools import lru_cache
from itertools import groupby
from typing import Any, Protocol, cast

from ledger.domain import records as rec
from ledger.domain.booking import Booking, book
from ledger.domain.records import Basis, Event, EventId, EventKind, Obligation, ObligationKind, System
from ledger.domain.state import EMPTY_STATE, state_of
from ledger.rules.common import (
    MONTH,
    QUARTER,
    YEAR,
    Cadence,
    Constant,
    ReferenceLike,
    history_findings,
    late_note,
    obligation_sort_key,
    status_of,
    tier_for_state,
)

__all__ = ["Assessment", "Classifier", "Duty", "Job", "Regime", "SiteDuty"]

PERIOD_MONTHS = {MONTH: 1, QUARTER: 3, YEAR: 12}  # a calendar period counted in months
UNCERTIFIED = "done by an uncertified person"


@dataclass(frozen=True, slots=True)
class Assessment:
    """What a regime concludes about an in-service system on one day (its classifier's answer)."""

    band: str  # e.g. "5–50 t CO2e", EXEMPT, OUT_OF_SCOPE
    reason: str  # one sentence with the figures behind the band
    basis: Basis  # where the band comes from
    cadence: Cadence | None  # the periodic check or inspection, None where none applies
    in_scope: bool = True  # False: the regime does not cover the system at all (no repair duty)
    detection_required: bool = False  # a leak detection system must be fitted
    repair_days: int = 14
    repair_basis: Basis | None = None  # None: no repair duty for a found leak
    repair_rule: str = ""  # how the repair deadline reads in a sentence
    follow_up_basis: Basis | None = None  # None: no follow-up check after a repair

    @property
    def interval_months(self) -> int | None:
        """Months between periodic checks (a calendar period counted in months), or None."""
        c = self.cadence
        if c is None:
            return None
        return c.months if c.months is not None else PERIOD_MONTHS.get(c.period or "")


class Classifier(Protocol):
    """The band of an in-service system on a day.

    It may read only the system's static facts (application, hermetic, residential), the
    state's refrigerant, full charge and detection system, and the day through the regime's
    ``change_dates`` (whether each has come): answers are memoised on exactly those.
    """

    def __call__(self, reference: Any, system: System, state: rec.SystemState, day: date) -> Assessment: ...


class Duty(Protocol):
    """One duty engine, configured: it adds a system's obligations and findings to a `Job`."""

    def run(self, job: Job) -> None: ...


class SiteDuty(Protocol):
    """A duty of a whole site (an annual facility report): over all its systems at once."""

    def run_site(self, regime: Regime, site_code: str, booked: Sequence[Booking],
                 reference: Any, as_of: date) -> list[Obligation]: ...


@dataclass(frozen=True, eq=False)
class Regime:
    """One regulatory regime as a value (see the module docstring).

    ``eq=False``: a regime is compared and hashed by identity, so memoised answers key on it
    cheaply.
    """

    code: rec.RegimeCode
    version: str  # bump when a rule or constant changes (kept results go stale anyway)
    title: str
    gwp_basis: str
    constants: tuple[Constant, ...]
    scope_basis: Basis  # basis of the tiers of a system not in service
    classify: Classifier
    duties: tuple[Duty, ...]
    site_duties: tuple[SiteDuty, ...] = ()
    emit_from: date | None = None  # duties due before this day belong to earlier law
    change_dates: tuple[date, ...] = ()  # days the verdict may change without an event
    countries: frozenset[str] = frozenset()  # ISO 3166-1 codes where it applies country-wide
    subdivisions: frozenset[str] = frozenset()  # ISO 3166-2 codes where it applies besides
    except_subdivisions: frozenset[str] = frozenset()  # parts of its countries it leaves out
    mass_unit: str = "kg"  # default unit of a new site under it
    leak_rates: bool = False  # its sites show leak-rate tables (duties follow leak rates)
    chronic_percent: Decimal | None = None  # share of full charge added in a year -> report
    record_title: str | None = None
    record_items: tuple[tuple[str, str, str], ...] = ()  # (item, what is asked, where shown)
    certified_only: bool = False  # only checks by a certified person meet a check duty
    certificate_scopes: frozenset[str] = frozenset()  # certificate scopes valid at its sites

    # The names the regime modules offered before regimes were values (services read them).
    @property
    def REGIME_VERSION(self) -> str:  # noqa: N802
        return self.version

    @property
    def TITLE(self) -> str:  # noqa: N802
        return self.title

    @property
    def GWP_BASIS(self) -> str:  # noqa: N802
        return self.gwp_basis

    @property
    def CONSTANTS(self) -> tuple[Constant, ...]:  # noqa: N802
        return self.constants

    def assess(self, reference: ReferenceLike, system: System, state: rec.SystemState,
               day: date) -> Assessment:
        """The classifier's answer for an in-service state, memoised (see `Classifier`)."""
        steps = tuple(day >= d for d in self.change_dates)
        return _assess_memo(self, cast(Any, reference), system.application, system.hermetic,
                            system.residential, state.refrigerant, state.full_charge_ng,
                            state.detection_system, steps)

    def tier_of(self, history: rec.SystemHistory | Booking, reference: ReferenceLike,
                as_of: date) -> rec.Tier:
        """The system's band on ``as_of`` and the interval it sets.

        Args:
            history: the system and its events (or its Booking).
            reference: the refrigerant tables.
            as_of: the day.
        """
        if isinstance(history, Booking):
            state = history.until(as_of).state(as_of)
        else:  # one day asked of an unbooked history: a single fold to that day is cheaper
            state = state_of(history.events, as_of)
        idle = tier_for_state(self.code, state, self.scope_basis)
        if idle is not None:
            return idle
        a = self.assess(reference, history.system, state, as_of)
        return rec.Tier(self.code, a.band, a.interval_months, a.basis, a.reason)

    def run(self, booked: Sequence[Booking], reference: ReferenceLike,
            as_of: date) -> tuple[list[Obligation], list[rec.Finding]]:
        """Every duty of this regime over booked systems (of one or several sites).

        Returns:
            (obligations earliest due first, findings about the data).
        """
        obligations: list[Obligation] = []
        findings: list[rec.Finding] = []
        for b in booked:
            findings.extend(history_findings(b.history, reference, as_of, b.until(as_of).events))
            job = Job(self, b.until(as_of), reference, as_of)
            if job.placed:
                for duty in self.duties:
                    duty.run(job)
            obligations.extend(job.out)
            findings.extend(job.findings)
        if self.site_duties:
            by_site = sorted(booked, key=lambda b: b.site.code)
            for site_code, group in groupby(by_site, key=lambda b: b.site.code):
                site_booked = list(group)
                for site_duty in self.site_duties:
                    obligations.extend(site_duty.run_site(self, site_code, site_booked,
                                                          reference, as_of))
        obligations.sort(key=obligation_sort_key)
        return obligations, findings

    def compute_obligations(self, histories: Sequence[rec.SystemHistory], reference: ReferenceLike,
                            as_of: date) -> tuple[list[Obligation], list[rec.Finding]]:
        """`run` over histories not yet booked (each is booked here).

        Args:
            histories: systems (of one or several sites) with their events.
            reference: the refrigerant tables.
            as_of: the day of evaluation; later events are ignored.
        Returns:
            (obligations earliest due first, findings about the data).
        """
        return self.run([book(h) for h in histories], reference, as_of)


def _representative_day(change_dates: tuple[date, ...], steps: tuple[bool, ...]) -> date:
    # A day on which exactly the change dates marked in ``steps`` have come.
    passed = [d for d, came in zip(change_dates, steps, strict=True) if came]
    if passed:
        return max(passed)
    return min(change_dates) - timedelta(days=1) if change_dates else date(2000, 1, 1)


@lru_cache(maxsize=1 << 16)
def _assess_memo(regime: Regime, reference: Any, application: Any, hermetic: bool,
                 residential: bool, refrigerant: str | None, charge_ng: int, detection: bool,
                 steps: tuple[bool, ...]) -> Assessment:
    # An estate's thousands of (system, day) questions reduce to a few distinct answers.
    system = System(id=0, site_code="", tag="", application=application, hermetic=hermetic,
                    residential=residential)
    state = replace(EMPTY_STATE, in_service=True, refrigerant=refrigerant,
                    full_charge_ng=charge_ng, detection_system=detection)
    return regime.classify(reference, system, state,
                           _representative_day(regime.change_dates, steps))


@dataclass
class Job:
    """One regime's work on one booked system on one day: what every duty engine reads and adds to.

    Args:
        regime: the regime (its code goes on each obligation).
        booked: the system's booking on ``as_of`` (`Booking.until`).
        reference: the refrigerant tables.
        as_of: the day of evaluation.
    """

    regime: Regime
    booked: Booking
    reference: ReferenceLike
    as_of: date
    out: list[Obligation] = field(default_factory=list)
    findings: list[rec.Finding] = field(default_factory=list)
    memo: dict[Any, Any] = field(default_factory=dict)  # shared between engines of one job

    def __post_init__(self) -> None:
        self.events: tuple[Event, ...] = self.booked.events
        self.placed = any(e.kind is EventKind.IN_SERVICE for e in self.events)
        self._assessed: dict[date, Assessment | None] = {}
        self._by_id: dict[EventId, Event] | None = None

    @property
    def system(self) -> System:
        return self.booked.system

    def state(self, day: date) -> rec.SystemState:
        """The system's state at the end of ``day``."""
        return self.booked.state(day)

    def assessment(self, day: date) -> Assessment | None:
        """The regime's verdict on ``day``, None when the system is not in service."""
        if day not in self._assessed:
            st = self.booked.state(day)
            self._assessed[day] = (self.regime.assess(self.reference, self.system, st, day)
                                   if st.in_service else None)
        return self._assessed[day]

    @property
    def changes(self) -> list[date]:
        """Days the verdict may change: event days and the regime's change dates so far."""
        if "changes" not in self.memo:
            extras = [d for d in self.regime.change_dates if d <= self.as_of]
            self.memo["changes"] = [*self.booked.dates, *extras]
        return cast(list[date], self.memo["changes"])

    def of_kind(self, *kinds: EventKind) -> list[Event]:
        """The events of some kinds; for CHECK and FOLLOW_UP only certified ones count where
        the regime says so (EU 2024/573 Art 4(5), 517/2014 Art 3(3) and 10: checks by
        certified persons)."""
        key = ("kinds", kinds)
        if key not in self.memo:
            certified = self.regime.certified_only
            self.memo[key] = [e for e in self.events if e.kind in kinds and (
                not certified or e.kind not in _CERTIFIED_WORK or e.certified)]
        return cast(list[Event], self.memo[key])

    def add(self, kind: ObligationKind, due: date, basis: Basis, met: Event | None,
            cause: EventId | None, detail: str, earliest: date | None = None,
            opens: date | None = None) -> None:
        """Record one obligation: status from ``met`` and the day, a late note, the checks
        that did not count, and the carry-over of a duty due under earlier law."""
        if met is None and self.regime.certified_only:
            detail += self._uncertified_note(kind, opens or earliest, max(due, self.as_of))
        emit_from = self.regime.emit_from
        if emit_from is not None and due < emit_from:
            # Due under the earlier law: listed only if still outstanding when this rule
            # applied (not met, system in service, no leak check since that re-examined the
            # system), and then due on that day.
            if met is not None and met.performed_on < emit_from:
                return
            if not self.state(emit_from).in_service:
                return
            if self._by_id is None:
                self._by_id = {e.id: e for e in self.events}
            caused_on = self._by_id[cause].performed_on if cause in self._by_id else due
            if any(caused_on < c.performed_on < emit_from for c in self.of_kind(EventKind.CHECK)):
                return
            detail += (f"; due {due.isoformat()} under the earlier law, still outstanding on "
                       f"{emit_from.isoformat()}")
            due = emit_from
        detail += late_note(due, met)
        self.out.append(Obligation(self.regime.code, kind, due, basis,
                                   status_of(due, met, self.as_of), self.system.id,
                                   self.booked.site.code, earliest, cause,
                                   None if met is None else met.id, detail))

    def _uncertified_note(self, kind: ObligationKind, opens: date | None, until: date) -> str:
        # Names the checks in a duty's window done without a valid certificate.
        wanted = _CHECK_MEETS.get(kind)
        if wanted is None:
            return ""
        hits = [e for e in self.events if e.kind is wanted and not e.certified
                and (opens is None or e.performed_on >= opens) and e.performed_on <= until]
        if not hits:
            return ""
        days = ", ".join(f"{e.performed_on.isoformat()} (event {e.id})" for e in hits)
        return f"; {UNCERTIFIED} on {days}: it does not count"


_CERTIFIED_WORK = frozenset({EventKind.CHECK, EventKind.FOLLOW_UP})
_CHECK_MEETS = {ObligationKind.LEAK_CHECK: EventKind.CHECK,
                ObligationKind.FOLLOW_UP_CHECK: EventKind.FOLLOW_UP}

