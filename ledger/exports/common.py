"""What every report shares: the caution, column kinds, safe text, number formatting, palette.

Imports only the standard library, so the CLI can print ``CAUTION`` without loading a writer.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from datetime import date, datetime
from decimal import ROUND_HALF_UP, Decimal
from typing import Any

# The note every report carries (design §8): PDFs print it, spreadsheets put it on their notes
# sheet, JSON output has it as ``caution``.
CAUTION = (
    "Local regulation and the competent authority govern; schedules computed here are an aid "
    "to be checked. Refrigerant work needs certified personnel; flammable (A2L/A2/A3) and toxic "
    "(B-class, e.g. ammonia) refrigerants carry safety duties (ventilation, detection, occupancy "
    "limits) outside this tool."
)

# Characters that make a spreadsheet (or a program importing a CSV) read a cell as a formula.
FORMULA_PREFIXES = ("=", "+", "-", "@", "\t", "\r")

# Column kinds: how a value is stored, formatted and totalled.
TEXT = "text"  # free text (user-supplied text is guarded against formula injection)
DATE = "date"  # a calendar day
DATETIME = "datetime"  # an aware UTC time, shown as ISO text
# An event entered more than this many days after the day it records is marked as entered late
# on logbooks (common practice, no source: a week covers a technician's paperwork round).
LATE_ENTRY_DAYS = 7
KG = "kg"  # mass in kg, three decimals shown (the gram)
TONNES = "t"  # t CO2e, three decimals shown
PERCENT = "percent"  # a percentage as a number (23.5 means 23.5 %), one decimal shown
INT = "int"  # a count
NUMBER = "number"  # any other number (GWP), shown as stored
BOOL = "bool"  # yes / blank
KINDS = (TEXT, DATE, DATETIME, KG, TONNES, PERCENT, INT, NUMBER, BOOL)

# Own neutral palette: ink, muted greys and one blue-grey accent; overdue rows get a pale warm
# sand tint plus a bold marker in the status cell, so the mark survives black-and-white print.
INK = "#1d232a"
MUTED = "#5b6570"
RULE = "#c9ced4"
HEADER_FILL = "#e7eaee"
ACCENT = "#35566e"
ACCENT_LIGHT = "#9bb0c0"
OVERDUE_FILL = "#f4e6cf"
VOIDED_INK = "#8a9096"
OVERDUE_MARK = "OVERDUE"


@dataclass(frozen=True, slots=True)
class Column:
    """One column of a report table.

    ``total``: "sum" for a SUM over the rows, ``("ratio", numerator key, denominator key,
    factor)`` for a ratio of two totals, or None.
    """

    key: str
    header: str  # with the unit, e.g. "added (kg)"
    kind: str = TEXT
    total: str | tuple[str, str, str, int] | None = None
    width: int | None = None  # spreadsheet width in characters; None: from the content


def is_blank(value: Any) -> bool:
    """True for None, NaN and pandas' missing markers (without importing pandas)."""
    if value is None:
        return True
    if isinstance(value, float) and math.isnan(value):
        return True
    return type(value).__name__ in ("NAType", "NaTType")


def needs_guard(text: str) -> bool:
    """True when a text would be read as a formula by a spreadsheet."""
    return text.startswith(FORMULA_PREFIXES)


def csv_safe(text: str) -> str:
    """Text for a CSV cell: a leading apostrophe disarms a formula prefix (OWASP advice)."""
    return "'" + text if needs_guard(text) else text


def to_number(value: Any) -> float | int | None:
    """A Decimal/int/float as a spreadsheet number (ints stay ints), None stays None."""
    if is_blank(value):
        return None
    if isinstance(value, bool):
        return int(value)
    if isinstance(value, int):
        return value
    if isinstance(value, Decimal):
        return int(value) if value == value.to_integral_value() else float(value)
    return float(value)


def in_unit(kg: Any, unit: str) -> Decimal | None:
    """A mass given in kg, in a site's display unit (kg or lb; exact Decimal, None stays None)."""
    if kg is None:
        return None
    from ledger.units import NG_PER_KG, NG_PER_LB

    return Decimal(kg) * NG_PER_KG / NG_PER_LB if unit == "lb" else Decimal(kg)


def gwp_text(value: Any) -> str:
    """A GWP as its table gives it, never rounded: 0.501 stays 0.501, 3922 stays 3,922.

    A GWP below 1 (R-1234yf 0.501 under Reg. (EU) 2024/573 Annex II) rounded to a whole
    number would read 1 or 0, neither of which the table says.
    """
    if is_blank(value):
        return ""
    number = Decimal(str(value)) if isinstance(value, float) else Decimal(value)
    return f"{number.normalize():,f}"


def fmt(value: Any, kind: str, places: int | None = None) -> str:
    """A value as display text for PDFs and text output (rounded half-up for display only)."""
    if is_blank(value):
        return ""
    if kind in (KG, TONNES, PERCENT, NUMBER):
        default = {KG: 3, TONNES: 3, PERCENT: 1, NUMBER: 0}[kind]
        q = Decimal(1).scaleb(-(default if places is None else places))
        number = Decimal(str(value)) if isinstance(value, float) else Decimal(value)
        text = f"{number.quantize(q, rounding=ROUND_HALF_UP):,}"
        return text
    if kind == INT:
        return f"{int(value):,}"
    if kind == BOOL:
        return "yes" if value else ""
    if kind == DATE and isinstance(value, date | datetime):
        return value.isoformat()[:10]
    if kind == DATETIME and isinstance(value, datetime):
        return value.strftime("%Y-%m-%d %H:%M UTC")
    return str(value)


def short_hash(digest: str | None, n: int = 12) -> str:
    """The first characters of a hash, for tables (footers print the whole hash)."""
    return (digest or "")[:n]


# How the annual summary's figures are defined; printed on the notes sheet and in the PDF.
ANNUAL_CONVENTIONS: tuple[tuple[str, str], ...] = (
    ("added", "every addition of refrigerant in the year (kg), as recorded"),
    ("initial charge", "additions on the day a system was placed in service or retrofitted; "
     "part of its charge, not a loss"),
    ("leak rate", "additions excluding initial charges / full charge x 100; the full charge is "
     "the one held on 31 December, or on the last day in service for a system retired or "
     "retrofitted in the year"),
    ("CO2e of additions", "additions excluding initial charges x GWP of the refrigerant held "
     "that day / 1000, under the basis named"),
    ("net loss", "material balance per system: full charge on 1 January + charges of units "
     "placed in service + additions excluding initial charges - recovered - full charge on "
     "31 December"),
    ("recovered", "recover events and the mass recovered at retirement, by destination"),
    ("125 % or more added", "additions excluding initial charges of at least 125 % of the full "
     "charge in the calendar year (the US 40 CFR 82.157(j) test, shown for every system as an "
     "indicator; only US regimes attach a report duty to it)"),
    ("leak checks required", "periodic leak-check and leak-inspection obligations due in the "
     "year under the site's regimes"),
    ("leak checks done", "leak-check events recorded in the year"),
    ("missed / overdue", "obligations due in the year and not met on the evaluation day"),
    ("chain digest", "SHA-256 over '<system id>:<chain head>' lines of every system in scope; "
     "recompute it from the ledger to tie this report to the records"),
)

def __getattr__(name: str) -> Any:
    # ART6_MAP moved to the regime that declares it (`ledger.rules.eu.RECORD_ITEMS`, asked for
    # through `ledger.rules.site_profile`); the old name still reads it, importing the rules
    # only when used so that a bare `import ledger.exports.common` stays cheap.
    if name == "ART6_MAP":
        from ledger.rules.eu import RECORD_ITEMS

        return RECORD_ITEMS
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def report_lines(check: Mapping[str, Any]) -> list[str]:
    """The integrity lines every report prints from ``integrity.report_check`` output: NOT
    VERIFIED first when anything failed, then the verification and the checkpoint that covers
    the report (or that none does yet)."""
    lines = [f"NOT VERIFIED: {p}" for p in check["problems"]]
    if check["verified"]:
        lines.append(f"Verified now: {check['systems']} chain(s) recomputed, records and guards intact.")
    cp = check["checkpoint"]
    if cp is None or not cp["covers"]:
        lines.append("No signed checkpoint covers this report yet (see `refledger checkpoint`).")
    else:
        lines.append(f"Covered by checkpoint {cp['id']} of {cp['made_at'][:19].replace('T', ' ')} UTC "
                     f"(key {cp['key_id']}, Merkle root {cp['merkle_root'][:16]}...): "
                     f"{cp['covers']} of {cp['of']} system chain(s) as they were then.")
    return lines


def recorded_text(e: Mapping[str, Any]) -> str:
    """Who entered an event, when (UTC) and its hash prefix; an entry made more than
    ``LATE_ENTRY_DAYS`` after the day it records says how many days later (back-dating shows)."""
    at = e.get("recorded_at")
    parts = [e.get("recorded_by") or "-"]
    if at is not None:
        parts.append(fmt(at, DATETIME))
        on = e.get("on") or e.get("performed_on")
        if on is not None and (at.date() - on).days > LATE_ENTRY_DAYS:
            parts.append(f"entered {(at.date() - on).days} days after")
    if e.get("chain_hash"):
        parts.append(f"#{short_hash(e['chain_hash'], 10)}")
    return ", ".join(parts)
