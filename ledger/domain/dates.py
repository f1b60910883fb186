"""Deadline arithmetic, defined once for every regime.

* Calendar months: month addition clamped to the month's end. Twelve months after
  31 Jan 2025 is 31 Jan 2026; one month after 31 Jan 2025 is 28 Feb 2025; twelve months
  after 29 Feb 2024 is 28 Feb 2025. (Trade guidance of the 517/2014 era counts leak-check
  intervals date-exact: a check on 31 Jan is due again by the same date.)
* Days: plain day counts.
* "Per calendar quarter": the last day of the quarter.
"""

from __future__ import annotations

import calendar
from datetime import date, timedelta


def add_months(start: date, months: int) -> date:
    """Add calendar months, clamping the day to the end of the target month.

    Args:
        start: the day counted from.
        months: how many months to add (may be negative).
    Returns:
        The same day-of-month ``months`` later, or that month's last day if it is shorter.
    """
    index = start.year * 12 + (start.month - 1) + months
    year, month = divmod(index, 12)
    last = calendar.monthrange(year, month + 1)[1]
    return date(year, month + 1, min(start.day, last))


def add_days(start: date, days: int) -> date:
    """Add whole days."""
    return start + timedelta(days=days)


def quarter_end(day: date) -> date:
    """The last day of the calendar quarter holding ``day``."""
    last_month = ((day.month - 1) // 3) * 3 + 3
    return date(day.year, last_month, calendar.monthrange(day.year, last_month)[1])


def next_quarter_end(day: date) -> date:
    """The last day of the calendar quarter after the one holding ``day``."""
    return quarter_end(add_months(date(day.year, day.month, 1), 3))
