"""The due list as a file: spreadsheet, PDF or CSV.

``rows`` are the dicts of ``ledger.services.obligations.due`` (site, system, kind, due_on,
earliest_on, status, regime, basis, detail; more keys are ignored). Overdue rows are marked:
a sand tint with a dark left edge and a bold status in the spreadsheet and the PDF, and the
days overdue beside them.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from datetime import UTC, date, datetime, timedelta
from pathlib import Path
from typing import Any

from ledger import __version__
from ledger.exports.common import CAUTION, DATE, DATETIME, INT, TEXT, Column, fmt

CSV_COLUMNS: tuple[Column, ...] = (
    Column("due_on", "due", DATE),
    Column("earliest_on", "earliest", DATE),
    Column("status", "status", TEXT),
    Column("site", "site", TEXT),
    Column("system", "system", TEXT),
    Column("kind", "kind", TEXT),
    Column("regime", "regime", TEXT),
    Column("basis", "basis", TEXT),
    Column("detail", "detail", TEXT),
)


def _now(generated_at: datetime | None) -> datetime:
    return generated_at or datetime.now(UTC).replace(microsecond=0)


def write_due_csv(path: Path, rows: Sequence[Mapping[str, Any]]) -> Path:
    """Write the due list as CSV (headers are the JSON keys of ``refledger due --json``)."""
    from ledger.exports.csv import write_csv

    return write_csv(path, CSV_COLUMNS, rows)


def write_due_xlsx(
    path: Path, rows: Sequence[Mapping[str, Any]], as_of: date, *, generated_at: datetime | None = None
) -> Path:
    """Write the due list spreadsheet: a "due" sheet (frozen header, filter, dates as dates,
    overdue rows marked, days overdue) and a "notes" sheet with the caution."""
    from ledger.exports.frames import due_sheet
    from ledger.exports.xlsx import _book, write_notes, write_table

    wb = _book(f"Obligations due as of {as_of.isoformat()}", __version__)
    wb.remove(wb.active)
    write_table(wb.create_sheet("due"), due_sheet(rows, as_of))
    overdue = sum(1 for r in rows if r.get("status") == "overdue")
    write_notes(wb.create_sheet("notes"), f"Notes: obligations due as of {as_of.isoformat()}", [
        ("as of", as_of.isoformat()),
        ("rows", f"{len(rows)} open or overdue, {overdue} overdue"),
        ("marking", "overdue rows are tinted, edged and have their status in bold; "
         "'days overdue' counts from the due date to the as-of day"),
        ("generated", fmt(_now(generated_at), DATETIME)),
        ("tool version", f"refledger {__version__}"),
        ("caution", CAUTION),
    ])
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    wb.save(path)
    return path


def write_due_pdf(
    path: Path, rows: Sequence[Mapping[str, Any]], as_of: date, *, generated_at: datetime | None = None
) -> Path:
    """Write the due list PDF: key figures, then every row, overdue ones marked."""
    from ledger.exports.frames import due_sheet
    from ledger.exports.pdf import Col, Tile, write_list_pdf

    sheet = due_sheet(rows, as_of)
    data = sheet.frame.to_dict("records")
    overdue = [r for r in data if r["overdue"]]
    soon = [r for r in data if not r["overdue"] and (r["due_on"] - as_of).days <= 30]
    oldest = min((r["due_on"] for r in overdue), default=None)
    if oldest is not None:  # some row is overdue
        lead = f"{len(overdue)} overdue, the oldest due {oldest.isoformat()}"
    elif data:
        lead = f"Nothing overdue; next due {min(r['due_on'] for r in data).isoformat()}"
    else:
        lead = "Nothing open or overdue"
    columns = [Col("due", DATE, 0.75), Col("status", weight=0.7), Col("days over", INT, 0.55),
               Col("site", weight=0.7), Col("system", weight=0.9), Col("kind", weight=1.1),
               Col("earliest", DATE, 0.75), Col("regime", weight=0.6), Col("basis", weight=1.9),
               Col("detail", weight=3.0)]
    table_rows = [
        [r["due_on"], "OVERDUE" if r["overdue"] else r["status"], r["days_overdue"], r["site"],
         r["system"], r["kind"], r["earliest_on"], r["regime"], r["basis"], r["detail"]]
        for r in data
    ]
    now = _now(generated_at)
    return write_list_pdf(
        Path(path),
        title=f"Obligations due as of {as_of.isoformat()}",
        subtitle=f"{len(data)} open or overdue obligations, earliest due first",
        lead=lead,
        key_tiles=[
            Tile(str(len(overdue)), "overdue",
                 f"oldest due {oldest.isoformat()}" if oldest else "none", alert=bool(overdue)),
            Tile(str(len(soon)), "due within 30 days",
                 f"by {(as_of + timedelta(days=30)).isoformat()}"),
            Tile(str(len(data)), "open or overdue in all", "under the sites' regimes"),
        ],
        columns=columns,
        rows=table_rows,
        marked=[r["overdue"] for r in data],
        footer=(f"refledger {__version__} - generated {fmt(now, DATETIME)} - local regulation and "
                "the competent authority govern (see caution)"),
    )
