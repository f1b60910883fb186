"""Spreadsheets: frozen headers, filters, real dates and numbers, formula totals, safe text."""

from __future__ import annotations

from datetime import UTC, date, datetime
from pathlib import Path
from typing import Any

import openpyxl

from ledger.domain.records import (
    Application,
    Basis,
    Confidence,
    EquipmentForm,
    Event,
    EventKind,
    Obligation,
    ObligationKind,
    ObligationStatus,
    Site,
    System,
    SystemHistory,
)
from ledger.exports.common import CAUTION
from ledger.exports.xlsx import write_annual_xlsx, write_logbook_xlsx
from ledger.reference import load_reference
from ledger.services import reporting

KG = 10**12  # ng per kg
REF = load_reference()
GENERATED = datetime(2026, 1, 5, 9, 30, tzinfo=UTC)
SITE = Site(1, "DE-HAM", "Hamburg store", "DE", None, "Europe/Berlin", ("eu",))
US = Site(2, "US-TX", "Dallas store", "US", "US-TX", "America/Chicago", ("us-82f", "us-84c"),
          mass_unit="lb")


def sample_histories() -> list[SystemHistory]:
    """Three systems over 2024-2025: a leaking rack (with a voided entry), a retired unit, a US AC."""
    rack = System(1, "DE-HAM", "LT-RACK", "Low-temperature rack",
                  Application.COMMERCIAL_REFRIGERATION, EquipmentForm.CENTRAL_PLANT)
    unit = System(2, "DE-HAM", "CU-1", "Dairy condensing unit",
                  Application.COMMERCIAL_REFRIGERATION, EquipmentForm.CONDENSING_UNIT)
    ac = System(3, "US-TX", "RTU-2", "Rooftop unit", Application.COMFORT_COOLING, EquipmentForm.SPLIT)
    tech = {"technician": "Ada Novak", "company": "Kalt GmbH",
            "certificate": "EU 2015/2067 cat I DE-I-2041 (I)"}

    def e(id_: int, sid: int, kind: EventKind, on: date, **kw: Any) -> Event:
        return Event(id_, sid, kind, on, chain_hash=f"{id_:064x}", **kw)

    return [
        SystemHistory(SITE, rack, (
            e(1, 1, EventKind.IN_SERVICE, date(2021, 6, 1), refrigerant="R-448A", charge_ng=145 * KG),
            e(2, 1, EventKind.CHECK, date(2025, 3, 1), result="leak-found", location="suction header",
              method="electronic detector", **tech),
            e(3, 1, EventKind.REPAIR, date(2025, 3, 2), location="suction header", **tech),
            e(4, 1, EventKind.ADD, date(2025, 3, 2), mass_ng=65 * KG, note="=HYPERLINK(\"x\")", **tech),
            e(5, 1, EventKind.VOID, date(2025, 3, 2), voids_id=4, reason="typed 65 kg, was 6.5 kg"),
            e(6, 1, EventKind.ADD, date(2025, 3, 2), mass_ng=6_500_000_000_000, cylinder_id="HAM-C-014",
              cylinder_before_ng=48_200_000_000_000, cylinder_after_ng=41_700_000_000_000, reclaimed=True, **tech),
            e(7, 1, EventKind.ADD, date(2025, 8, 14), mass_ng=12 * KG, note="+ top-up", **tech),
        )),
        SystemHistory(SITE, unit, (
            e(8, 2, EventKind.IN_SERVICE, date(2012, 1, 1), refrigerant="R-404A", charge_ng=8 * KG),
            e(9, 2, EventKind.RETIRE, date(2025, 9, 1), mass_ng=7 * KG, destination="destruction",
              **tech),
        )),
        SystemHistory(US, ac, (
            e(10, 3, EventKind.IN_SERVICE, date(2016, 4, 18), refrigerant="R-410A",
              charge_ng=11_793_402_000_000),
            e(11, 3, EventKind.ADD, date(2025, 3, 11), mass_ng=8_175_000_000_000),
            e(12, 3, EventKind.ADD, date(2025, 9, 9), mass_ng=9_309_000_000_000),
        )),
    ]


BASIS = Basis("Reg. (EU) 2024/573 Art 5(1)", Confidence.SECONDARY)
OBLIGATIONS = [
    Obligation("eu", ObligationKind.LEAK_CHECK, date(2025, 6, 1), BASIS, ObligationStatus.OVERDUE,
               system_id=1, detail="6-month leak check"),
    Obligation("eu", ObligationKind.FOLLOW_UP_CHECK, date(2025, 4, 2), BASIS, ObligationStatus.MET,
               system_id=1, met_by=7, detail="follow-up check within one month"),
    Obligation("eu", ObligationKind.LEAK_CHECK, date(2026, 1, 31), BASIS, ObligationStatus.OPEN,
               system_id=1, detail="6-month leak check"),
]


def sample_summary() -> dict[str, Any]:
    return reporting.annual_data(sample_histories(), REF, year=2025, basis="eu",
                                 obligations=OBLIGATIONS, generated_at=GENERATED)


def sample_logbook(index: int = 0) -> dict[str, Any]:
    h = sample_histories()[index]
    return reporting.logbook_data(h, REF, from_on=None, to_on=date(2025, 12, 31),
                                  obligations=OBLIGATIONS, cylinders={}, generated_at=GENERATED)


def _rows(ws) -> list[tuple]:  # type: ignore[no-untyped-def]
    return list(ws.iter_rows(values_only=True))


def test_annual_workbook_structure(tmp_path: Path) -> None:
    s = sample_summary()
    wb = openpyxl.load_workbook(write_annual_xlsx(tmp_path / "annual.xlsx", s))
    assert wb.sheetnames == ["estate", "sites", "refrigerants", "systems", "scope 1",
                             "scope 1 detail", "obligations", "months", "years", "notes"]
    for name in wb.sheetnames[:-1]:
        ws = wb[name]
        assert ws.freeze_panes in ("A2", "C2"), name
        assert ws.auto_filter.ref and ws.auto_filter.ref.startswith("A1:"), name
        assert all(c.value for c in ws[1]), name  # every column has a header
    systems = wb["systems"]
    headers = [c.value for c in systems[1]]
    assert "added (kg)" in headers and "CO2e of additions (t)" in headers
    # totals row: formulas over the rows above
    last = systems.max_row
    assert systems.cell(last, 1).value == "total"
    col = headers.index("added (kg)") + 1
    letter = openpyxl.utils.get_column_letter(col)
    assert systems.cell(last, col).value == f"=SUM({letter}2:{letter}{last - 1})"
    rate = systems.cell(last, headers.index("leak rate (% of full charge)") + 1).value
    assert rate.startswith("=IF(") and "*100" in rate
    # the autofilter covers the rows but not the totals
    assert systems.auto_filter.ref.endswith(str(last - 1))
    # numbers are numbers, with a display format
    cell = systems.cell(2, col)
    assert isinstance(cell.value, int | float) and cell.number_format == "#,##0.000"
    # dates are dates
    obligations = wb["obligations"]
    due = obligations.cell(2, 1)
    assert isinstance(due.value, datetime) and due.number_format == "yyyy-mm-dd"
    # missed obligations are marked (fill) and sorted by due date
    states = [r[5] for r in _rows(obligations)[1:]]
    assert "missed" in states
    missed_row = states.index("missed") + 2
    assert obligations.cell(missed_row, 1).fill.fgColor.rgb.endswith("F4E6CF")
    # notes: basis, conventions, sources and the caution
    notes = {r[0]: r[1] for r in _rows(wb["notes"]) if r[0]}
    assert notes["caution"] == CAUTION
    assert "Table 7.9" in " ".join(v for k, v in notes.items() if k.startswith("factors"))
    assert "eu" in notes["GWP basis"]


def test_logbook_workbook_keeps_voided_events_and_chain_head(tmp_path: Path) -> None:
    book = sample_logbook()
    wb = openpyxl.load_workbook(write_logbook_xlsx(tmp_path / "lb.xlsx", book))
    assert wb.sheetnames == ["system", "events", "obligations", "notes"]
    events = _rows(wb["events"])
    header = events[0]
    kinds = [r[header.index("kind")] for r in events[1:]]
    assert kinds.count("refrigerant added") == 3 and "correction (void)" in kinds
    voided = [r for r in events[1:] if r[header.index("voided")]]
    assert any("VOIDED by event 5: typed 65 kg" in r[header.index("voided")] for r in voided)
    facts = {r[0]: r[1] for r in _rows(wb["system"])[1:]}
    assert facts["chain head"] == f"{7:064x}"
    notes = {r[0]: r[1] for r in _rows(wb["notes"]) if r[0]}
    assert f"{7:064x}" in notes["chain head"] and notes["caution"] == CAUTION
    # a US system also gets its leak-rate sheet
    us = openpyxl.load_workbook(write_logbook_xlsx(tmp_path / "us.xlsx", sample_logbook(2)))
    assert "leak rates" in us.sheetnames


def test_formula_injection_is_written_as_text(tmp_path: Path) -> None:
    wb = openpyxl.load_workbook(write_logbook_xlsx(tmp_path / "lb.xlsx", sample_logbook()))
    ws = wb["events"]
    note = [c.value for c in ws[1]].index("note") + 1
    by_text = {ws.cell(r, note).value: ws.cell(r, note) for r in range(2, ws.max_row + 1)}
    for text in ('=HYPERLINK("x")', "+ top-up"):
        cell = by_text[text]
        assert cell.data_type == "s", text
        assert cell.quotePrefix, text
    # and in the raw XML the cell holds a string, not a <f> formula
    import zipfile

    with zipfile.ZipFile(tmp_path / "lb.xlsx") as z:
        sheet = next(n for n in z.namelist() if n.startswith("xl/worksheets/sheet2"))
        xml = z.read(sheet).decode()
    assert "<f>HYPERLINK" not in xml


def test_put_text_guards_every_formula_prefix() -> None:
    from openpyxl import Workbook

    from ledger.exports.xlsx import put_text

    ws = Workbook().active
    for i, text in enumerate(["=1+1", "+1", "-1", "@SUM(A1)", "plain"], start=1):
        cell = put_text(ws, i, 1, text)
        assert cell.value == text
        assert cell.data_type == "s"
        assert cell.quotePrefix is (text != "plain")


def test_number_widths_match_formatting_every_value() -> None:
    """Widths come from the largest and smallest number only; that is the longest display text."""
    import random
    from decimal import Decimal

    from ledger.exports.common import INT, KG, NUMBER, PERCENT, TONNES, fmt
    from ledger.exports.xlsx import _number_width

    rng = random.Random(7)
    cases: list[list[Any]] = [
        [Decimal("0"), Decimal("-0"), Decimal("0.000")],
        [Decimal("-0.0004"), Decimal("0.0004"), 0],
        [-0.0, 0.0, 1],
        [Decimal("999.9996"), Decimal("-999.9994"), 12, 3.5],
        [Decimal("1234567.8915"), Decimal("-0.05"), Decimal("99.95")],
        [7],
        [],
    ]
    for _ in range(200):
        cases.append([
            rng.choice([Decimal(rng.randint(-10**9, 10**9)).scaleb(-rng.randint(0, 7)),
                        rng.uniform(-1e6, 1e6), rng.randint(-10**6, 10**6), Decimal("-0"), 0])
            for _ in range(rng.randint(1, 12))
        ])
    for values in cases:
        for kind in (KG, TONNES, PERCENT, INT, NUMBER):
            assert _number_width(values, kind) == max((len(fmt(v, kind)) for v in values), default=0), \
                (values, kind)


def _expected_width(sheet: Any, j: int) -> float:
    from ledger.exports.common import fmt

    col = sheet.columns[j]
    if col.width is not None:
        return col.width
    content = max((len(fmt(v, col.kind)) for v in sheet.frame[col.key]), default=0)
    longest_word = max((len(w) for w in col.header.split()), default=4)
    return min(max(content, longest_word, 6) + 2, 60)


def test_annual_workbook_looks_and_widths(tmp_path: Path) -> None:
    from ledger.exports.frames import annual_sheets

    s = sample_summary()
    wb = openpyxl.load_workbook(write_annual_xlsx(tmp_path / "annual.xlsx", s))
    for sheet in annual_sheets(s):
        ws = wb[sheet.name]
        for j, col in enumerate(sheet.columns):
            letter = openpyxl.utils.get_column_letter(j + 1)
            assert ws.column_dimensions[letter].width == _expected_width(sheet, j), (sheet.name, col.key)
            head = ws.cell(1, j + 1)
            assert head.value == col.header and head.font.bold and head.fill.fgColor.rgb.endswith("E7EAEE")
            assert head.border.bottom.style == "thin" and head.alignment.wrap_text
        assert ws.row_dimensions[1].height in (15, 30, 45, 60)
        assert ws.print_title_rows == "$1:$1" and ws.page_setup.orientation == "landscape"
        assert ws.sheet_properties.pageSetUpPr.fitToPage
    systems = wb["systems"]
    headers = [c.value for c in systems[1]]
    formats = {h: {c.number_format for (c,) in systems.iter_rows(min_row=2, max_row=systems.max_row - 1,
                                                                 min_col=headers.index(h) + 1,
                                                                 max_col=headers.index(h) + 1)
                   if c.value is not None}
               for h in ("added (kg)", "leak rate (% of full charge)", "leak checks done", "retired")}
    assert formats == {"added (kg)": {"#,##0.000"}, "leak rate (% of full charge)": {"0.0"},
                       "leak checks done": {"0"}, "retired": {"yyyy-mm-dd"}}
    assert systems.cell(2, headers.index("description") + 1).alignment.wrap_text  # a wide column wraps
    total = systems.cell(systems.max_row, headers.index("added (kg)") + 1)
    assert total.font.bold and total.border.top.style == "thin" and total.number_format == "#,##0.000"
    # a marked (missed) obligation: tinted, edged on the left, its state in bold
    obligations = wb["obligations"]
    row = [r[5] for r in _rows(obligations)[1:]].index("missed") + 2
    assert obligations.cell(row, 1).border.left.style == "thick"
    assert obligations.cell(row, 6).font.bold and not obligations.cell(row, 5).font.bold
    assert all(obligations.cell(row, j).fill.fgColor.rgb.endswith("F4E6CF") for j in range(1, 12))
    # the file states each sheet's used range, as a plain workbook's does (read-only readers go by it)
    ro = openpyxl.load_workbook(tmp_path / "annual.xlsx", read_only=True)
    for name in wb.sheetnames:
        assert ro[name].calculate_dimension() == wb[name].dimensions, name
    ro.close()
    notes = wb["notes"]
    assert notes["A1"].font.sz == 14 and notes["A1"].font.bold
    assert notes["A3"].font.bold and notes["A3"].alignment.wrap_text and notes["B3"].alignment.wrap_text
    assert notes.column_dimensions["A"].width == 34 and notes.column_dimensions["B"].width == 100


def _dump(path: Path) -> list[Any]:
    """Every cell's value and look and every sheet's settings, to compare two files."""
    wb = openpyxl.load_workbook(path)
    out: list[Any] = [wb.sheetnames]
    for ws in wb.worksheets:
        out.append((ws.title, ws.freeze_panes, ws.auto_filter.ref, ws.print_title_rows,
                    sorted((k, d.width) for k, d in ws.column_dimensions.items()),
                    sorted((k, d.height) for k, d in ws.row_dimensions.items() if d.height)))
        for row in ws.iter_rows():
            for c in row:
                if c.value is None and not c.has_style:
                    continue
                out.append((c.coordinate, c.value, c.data_type, c.number_format, c.quotePrefix,
                            repr(c.font), repr(c.fill), repr(c.border), repr(c.alignment)))
    return out


def test_streamed_and_plain_sheets_write_the_same_cells(tmp_path: Path) -> None:
    """write_table/write_notes give the same cells on a plain sheet, openpyxl's own write-only
    sheet and the streaming sheet the writers use."""
    from openpyxl import Workbook

    from ledger.exports.frames import annual_sheets, logbook_sheets
    from ledger.exports.xlsx import annual_notes, write_notes, write_table

    s, book = sample_summary(), sample_logbook()
    for sheets, notes, ours in (
        ({x.name: x for x in annual_sheets(s)}, annual_notes(s), write_annual_xlsx(tmp_path / "a.xlsx", s)),
        ({x.name: x for x in logbook_sheets(book)}, None, write_logbook_xlsx(tmp_path / "l.xlsx", book)),
    ):
        expected = _dump(ours)
        for write_only in (False, True):
            wb = Workbook(write_only=write_only)
            if not write_only:
                wb.remove(wb.active)
            for name in expected[0][:-1]:
                write_table(wb.create_sheet(name), sheets[name])
            source = openpyxl.load_workbook(ours)["notes"]
            title = source["A1"].value
            items = notes or [(r[0], r[1]) for r in source.iter_rows(min_row=3, values_only=True)]
            write_notes(wb.create_sheet("notes"), title, items)
            other = tmp_path / f"other-{write_only}.xlsx"
            wb.save(other)
            assert _dump(other) == expected, write_only
