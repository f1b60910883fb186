"""The blank import workbook: one sheet per record type, its columns and one valid example row."""

from __future__ import annotations

from pathlib import Path

from ledger.inputs import COLUMNS, ORDER

# One example row per sheet; together they form a valid import (tests import the template).
EXAMPLES: dict[str, dict[str, str]] = {
    "sites": {
        "code": "DE-HAM",
        "name": "Hamburg Altona store",
        "country": "DE",
        "timezone": "Europe/Berlin",
        "regimes": "eu",
        "unit": "kg",
    },
    "technicians": {
        "name": "Ada Novak",
        "company": "Kältetechnik Elbe GmbH",
        "scheme": "EU 2015/2067 category I",
        "certificate": "DE-I-2041",
        "category": "I",
        "valid_from": "2019-05-01",
        "valid_to": "2029-04-30",
        "scope": "eu",
        "issuer": "Prüfstelle Elbe (example)",
    },
    "cylinders": {"id": "HAM-C-014", "refrigerant": "R-448A", "kind": "virgin", "tare": "13.6 kg"},
    "systems": {
        "site": "DE-HAM",
        "tag": "LT-RACK",
        "refrigerant": "R-448A",
        "charge": "145 kg",
        "application": "commercial-refrigeration",
        "in_service": "2021-06-01",
        "form": "central-plant",
        "description": "Low-temperature rack",
        "hermetic": "no",
        "detection_system": "yes",
        "location": "Plant room B",
        "tech": "Ada Novak",
    },
    "events": {
        "site": "DE-HAM",
        "tag": "LT-RACK",
        "kind": "add",
        "on": "2025-03-14",
        "cylinder": "HAM-C-014",
        "before": "48.2 kg",
        "after": "41.7 kg",
        "tech": "Ada Novak",
        "note": "top-up after repair of suction header",
    },
}


def columns(kind: str) -> list[str]:
    """The template's columns for a sheet: required first, then optional, each sorted."""
    required, optional = COLUMNS[kind]
    return sorted(required) + sorted(optional)


def write_template(path: Path) -> None:
    """Write the import template workbook."""
    from openpyxl import Workbook
    from openpyxl.styles import Font

    book = Workbook()
    book.remove(book.active)
    for kind in ORDER:
        sheet = book.create_sheet(kind)
        names = columns(kind)
        required = COLUMNS[kind][0]
        sheet.append(names)
        for cell, name in zip(sheet[1], names, strict=True):
            cell.font = Font(bold=name in required)
        example = EXAMPLES[kind]
        sheet.append([example.get(name, "") for name in names])
        for row in sheet.iter_rows(min_row=2):
            for cell in row:
                cell.data_type = "s"  # all text: dates and masses as typed, never reinterpreted
        sheet.freeze_panes = "A2"
        for i, name in enumerate(names, start=1):
            width = max(len(name), len(example.get(name, ""))) + 2
            sheet.column_dimensions[sheet.cell(1, i).column_letter].width = min(width, 40)
    notes = book.create_sheet("notes")
    notes.append(["Column layout: docs/import.md. Bold columns are required."])
    notes.append(["Masses carry a unit (2.5 kg, 5 lb 8 oz); dates are YYYY-MM-DD."])
    notes.append(["Local regulation and the competent authority govern."])
    book.save(path)
