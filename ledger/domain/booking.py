"""One booking pass: a system's history folded once, read by every consumer.

`book(history)` applies voids, sorts the events that count by `EVENT_ORDER` and folds them
once into the state at the end of every day something happened. Rules, reports, import
checks and views read that `Booking` instead of folding events themselves, so they cannot
disagree about a system's state. `Booking.until(as_of)` is the same booking seen on a day:
later events left out, no second fold.

Semantics are exactly `effective_events` + `fold_days` + `state_of` of `ledger.domain.state`
(tests/domain/test_booking.py holds them equal).
"""

from __future__ import annotations

from bisect import bisect_right
from collections.abc import Sequence
from datetime import date
from operator import attrgetter

from ledger.domain.records import Event, Site, System, SystemHistory, SystemState
from ledger.domain.state import EMPTY_STATE, EVENT_ORDER, effective_events, fold_days

__all__ = ["EVENT_ORDER", "Booking", "Timeline", "book"]

_PERFORMED_ON = attrgetter("performed_on")


class Timeline:
    """A system's state on any day, folded in one pass over its events (on first use).

    Gives the same `SystemState` as `ledger.domain.state.state_of(events, day)` without
    folding the history again for every day asked about. Bookings share one Timeline between
    a history and its views (`Booking.until`).

    Args:
        events: effective events in EVENT_ORDER (`effective_events`).
    """

    __slots__ = ("events", "_days", "_states")

    def __init__(self, events: Sequence[Event]) -> None:
        self.events = tuple(events)
        self._days: list[date] | None = None
        self._states: list[SystemState] = []

    def _ensure(self) -> list[date]:
        if self._days is None:
            pairs = [(self.events[i].performed_on, st) for i, st in fold_days(self.events)]
            self._states = [st for _, st in pairs]
            self._days = [d for d, _ in pairs]
        return self._days

    @property
    def dates(self) -> tuple[date, ...]:
        """The distinct days something happened."""
        return tuple(self._ensure())

    def state(self, day: date, *, upto: int | None = None) -> SystemState:
        """The state at the end of ``day`` (of the first ``upto`` days only, if given)."""
        days = self._ensure()
        i = bisect_right(days, day, hi=len(days) if upto is None else upto)
        return EMPTY_STATE if i == 0 else self._states[i - 1]

    def day_count(self, as_of: date | None) -> int:
        """How many of the distinct days fall on or before ``as_of`` (all if None)."""
        days = self._ensure()
        return len(days) if as_of is None else bisect_right(days, as_of)


class Booking:
    """A system's history folded once: effective events (voids applied) in EVENT_ORDER and its
    state at the end of any day. Built by `book`; cheap views by `until`.

    Attributes:
        history: the history as given (site, system, raw events).
        events: the effective events in EVENT_ORDER (up to ``as_of`` for a view).
        as_of: the last day this view holds events of, or None for the whole history.
    """

    __slots__ = ("history", "events", "as_of", "timeline", "_upto")

    def __init__(self, history: SystemHistory, events: tuple[Event, ...], as_of: date | None,
                 timeline: Timeline) -> None:
        self.history = history
        self.events = events
        self.as_of = as_of
        self.timeline = timeline  # the fold of the whole history, shared by every view
        self._upto: int | None = None  # days of the timeline this view sees, once asked

    @property
    def site(self) -> Site:
        """The system's site."""
        return self.history.site

    @property
    def system(self) -> System:
        """The system's static facts."""
        return self.history.system

    @property
    def dates(self) -> tuple[date, ...]:
        """The distinct days something happened (in this view), in order."""
        return self.timeline.dates[: self._count()]

    def _count(self) -> int:
        if self._upto is None:
            self._upto = self.timeline.day_count(self.as_of)
        return self._upto

    def state(self, day: date) -> SystemState:
        """The state at the end of ``day`` (= ``state_of(events, day)``)."""
        return self.timeline.state(day, upto=self._count())

    def until(self, as_of: date) -> Booking:
        """This booking on ``as_of``: events after it left out, the fold shared (no re-fold)."""
        if self.as_of is not None and as_of >= self.as_of:
            return self
        events = self.events
        if events and events[-1].performed_on > as_of:
            events = events[: bisect_right(events, as_of, key=_PERFORMED_ON)]
        return Booking(self.history, events, as_of, self.timeline)


def book(history: SystemHistory) -> Booking:
    """Fold a system's history once.

    Args:
        history: the site, the system and all its events (voids included, any order).
    Returns:
        The Booking of the whole history; ``.until(as_of)`` gives it on a day.
    """
    events = effective_events(history.events)
    return Booking(history, events, None, Timeline(events))
