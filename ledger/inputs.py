"""Parsing of typed values other than masses: days, SITE/TAG references, level lists.

Pure functions; each raises ``InputError`` naming the field and the value.
"""

from __future__ import annotations

import re
from datetime import date

from ledger.errors import InputError

_ISO_DAY = re.compile(r"\d{4}-\d{2}-\d{2}")


def parse_day(text: str, *, field: str = "--on") -> date:
    """Parse an ISO day (``2025-03-14``).

    Day-first or month-first forms are refused here: ``03/04/2025`` means different days
    on either side of the Atlantic, and a compliance record must not guess.
    """
    value = str(text).strip()
    if not _ISO_DAY.fullmatch(value):
        raise InputError(field, text, "is not a date in the form YYYY-MM-DD")
    try:
        return date.fromisoformat(value)
    except ValueError as exc:
        raise InputError(field, text, "is not a real calendar date") from exc


# Days a report or listing may be evaluated on: wide enough for any record and its deadlines,
# narrow enough that deadline arithmetic (years ahead of the day) stays inside Python's dates.
EVALUATION_FIRST = date(1900, 1, 1)
EVALUATION_LAST = date(2999, 12, 31)


def parse_evaluation_day(text: str, *, field: str) -> date:
    """A day to evaluate or report on (``--as-of``, ``--from``, ``--to``): ISO, within the range above."""
    day = parse_day(text, field=field)
    if not EVALUATION_FIRST <= day <= EVALUATION_LAST:
        raise InputError(field, text, f"is outside the days the ledger evaluates ({EVALUATION_FIRST.isoformat()} "
                         f"to {EVALUATION_LAST.isoformat()})")
    return day


def parse_system_ref(text: str, *, field: str = "SITE/TAG") -> tuple[str, str]:
    """Split ``SITE/TAG`` into its parts."""
    site, sep, tag = str(text).partition("/")
    if not sep or not site.strip() or not tag.strip():
        raise InputError(field, text, "must be written SITE/TAG, e.g. DE-HAM/RACK-1")
    return site.strip(), tag.strip()


def parse_code(text: str, *, field: str) -> str:
    """A code (site code, cylinder id, tag): non-empty, no slash, no surrounding spaces."""
    value = str(text).strip()
    if not value or "/" in value or len(value) > 100:
        raise InputError(field, text, "must be 1-100 characters without '/'")
    return value


# --- import sheets ---------------------------------------------------------------------
# The columns of each record type an import (CSV or workbook sheet) may carry; the import
# (services/importing.py), the backup and the blank template (exports/template.py) share them.

ORDER = ("sites", "technicians", "cylinders", "systems", "events")

COLUMNS: dict[str, tuple[frozenset[str], frozenset[str]]] = {
    # record type: (required columns, optional columns)
    "sites": (
        frozenset({"code", "name", "country"}),
        frozenset({"subdivision", "timezone", "regimes", "leak_rate_method", "unit"}),
    ),
    "technicians": (
        frozenset({"name", "scheme", "certificate"}),
        frozenset({"company", "category", "valid_from", "valid_to", "scope", "issuer"}),
    ),
    "cylinders": (frozenset({"id", "refrigerant", "kind"}), frozenset({"tare"})),
    "systems": (
        frozenset({"site", "tag", "refrigerant", "charge", "application", "in_service"}),
        frozenset(
            {
                "form",
                "description",
                "hermetic",
                "residential",
                "detection_system",
                "location",
                "maker",
                "model",
                "serial",
                "defrost_every_hours",
                "tech",
                "by",
                "recorded_at",
            }
        ),
    ),
    "events": (
        frozenset({"site", "tag", "kind", "on"}),
        frozenset(
            {
                "mass",
                "cylinder",
                "before",
                "after",
                "refrigerant",
                "charge",
                "result",
                "where",
                "method",
                "destination",
                "reclaimed",
                "tech",
                "by",
                "note",
                "recorded_at",
                "attachments",
                "voids",
                "reason",
                "facility",
                "facility_certificate",
            }
        ),
    ),
}
