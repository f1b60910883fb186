"""Due-list files: CSV exact and safe, spreadsheet with dates and marks, PDF with the caution."""

from __future__ import annotations

import csv
from datetime import date, datetime
from pathlib import Path

import openpyxl

from ledger.exports.common import CAUTION
from ledger.exports.due import write_due_csv, write_due_pdf, write_due_xlsx
from tests.exports.test_pdf import first_page_is_not_blank, text_of

AS_OF = date(2026, 12, 1)
ROWS = [
    {"site": "GB-BRS", "system": "RACK-LT", "kind": "leak-check", "due_on": date(2026, 9, 24),
     "earliest_on": None, "status": "overdue", "regime": "gb",
     "basis": "Reg. (EU) 517/2014 as retained in GB Art 4(3) [checked]",
     "detail": "6-month leak check (50-500 t CO2e)", "caused_by": 12, "met_by": None},
    {"site": "US-CA", "system": None, "kind": "report", "due_on": date(2027, 3, 1),
     "earliest_on": date(2027, 1, 1), "status": "open", "regime": "us-ca",
     "basis": "17 CCR 95388 [secondary]", "detail": "=annual report (facility)"},
    {"site": "DE-HAM", "system": "LT-RACK", "kind": "follow-up-check", "due_on": date(2026, 12, 20),
     "earliest_on": date(2026, 12, 2), "status": "open", "regime": "eu",
     "basis": "Reg. (EU) 2024/573 Art 4(5) [secondary]", "detail": "after the repair of 2026-11-20"},
]


def test_due_csv(tmp_path: Path) -> None:
    path = write_due_csv(tmp_path / "due.csv", ROWS)
    with path.open(encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    assert list(rows[0]) == ["due_on", "earliest_on", "status", "site", "system", "kind", "regime",
                             "basis", "detail"]
    assert rows[0]["due_on"] == "2026-09-24" and rows[0]["earliest_on"] == ""
    assert rows[1]["system"] == ""
    assert rows[1]["detail"] == "'=annual report (facility)"  # formula prefix disarmed


def test_due_xlsx(tmp_path: Path) -> None:
    wb = openpyxl.load_workbook(write_due_xlsx(tmp_path / "due.xlsx", ROWS, AS_OF))
    assert wb.sheetnames == ["due", "notes"]
    ws = wb["due"]
    assert ws.freeze_panes == "A2" and ws.auto_filter.ref == "A1:J4"
    header = [c.value for c in ws[1]]
    assert header[:3] == ["due", "status", "days overdue"]
    assert ws.cell(2, 1).value == datetime(2026, 9, 24) and ws.cell(2, 1).number_format == "yyyy-mm-dd"
    assert ws.cell(2, 3).value == 68  # 24 Sep to 1 Dec 2026
    assert ws.cell(2, 2).font.bold and ws.cell(2, 1).fill.fgColor.rgb.endswith("F4E6CF")
    assert not ws.cell(3, 2).font.bold and ws.cell(3, 3).value is None
    assert ws.cell(3, 5).value == "(facility)"
    detail = ws.cell(3, header.index("detail") + 1)
    assert detail.value == "=annual report (facility)" and detail.data_type == "s"
    notes = {r[0]: r[1] for r in wb["notes"].iter_rows(values_only=True) if r[0]}
    assert notes["caution"] == CAUTION


def test_due_pdf(tmp_path: Path) -> None:
    path = write_due_pdf(tmp_path / "due.pdf", ROWS, AS_OF)
    text = text_of(path)
    assert "Obligations due as of 2026-12-01" in text
    assert "1 overdue, the oldest due 2026-09-24" in text
    assert "OVERDUE" in text and CAUTION in text
    first_page_is_not_blank(path)


def test_empty_due_list(tmp_path: Path) -> None:
    assert "Nothing open or overdue" in text_of(write_due_pdf(tmp_path / "e.pdf", [], AS_OF))
    wb = openpyxl.load_workbook(write_due_xlsx(tmp_path / "e.xlsx", [], AS_OF))
    assert wb["due"].max_row == 1
