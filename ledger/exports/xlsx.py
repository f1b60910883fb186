"""Spreadsheets (openpyxl): the annual loss summary and the system logbook.

Every table sheet has a frozen header row, an autofilter over its rows, widths from its
content, real dates and numbers (units in the headers; display formats round, the stored
values do not), and, where it adds up, a totals row of formulas over the rows above it
(``=SUM(E2:E40)``). Text a user typed that starts with ``=``, ``+``, ``-`` or ``@`` is stored as
a string cell with a quote prefix, never as a formula. A "notes" sheet carries the basis,
conventions, sources and the caution.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from datetime import date, datetime
from pathlib import Path
from typing import Any

from openpyxl import Workbook
from openpyxl.styles import Alignment, Border, Font, PatternFill, Side
from openpyxl.utils import get_column_letter
from openpyxl.worksheet.worksheet import Worksheet

from ledger.exports.common import (
    ANNUAL_CONVENTIONS,
    ART6_MAP,
    BOOL,
    CAUTION,
    DATE,
    DATETIME,
    INT,
    KG,
    NUMBER,
    PERCENT,
    TONNES,
    fmt,
    is_blank,
    needs_guard,
    to_number,
)
from ledger.exports.frames import Sheet, annual_sheets, logbook_sheets

NUMBER_FORMATS = {
    DATE: "yyyy-mm-dd",
    DATETIME: "yyyy-mm-dd hh:mm",
    KG: "#,##0.000",
    TONNES: "#,##0.000",
    PERCENT: "0.0",
    INT: "0",
    NUMBER: "General",
}
MAX_WIDTH = 60
_HEADER_FONT = Font(bold=True, color="1D232A")
_HEADER_FILL = PatternFill("solid", fgColor="E7EAEE")
_MARK_FILL = PatternFill("solid", fgColor="F4E6CF")
_MARK_EDGE = Side(style="thick", color="8A6D3B")
_THIN = Side(style="thin", color="C9CED4")
_DIM_FONT = Font(color="8A9096", italic=True, strike=True)
_DIM_NOTE_FONT = Font(color="5B6570", italic=True)
_TOTAL_FONT = Font(bold=True)
_TITLE_FONT = Font(bold=True, size=14, color="1D232A")
_WRAP_TOP = Alignment(wrap_text=True, vertical="top")


def put_text(ws: Worksheet, row: int, col: int, text: Any) -> Any:
    """Write text as text: a leading = + - @ is kept literally (string cell, quote prefix)."""
    cell = ws.cell(row=row, column=col)
    if is_blank(text) or text == "":
        return cell
    value = str(text)
    cell.value = value
    if needs_guard(value):
        cell.data_type = "s"
        cell.quotePrefix = True
    return cell


def put_value(ws: Worksheet, row: int, col: int, value: Any, kind: str) -> Any:
    """Write one value by its column kind (numbers as numbers, days as dates)."""
    if kind in (KG, TONNES, PERCENT, INT, NUMBER):
        if is_blank(value):
            return ws.cell(row=row, column=col)
        if isinstance(value, str):
            return put_text(ws, row, col, value)
        cell = ws.cell(row=row, column=col, value=to_number(value))
        cell.number_format = NUMBER_FORMATS[kind]
        return cell
    if kind == DATE:
        cell = ws.cell(row=row, column=col)
        if isinstance(value, datetime):
            value = value.date()
        if isinstance(value, date):
            cell.value = value
            cell.number_format = NUMBER_FORMATS[DATE]
        return cell
    if kind == DATETIME:
        cell = ws.cell(row=row, column=col)
        if isinstance(value, datetime):
            cell.value = value.replace(tzinfo=None)  # stored in UTC; the header says so
            cell.number_format = NUMBER_FORMATS[DATETIME]
        return cell
    if kind == BOOL:
        return put_text(ws, row, col, "yes" if value else "")
    return put_text(ws, row, col, value)


def _width(values: list[str], header: str, fixed: int | None) -> float:
    if fixed is not None:
        return fixed
    longest_word = max((len(w) for w in header.split()), default=4)
    content = max((len(v) for v in values), default=0)
    return min(max(content, longest_word, 6) + 2, MAX_WIDTH)


def write_table(ws: Worksheet, sheet: Sheet) -> int:
    """Write a Sheet's table from A1: header, rows, totals; returns the last data row."""
    columns = sheet.columns
    for j, col in enumerate(columns, start=1):
        cell = ws.cell(row=1, column=j, value=col.header)
        cell.font, cell.fill = _HEADER_FONT, _HEADER_FILL
        cell.alignment = Alignment(wrap_text=True, vertical="bottom")
        cell.border = Border(bottom=_THIN)
    frame = sheet.frame
    marks = list(frame[sheet.mark]) if sheet.mark else [False] * len(frame)
    dims = list(frame[sheet.dim]) if sheet.dim else [False] * len(frame)
    shown: list[list[str]] = [[] for _ in columns]
    keys = [c.key for c in columns]
    for i, values in enumerate(frame[keys].itertuples(index=False, name=None), start=2):
        marked, dimmed = bool(marks[i - 2]), bool(dims[i - 2])
        for j, (col, value) in enumerate(zip(columns, values, strict=True), start=1):
            cell = put_value(ws, i, j, value, col.kind)
            shown[j - 1].append(fmt(value, col.kind))
            if col.width and col.width >= 28 and col.kind not in (DATE, DATETIME):
                cell.alignment = _WRAP_TOP
            if marked:
                cell.fill = _MARK_FILL
            if dimmed:
                cell.font = _DIM_NOTE_FONT if col.key == "void_text" else _DIM_FONT
        if marked:
            ws.cell(row=i, column=1).border = Border(left=_MARK_EDGE)
            for j, col in enumerate(columns, start=1):
                if col.key in ("state", "status", "exceeded", "chronic", "days_overdue"):
                    ws.cell(row=i, column=j).font = Font(bold=True)
    last = 1 + len(frame)
    if sheet.totals and len(frame):
        _totals_row(ws, columns, last)
    ncols = len(columns)
    ws.freeze_panes = "C2" if ncols > 12 else "A2"
    ws.auto_filter.ref = f"A1:{get_column_letter(ncols)}{max(last, 1)}"
    for j, col in enumerate(columns, start=1):
        ws.column_dimensions[get_column_letter(j)].width = _width(shown[j - 1], col.header, col.width)
    longest = max((len(c.header) / max(_width(shown[j], c.header, c.width), 1)
                   for j, c in enumerate(columns)), default=1)
    ws.row_dimensions[1].height = 15 * min(max(1, int(longest) + 1), 4)
    ws.print_title_rows = "1:1"
    ws.page_setup.orientation = "landscape"
    ws.page_setup.fitToWidth = 1
    ws.page_setup.fitToHeight = 0
    ws.sheet_properties.pageSetUpPr.fitToPage = True
    return last


def _totals_row(ws: Worksheet, columns: Sequence[Any], last: int) -> None:
    row = last + 1
    letters = {c.key: get_column_letter(j) for j, c in enumerate(columns, start=1)}
    ws.cell(row=row, column=1, value="total").font = _TOTAL_FONT
    for j, col in enumerate(columns, start=1):
        cell = ws.cell(row=row, column=j)
        cell.border = Border(top=_THIN)
        if col.total == "sum":
            letter = letters[col.key]
            cell.value = f"=SUM({letter}2:{letter}{last})"
        elif isinstance(col.total, tuple) and col.total[0] == "ratio":
            _, num, den, factor = col.total
            n, d = f"{letters[num]}{row}", f"{letters[den]}{row}"
            cell.value = f'=IF({d}=0,"",{n}/{d}*{factor})'
        else:
            continue
        cell.font = _TOTAL_FONT
        cell.number_format = NUMBER_FORMATS.get(col.kind, "General")


def write_notes(ws: Worksheet, title: str, items: Sequence[tuple[str, str]]) -> None:
    """A notes sheet: a title, then (heading, text) rows with wrapped text."""
    ws.cell(row=1, column=1, value=title).font = _TITLE_FONT
    for i, (head, text) in enumerate(items, start=3):
        put_text(ws, i, 1, head).font = Font(bold=True)
        cell = put_text(ws, i, 2, text)
        cell.alignment = _WRAP_TOP
        ws.cell(row=i, column=1).alignment = _WRAP_TOP
        ws.row_dimensions[i].height = 15 * max(1, len(str(text)) // 95 + 1)
    ws.column_dimensions["A"].width = 34
    ws.column_dimensions["B"].width = 100


def _book(title: str, version: str) -> Workbook:
    wb = Workbook()
    wb.properties.title = title
    wb.properties.creator = f"refledger {version}"
    return wb


def _add_sheets(wb: Workbook, sheets: Sequence[Sheet]) -> None:
    for sheet in sheets:
        write_table(wb.create_sheet(sheet.name), sheet)


def annual_notes(summary: Mapping[str, Any]) -> list[tuple[str, str]]:
    """The notes of an annual summary: scope, basis, conventions, methods, sources, caution."""
    scope = f"site {summary['site_filter']}" if summary.get("site_filter") else "whole estate"
    items = [
        ("report", f"Annual refrigerant loss summary {summary['year']} ({scope})"),
        ("period", f"{fmt(summary['period']['from'], DATE)} to {fmt(summary['period']['to'], DATE)}"),
        ("GWP basis", f"{summary['basis']}: 100-year GWPs; 'eu' is the EU F-gas convention (AR4 "
         "for saturated HFCs, Annex II values for olefins); ar4/ar5/ar6 are the IPCC tables"),
        ("obligations evaluated on", fmt(summary["as_of"], DATE)),
        ("chain digest", f"{summary['chain']['digest']} over {summary['chain']['systems']} systems"),
        ("generated", fmt(summary["generated_at"], DATETIME)),
        ("tool version", f"refledger {summary['version']}"),
    ]
    items += [(f"convention: {k}", v) for k, v in ANNUAL_CONVENTIONS]
    for m in summary["scope1"]:
        items.append((f"scope 1: {m['label']}", f"{m['formula']}. Source: {m['source']}. "
                      "Assumptions: " + "; ".join(m["assumptions"]) + "."))
        for f in m["factors"]:
            items.append((
                f"factors: {f['label']}",
                f"k {f['k_percent']} %, x {f['x_percent']} %/yr, y {f['y_percent']} %, "
                f"z {f['z_percent']} %. Source: {f['source']} [{f['confidence']}]",
            ))
    items += [("GWP note", n) for n in summary["notes"]]
    items.append(("caution", CAUTION))
    return items


def write_annual_xlsx(path: Path, summary: Mapping[str, Any]) -> Path:
    """Write the annual loss summary spreadsheet.

    Args:
        path: the .xlsx file to write.
        summary: ``reporting.annual_summary`` output.
    Returns:
        The path written.
    """
    wb = _book(f"Annual refrigerant loss summary {summary['year']}", summary["version"])
    sheets = {s.name: s for s in annual_sheets(summary)}
    order = ["estate", "sites", "refrigerants", "systems", "scope 1", "scope 1 detail",
             "obligations", "months", "years"]
    wb.remove(wb.active)
    _add_sheets(wb, [sheets[n] for n in order])
    write_notes(wb.create_sheet("notes"), f"Notes: annual loss summary {summary['year']}",
                annual_notes(summary))
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    wb.save(path)
    return path


def logbook_notes(book: Mapping[str, Any]) -> list[tuple[str, str]]:
    """The notes of a logbook: chain head, period, Art 6 mapping, caution."""
    items = [
        ("report", f"System logbook {book['site']['code']}/{book['system']['tag']}"),
        ("period", f"{fmt(book['period']['from'], DATE)} to {fmt(book['period']['to'], DATE)}"),
        ("chain head", f"{book['chain_head'] or ''} (hash of the system's last recorded event; "
         f"{book['events_total']} events in the chain)"),
        ("voided events", "stay listed, struck through, with the correction's event and reason "
         "beside them; they do not count in any figure"),
        ("added for", "derived from the record: 'installation' on the in-service or retrofit day, "
         "'leak' while a found leak is open or on a day with a repair or a leak found, else "
         "'servicing'"),
        ("generated", fmt(book["generated_at"], DATETIME)),
        ("tool version", f"refledger {book['version']}"),
    ]
    items += [(f"EU 517/2014 Art 6{item}", f"{need} -> {where}") for item, need, where in ART6_MAP]
    items.append(("caution", CAUTION))
    return items


def write_logbook_xlsx(path: Path, book: Mapping[str, Any]) -> Path:
    """Write one system's logbook spreadsheet.

    Args:
        path: the .xlsx file to write.
        book: ``reporting.logbook`` output.
    Returns:
        The path written.
    """
    wb = _book(f"System logbook {book['site']['code']}/{book['system']['tag']}", book["version"])
    wb.remove(wb.active)
    _add_sheets(wb, logbook_sheets(book))
    write_notes(wb.create_sheet("notes"),
                f"Notes: logbook {book['site']['code']}/{book['system']['tag']}", logbook_notes(book))
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    wb.save(path)
    return path
