"""Leak rates of the US rules: the annualizing and rolling-average methods.

Both methods come from the definition of "leak rate" in 40 CFR 82.152 and the calculation
duty of 82.157(b) (the same arithmetic is used for 40 CFR 84 Subpart C):

* **annualizing**: rate % = added / full charge x 365 / d x 100, where d is the number of days
  since refrigerant was last added, or 365 if there was no earlier addition or it is longer
  ago than 365 days;
* **rolling average**: rate % = (refrigerant added over the 365 days ending on the day of the
  addition, or since the last successful follow-up verification test if that is shorter)
  / full charge x 100. The "since the last verification" part is from memory.

Arithmetic is exact: rates are computed as fractions and shown as ``Decimal`` (28 significant
digits). A rate **exceeds** a threshold only when it is strictly greater: 20.00 % does not
exceed a 20 % threshold.

Conventions of this module (ours, documented in docs/rules/README.md):

* Additions on the day the system was placed in service or retrofitted are part of the
  initial charge: they get a row but are not counted (the rule asks for no rate "right after
  a retrofit or a new install"), and nothing before that day is counted afterwards.
* Several additions on one day count as one: each row carries that day's running total, and
  the annualizing day count runs from the last earlier day with an addition.
* The 365-day window of the rolling method is the day of the addition and the 364 days
  before it; with ``since`` set, only additions strictly after that day count.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from datetime import date, timedelta
from decimal import Context, Decimal, localcontext
from fractions import Fraction
from types import MappingProxyType
from typing import Any

from ledger.domain.booking import Booking, book
from ledger.domain.records import (
    Application,
    EventId,
    EventKind,
    FollowUpResult,
    SystemHistory,
)

NG_PER_LB = Decimal(453_592_370_000)  # exact: the international avoirdupois pound (1959)
NG_PER_KG = Decimal(10**12)
YEAR_DAYS = 365  # both methods annualize to 365 days (40 CFR 82.152, "leak rate")

ANNUALIZING = "annualizing"
ROLLING = "rolling"
METHODS = (ANNUALIZING, ROLLING)  # a facility uses one method for all its appliances

# Leak-rate thresholds by application, 40 CFR 82.157(c)(2) (checked against the text).
# Transport refrigeration falls under "all other appliances".
THRESHOLD_PERCENT: Mapping[Application, Decimal] = MappingProxyType(
    {
        Application.COMMERCIAL_REFRIGERATION: Decimal(20),
        Application.INDUSTRIAL_PROCESS: Decimal(30),
        Application.COMFORT_COOLING: Decimal(10),
        Application.TRANSPORT_REFRIGERATION: Decimal(10),
        Application.OTHER: Decimal(10),
    }
)

_SHOW = Context(prec=28)  # digits kept when a rate is shown as Decimal; comparisons stay exact


@dataclass(frozen=True, slots=True)
class LeakRate:
    """The leak rate computed at one addition of refrigerant."""

    event_id: EventId
    added_on: date
    added_ng: int  # this event's mass
    day_total_ng: int  # all counted additions that day up to and including this event
    full_charge_ng: int
    annualizing_percent: Decimal | None  # None when not counted or the full charge is unknown
    rolling_percent: Decimal | None
    method: str  # the facility's method; ``percent`` is that method's rate
    percent: Decimal | None
    threshold_percent: Decimal
    exceeded: bool  # percent strictly greater than threshold_percent
    counted: bool  # False: initial charge (in-service / retrofit day) or system not in service
    note: str = ""


def threshold_percent(application: Application) -> Decimal:
    """The leak-rate threshold of an application class, 40 CFR 82.157(c)(2).

    Args:
        application: the system's application class.
    Returns:
        20 for commercial refrigeration, 30 for industrial process refrigeration, 10 otherwise.
    """
    return THRESHOLD_PERCENT[application]


def _show(value: Fraction) -> Decimal:
    with localcontext(_SHOW):
        return Decimal(value.numerator) / Decimal(value.denominator)


def _check_charge(full_charge_ng: int) -> None:
    if full_charge_ng <= 0:
        raise ValueError(f"full charge must be positive, got {full_charge_ng} ng")


def annualizing_fraction(
    added_ng: int, full_charge_ng: int, days_since_previous_add: int | None
) -> Fraction:
    """Exact annualizing-method leak rate in percent, as a fraction (see `annualizing_rate`)."""
    _check_charge(full_charge_ng)
    if days_since_previous_add is not None and days_since_previous_add < 1:
        raise ValueError("days since the previous addition must be at least 1 "
                         "(same-day additions count as one)")
    days = YEAR_DAYS if days_since_previous_add is None else min(days_since_previous_add, YEAR_DAYS)
    return Fraction(added_ng, full_charge_ng) * Fraction(YEAR_DAYS, days) * 100


def annualizing_rate(
    added_ng: int, full_charge_ng: int, days_since_previous_add: int | None
) -> Decimal:
    """Leak rate by the annualizing method, 40 CFR 82.152 ("leak rate").

    Args:
        added_ng: refrigerant added (one day's additions together).
        full_charge_ng: the appliance's full charge; must be positive.
        days_since_previous_add: days since refrigerant was last added; None when there was no
            earlier addition. Values over 365 count as 365.
    Returns:
        The rate in percent: added / full x 365 / min(days, 365) x 100.
    Raises:
        ValueError: full charge not positive, or a day count below 1.
    """
    return _show(annualizing_fraction(added_ng, full_charge_ng, days_since_previous_add))


def rolling_fraction(
    additions: Sequence[tuple[date, int]], on: date, full_charge_ng: int, since: date | None
) -> Fraction:
    """Exact rolling-average leak rate in percent, as a fraction (see `rolling_rate`)."""
    _check_charge(full_charge_ng)
    first = on - timedelta(days=YEAR_DAYS - 1)
    total = sum(
        mass
        for day, mass in additions
        if first <= day <= on and (since is None or day > since)
    )
    return Fraction(total, full_charge_ng) * 100


def rolling_rate(
    additions: Sequence[tuple[date, int]], on: date, full_charge_ng: int, since: date | None
) -> Decimal:
    """Leak rate by the rolling-average method, 40 CFR 82.152 ("leak rate").

    Args:
        additions: (day, mass_ng) of each addition; order does not matter.
        on: the day of the addition the rate is computed for.
        full_charge_ng: the appliance's full charge; must be positive.
        since: the day of the last successful follow-up verification test, if any; only
            additions after it count (from memory: "if shorter than 365 days").
    Returns:
        The rate in percent: mass added in the 365 days ending ``on`` (``on`` and the 364 days
        before it) and after ``since`` / full charge x 100.
    Raises:
        ValueError: full charge not positive.
    """
    return _show(rolling_fraction(additions, on, full_charge_ng, since))


def exceeds(percent: Decimal | Fraction, threshold: Decimal | int) -> bool:
    """True when a rate exceeds a threshold: strictly greater (20 % does not exceed 20 %)."""
    return Fraction(percent) > Fraction(threshold)


def leak_rates(history: SystemHistory | Booking, method: str) -> tuple[LeakRate, ...]:
    """The leak rate at every addition of refrigerant to one system, both methods.

    Args:
        history: the system, its site and its events (booked here), or its Booking.
        method: ``annualizing`` or ``rolling``; decides ``percent`` and ``exceeded``.
    Returns:
        One row per ADD event, in date order.
    Raises:
        ValueError: unknown method.
    """
    if method not in METHODS:
        raise ValueError(f"leak-rate method {method!r} is not one of {', '.join(METHODS)}")
    threshold = threshold_percent(history.system.application)
    charge_ng = 0
    in_service = False
    charged_on: date | None = None  # in-service or retrofit day: the initial charge
    passed_on: date | None = None  # last successful follow-up verification test
    counted: list[tuple[date, int]] = []
    rows: list[LeakRate] = []
    for e in (history if isinstance(history, Booking) else book(history)).events:
        match e.kind:
            case EventKind.IN_SERVICE:
                in_service, charged_on, charge_ng = True, e.performed_on, e.charge_ng or 0
                counted, passed_on = [], None
            case EventKind.RETROFIT:
                charged_on, charge_ng = e.performed_on, e.charge_ng or charge_ng
                counted, passed_on = [], None
            case EventKind.CHARGE_REVISED:
                charge_ng = e.charge_ng or charge_ng
            case EventKind.RETIRE:
                in_service = False
            case EventKind.FOLLOW_UP if e.result == FollowUpResult.PASS:
                passed_on = e.performed_on
            case EventKind.ADD:
                rows.append(
                    _row(e.id, e.performed_on, e.mass_ng or 0, charge_ng, in_service, charged_on,
                         passed_on, counted, method, threshold)
                )
            case _:
                pass
    return tuple(rows)


def _row(
    event_id: EventId,
    on: date,
    mass_ng: int,
    charge_ng: int,
    in_service: bool,
    charged_on: date | None,
    passed_on: date | None,
    counted: list[tuple[date, int]],
    method: str,
    threshold: Decimal,
) -> LeakRate:
    def skipped(note: str) -> LeakRate:
        return LeakRate(event_id, on, mass_ng, mass_ng, charge_ng, None, None, method, None,
                        threshold, False, False, note)

    if not in_service or charged_on is None:
        return skipped("system not in service: not a leak-rate addition")
    if on <= charged_on:
        return skipped("part of the initial charge (in-service or retrofit day): not counted")
    counted.append((on, mass_ng))
    if charge_ng <= 0:
        return LeakRate(event_id, on, mass_ng, mass_ng, charge_ng, None, None, method, None,
                        threshold, False, True, "full charge unknown: no rate")
    day_total = sum(mass for day, mass in counted if day == on)
    earlier = [day for day, _ in counted if day < on]
    days = (on - max(earlier)).days if earlier else None
    annual = annualizing_fraction(day_total, charge_ng, days)
    rolling = rolling_fraction(counted, on, charge_ng, passed_on)
    chosen = annual if method == ANNUALIZING else rolling
    return LeakRate(
        event_id=event_id,
        added_on=on,
        added_ng=mass_ng,
        day_total_ng=day_total,
        full_charge_ng=charge_ng,
        annualizing_percent=_show(annual),
        rolling_percent=_show(rolling),
        method=method,
        percent=_show(chosen),
        threshold_percent=threshold,
        exceeded=exceeds(chosen, threshold),
        counted=True,
    )


def leak_rates_json(history: SystemHistory | Booking, as_of: date) -> list[dict[str, Any]]:
    """Leak-rate rows up to ``as_of`` as plain data for views (the site's own method).

    Args:
        history: one system's history.
        as_of: additions after this day are left out.
    Returns:
        One dict per addition: on, added_kg, full_charge_kg, annualizing_percent,
        rolling_percent, method, percent, threshold_percent, exceeded, counted, note.
    """
    method = history.site.leak_rate_method
    if method not in METHODS:
        method = ANNUALIZING
    return [
        {
            "event_id": r.event_id,
            "on": r.added_on,
            "added_kg": Decimal(r.added_ng) / NG_PER_KG,
            "full_charge_kg": Decimal(r.full_charge_ng) / NG_PER_KG,
            "annualizing_percent": r.annualizing_percent,
            "rolling_percent": r.rolling_percent,
            "method": r.method,
            "percent": r.percent,
            "threshold_percent": r.threshold_percent,
            "exceeded": r.exceeded,
            "counted": r.counted,
            "note": r.note,
        }
        for r in leak_rates(history, method)
        if r.added_on <= as_of
    ]
