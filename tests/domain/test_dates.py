"""Deadline arithmetic (ledger.domain.dates), as design.md §4 defines it.

Check values are hand-worked from the calendar; the date-exact counting of 12-month
intervals is the trade guidance of the 517/2014 era (reference-notes.md, "Interval counting").
"""

from __future__ import annotations

import pytest
from hypothesis import given
from hypothesis import strategies as st

from ledger.domain.dates import add_days, add_months, next_quarter_end, quarter_end
from tests.domain import D


def test_twelve_months_after_31_january_is_31_january():
    # reference-notes.md "Interval counting: date-exact"; design.md §4
    assert add_months(D(2025, 1, 31), 12) == D(2026, 1, 31)


def test_one_month_after_31_january_is_end_of_february():
    # design.md §4: month addition clamped to month end (calendar: 2025 is not a leap year)
    assert add_months(D(2025, 1, 31), 1) == D(2025, 2, 28)


def test_one_month_after_31_january_in_a_leap_year_is_29_february():
    # calendar: 2024 is a leap year
    assert add_months(D(2024, 1, 31), 1) == D(2024, 2, 29)


def test_twelve_months_after_29_february_is_28_february():
    # design.md §4: "after 29 Feb 2024 = 28 Feb 2025"
    assert add_months(D(2024, 2, 29), 12) == D(2025, 2, 28)


def test_forty_eight_months_after_29_february_is_29_february():
    # calendar: 2028 is a leap year
    assert add_months(D(2024, 2, 29), 48) == D(2028, 2, 29)


@pytest.mark.parametrize(
    ("start", "months", "expected"),
    [
        (D(2025, 8, 31), 6, D(2026, 2, 28)),  # hand-worked: August + 6 = February, clamped
        (D(2025, 3, 31), 3, D(2025, 6, 30)),  # hand-worked: June has 30 days
        (D(2025, 11, 15), 3, D(2026, 2, 15)),  # hand-worked: across the year end
        (D(2025, 3, 31), -1, D(2025, 2, 28)),  # hand-worked: backwards, clamped
        (D(2025, 5, 10), 24, D(2027, 5, 10)),  # hand-worked: doubled 12-month interval
    ],
)
def test_add_months_examples(start, months, expected):
    assert add_months(start, months) == expected


def test_add_days_counts_plain_days():
    # hand-worked: 30 days after 15 Feb 2024 (leap year: 29 days in February)
    assert add_days(D(2024, 2, 15), 30) == D(2024, 3, 16)
    # hand-worked: 14 days after 20 Dec 2025
    assert add_days(D(2025, 12, 20), 14) == D(2026, 1, 3)


@pytest.mark.parametrize(
    ("day", "end"),
    [
        (D(2025, 1, 1), D(2025, 3, 31)),  # calendar quarters: Q1 ends 31 March
        (D(2025, 3, 31), D(2025, 3, 31)),
        (D(2025, 4, 1), D(2025, 6, 30)),  # Q2 ends 30 June
        (D(2025, 8, 15), D(2025, 9, 30)),  # Q3 ends 30 September
        (D(2025, 12, 31), D(2025, 12, 31)),  # Q4 ends 31 December
    ],
)
def test_quarter_end(day, end):
    assert quarter_end(day) == end


def test_next_quarter_end():
    # calendar: the quarter after Q4 2025 is Q1 2026
    assert next_quarter_end(D(2025, 11, 20)) == D(2026, 3, 31)
    assert next_quarter_end(D(2025, 3, 31)) == D(2025, 6, 30)


@given(st.dates(min_value=D(1990, 1, 1), max_value=D(2090, 12, 31)), st.integers(0, 240))
def test_add_months_never_goes_back_and_keeps_the_day_when_it_can(start, months):
    # property of the definition in design.md §4
    end = add_months(start, months)
    assert end >= start
    assert (end.year * 12 + end.month) - (start.year * 12 + start.month) == months
    assert end.day == start.day or end.day < start.day


@given(st.dates(min_value=D(1990, 1, 1), max_value=D(2090, 12, 31)),
       st.dates(min_value=D(1990, 1, 1), max_value=D(2090, 12, 31)), st.integers(0, 60))
def test_add_months_is_monotone_in_its_start(a, b, months):
    # property the schedules rely on: a later start never gives an earlier due date
    lo, hi = sorted((a, b))
    assert add_months(lo, months) <= add_months(hi, months)
