"""CSV writers: one table per file, UTF-8 with a header row, values exact.

Dates are ISO days, masses and rates are plain decimals exactly as computed (no float noise,
no thousands separators), booleans ``yes``/empty. Text that a spreadsheet would read as a
formula gets a leading apostrophe (OWASP's advice for CSV injection). A CSV carries data only;
the caution is printed by the command that writes it and stands in the PDF and spreadsheet.
"""

from __future__ import annotations

import csv
from collections.abc import Mapping, Sequence
from datetime import date, datetime
from decimal import Decimal
from pathlib import Path
from typing import Any

from ledger.exports.common import BOOL, DATE, DATETIME, TEXT, Column, csv_safe, is_blank


def cell(value: Any, kind: str) -> str:
    """One value as CSV text."""
    if is_blank(value):
        return ""
    if kind == BOOL:
        return "yes" if value else ""
    if kind == DATE and isinstance(value, date | datetime):
        return value.isoformat()[:10]
    if kind == DATETIME and isinstance(value, datetime):
        return value.isoformat()
    if isinstance(value, Decimal):
        return format(value, "f")
    if isinstance(value, bool):
        return "yes" if value else ""
    if isinstance(value, int | float):
        return str(value)
    return csv_safe(str(value)) if kind == TEXT else str(value)


def write_csv(
    path: Path, columns: Sequence[Column], rows: Sequence[Mapping[str, Any]], *, header: str = "key"
) -> Path:
    """Write rows as CSV.

    Args:
        path: the file to write.
        columns: which keys, in which order, of which kind.
        rows: dicts keyed by column key.
        header: ``key`` for machine-friendly headers (the JSON keys) or ``label`` for the
            column headers with units.
    Returns:
        The path written.
    """
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    with path.open("w", newline="", encoding="utf-8") as fh:
        writer = csv.writer(fh)
        writer.writerow([c.key if header == "key" else c.header for c in columns])
        for row in rows:
            writer.writerow([cell(row.get(c.key), c.kind) for c in columns])
    return path


def write_annual_csv(path: Path, summary: Mapping[str, Any]) -> Path:
    """Write the annual loss summary's per-system table as CSV (one row per system)."""
    from ledger.exports.frames import annual_sheets

    sheet = next(s for s in annual_sheets(summary) if s.columns[1].key == "system")
    records = [{k: (None if is_blank(v) else v) for k, v in r.items()} for r in sheet.frame.to_dict("records")]
    return write_csv(path, sheet.columns, records, header="label")
