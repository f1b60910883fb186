"""Small factories for domain records, with explicit dates (shared by the rules tests).

`Log` hands out event ids in the order events are written, so a test reads like a logbook:

    log = Log()
    log.in_service(D(2025, 1, 31), "R-404A", kg("30"))
    check = log.check(D(2025, 7, 1))
    history = log.history(site("S1", "DE", ("eu",)))
"""

from __future__ import annotations

from datetime import date
from decimal import Decimal

from ledger.domain.records import (
    Application,
    CheckResult,
    Event,
    EventKind,
    FollowUpResult,
    Site,
    System,
    SystemHistory,
)

D = date
NG_PER_LB = Decimal(453_592_370_000)  # exact: the international avoirdupois pound (1959)


def kg(value: str | int) -> int:
    """Nanograms of a kilogram figure written as text (exact; must be whole ng)."""
    ng = Decimal(str(value)) * 10**12
    assert ng == ng.to_integral_value(), value
    return int(ng)


def lb(value: str | int) -> int:
    """Nanograms of a pound figure, rounded up to the next whole ng (so it is >= value lb)."""
    ng = Decimal(str(value)) * NG_PER_LB
    return int(ng.to_integral_value(rounding="ROUND_CEILING"))


def site(code: str = "S1", country: str = "DE", regimes: tuple[str, ...] = ("eu",), *,
         subdivision: str | None = None, method: str = "annualizing") -> Site:
    """A site with the given regimes."""
    return Site(id=1, code=code, name=f"Site {code}", country=country, subdivision=subdivision,
                timezone="UTC", regimes=regimes, leak_rate_method=method)


def system(system_id: int = 1, site_code: str = "S1", *,
           application: Application = Application.COMMERCIAL_REFRIGERATION,
           hermetic: bool = False, residential: bool = False) -> System:
    """A system with the given static facts."""
    return System(id=system_id, site_code=site_code, tag=f"SYS{system_id}",
                  application=application, hermetic=hermetic, residential=residential)


class Log:
    """Writes events for one system with ids 1, 2, 3... (or from ``first_id``)."""

    def __init__(self, system_id: int = 1, first_id: int = 1) -> None:
        self.system_id = system_id
        self.next_id = first_id
        self.events: list[Event] = []

    def add(self, kind: EventKind, on: date, **fields: object) -> Event:
        event = Event(id=self.next_id, system_id=self.system_id, kind=kind, performed_on=on,
                      **fields)  # type: ignore[arg-type]
        self.next_id += 1
        self.events.append(event)
        return event

    def in_service(self, on: date, refrigerant: str, charge_ng: int) -> Event:
        return self.add(EventKind.IN_SERVICE, on, refrigerant=refrigerant, charge_ng=charge_ng)

    def check(self, on: date, leak: bool = False, location: str | None = None) -> Event:
        result = CheckResult.LEAK_FOUND if leak else CheckResult.NO_LEAK
        return self.add(EventKind.CHECK, on, result=result.value, location=location)

    def repair(self, on: date) -> Event:
        return self.add(EventKind.REPAIR, on)

    def follow_up(self, on: date, passed: bool = True) -> Event:
        result = FollowUpResult.PASS if passed else FollowUpResult.FAIL
        return self.add(EventKind.FOLLOW_UP, on, result=result.value)

    def top_up(self, on: date, mass_ng: int) -> Event:
        return self.add(EventKind.ADD, on, mass_ng=mass_ng)

    def detection_on(self, on: date) -> Event:
        return self.add(EventKind.DETECTION_ON, on)

    def detection_off(self, on: date) -> Event:
        return self.add(EventKind.DETECTION_OFF, on)

    def detection_check(self, on: date) -> Event:
        return self.add(EventKind.DETECTION_CHECK, on)

    def revise(self, on: date, charge_ng: int) -> Event:
        return self.add(EventKind.CHARGE_REVISED, on, charge_ng=charge_ng)

    def retrofit(self, on: date, refrigerant: str, charge_ng: int) -> Event:
        return self.add(EventKind.RETROFIT, on, refrigerant=refrigerant, charge_ng=charge_ng)

    def retire(self, on: date) -> Event:
        return self.add(EventKind.RETIRE, on)

    def void(self, on: date, event: Event, reason: str = "entered in error") -> Event:
        return self.add(EventKind.VOID, on, voids_id=event.id, reason=reason)

    def history(self, the_site: Site | None = None,
                the_system: System | None = None) -> SystemHistory:
        """The history of the events written so far (default site and system if not given)."""
        where = the_site or site()
        what = the_system or system(self.system_id, where.code)
        return SystemHistory(where, what, tuple(self.events))
