"""Spreadsheets (openpyxl): the annual loss summary and the system logbook.

Every table sheet has a frozen header row, an autofilter over its rows, widths from its
content, real dates and numbers (units in the headers; display formats round, the stored
values do not), and, where it adds up, a totals row of formulas over the rows above it
(``=SUM(E2:E40)``). Text a user typed that starts with ``=``, ``+``, ``-`` or ``@`` is stored as
a string cell with a quote prefix, never as a formula. A "notes" sheet carries the basis,
conventions, sources and the caution.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Iterator, Mapping, Sequence
from datetime import date, datetime
from decimal import Decimal
from itertools import repeat
from pathlib import Path
from typing import Any

from openpyxl import Workbook
from openpyxl.cell import Cell, WriteOnlyCell
from openpyxl.styles import Alignment, Border, Font, PatternFill, Side
from openpyxl.styles.cell_style import StyleArray
from openpyxl.utils import get_column_letter
from openpyxl.worksheet._write_only import WriteOnlyWorksheet
from openpyxl.worksheet.worksheet import Worksheet

from ledger.exports.common import (
    BOOL,
    CAUTION,
    DATE,
    DATETIME,
    FORMULA_PREFIXES,
    INT,
    KG,
    NUMBER,
    PERCENT,
    TONNES,
    Column,
    annual_conventions,
    fmt,
    is_blank,
    needs_guard,
    report_lines,
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
WRAP_WIDTH = 28  # columns this wide (fixed width, not dates) wrap their text
CELLS_PER_BLOCK = 500  # rows go in blocks of about this many cells (see write_table)
BOLD_WHEN_MARKED = ("state", "status", "exceeded", "chronic", "days_overdue")
_NUMERIC = (KG, TONNES, PERCENT, INT, NUMBER)
_NEVER_BLANK = frozenset((str, int, Decimal, date, datetime))  # types is_blank is always False for
_HEADER_FONT = Font(bold=True, color="1D232A")
_HEADER_FILL = PatternFill("solid", fgColor="E7EAEE")
_HEADER_ALIGN = Alignment(wrap_text=True, vertical="bottom")
_MARK_FILL = PatternFill("solid", fgColor="F4E6CF")
_MARK_EDGE = Side(style="thick", color="8A6D3B")
_THIN = Side(style="thin", color="C9CED4")
_BELOW = Border(bottom=_THIN)
_ABOVE = Border(top=_THIN)
_MARK_BORDER = Border(left=_MARK_EDGE)
_DIM_FONT = Font(color="8A9096", italic=True, strike=True)
_DIM_NOTE_FONT = Font(color="5B6570", italic=True)
_BOLD = Font(bold=True)
_TOTAL_FONT = _BOLD
_TITLE_FONT = Font(bold=True, size=14, color="1D232A")
_WRAP_TOP = Alignment(wrap_text=True, vertical="top")
# Row states of a table: bit 1 marked (tinted, edged, key columns bold), bit 2 dimmed (greyed out).
_MARKED, _DIMMED = 1, 2


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


# --- streaming tables ---------------------------------------------------------------------------
#
# Tables are written row by row with ``ws.append`` (the annual summary and the logbook use
# openpyxl's write-only mode, so a row goes to the file as it is appended). Each distinct cell look
# (number format, font, fill, border, alignment, quote prefix) is registered with the workbook
# once, as a ``StyleArray``, and given to the cells that have it: no style object is built or
# hashed per cell. Unstyled values go in as plain values. Sheet settings (widths, frozen panes,
# filter, page setup, the header row's height) are set before the first row, as write-only mode
# writes them ahead of the rows; widths come from the values' display lengths, measured without
# formatting every value. On a ``_StreamSheet`` (what the writers below use) a styled entry is a
# ``(value, look, as_text)`` triple rather than a cell of its own; on any other sheet, a cell.
# Sheets that stay in memory (``write_due_xlsx`` uses a plain workbook) get the same cells.


class _Look(StyleArray):
    """A registered look: a style array no one changes, so it keeps its hash (openpyxl looks each
    written cell's array up in the workbook's table of cell formats)."""

    __slots__ = ("_hash",)

    def __new__(cls, args: Any) -> _Look:
        look = super().__new__(cls, args)
        look._hash = hash(tuple(look))
        return look

    def __hash__(self) -> int:
        return self._hash


class _Looks:
    """The cell looks of one new worksheet, each registered with its workbook once."""

    def __init__(self, ws: Any) -> None:
        self.ws = ws
        self.stream = isinstance(ws, _StreamSheet)
        # A write-only sheet writes a cell as it is appended and keeps nothing, so its cells can
        # share one array per look; cells that stay in a plain sheet get a copy each.
        self.share = isinstance(ws, WriteOnlyWorksheet)
        self._made: dict[tuple[Any, ...], StyleArray | None] = {}

    def get(self, number_format: str | None = None, font: Font | None = None, fill: PatternFill | None = None,
            border: Border | None = None, alignment: Alignment | None = None,
            quote: bool = False) -> StyleArray | None:
        """The style array of a look (None for the default look). The style objects are module
        constants, so the cache is keyed by their identity."""
        key = (number_format, id(font), id(fill), id(border), id(alignment), quote)
        if key not in self._made:
            cell = WriteOnlyCell(self.ws)
            if number_format:
                cell.number_format = number_format
            if font is not None:
                cell.font = font
            if fill is not None:
                cell.fill = fill
            if border is not None:
                cell.border = border
            if alignment is not None:
                cell.alignment = alignment
            if quote:
                cell.quotePrefix = True
            self._made[key] = _Look(cell._style) if cell.has_style else None
        return self._made[key]

    def column(self, j: int, col: Column, state: int) -> tuple[Any, Any, Any]:
        """A table column's looks in a row state: (blank or text, number or date, guarded text)."""
        wrap = _WRAP_TOP if col.width and col.width >= WRAP_WIDTH and col.kind not in (DATE, DATETIME) else None
        fill = _MARK_FILL if state & _MARKED else None
        font = None
        if state & _DIMMED:
            font = _DIM_NOTE_FONT if col.key == "void_text" else _DIM_FONT
        border = None
        if state & _MARKED:
            border = _MARK_BORDER if j == 1 else None
            font = _BOLD if col.key in BOLD_WHEN_MARKED else font
        return (self.get(None, font, fill, border, wrap),
                self.get(NUMBER_FORMATS.get(col.kind), font, fill, border, wrap),
                self.get(None, font, fill, border, wrap, quote=True))

    def cell(self, value: Any, look: StyleArray | None, as_text: bool = False) -> Any:
        """An entry holding value with a look (``as_text``: a string cell whatever the text).

        The look goes first: a day or a time then finds its date format there (it is only ever
        given a look that has one) and leaves the look as it is."""
        if self.stream:
            return value, look, as_text
        cell = WriteOnlyCell(self.ws)
        if look is not None:
            cell._style = look if self.share else StyleArray(look)
        cell.value = value
        if as_text:
            cell.data_type = "s"
        return cell

    def text(self, value: Any, plain: StyleArray | None, quoted: StyleArray | None) -> Any:
        """A text entry of a row: None (blank, no look), a plain string, or a cell when the text has
        a look or needs the guard (a leading = + - @ kept literally: string cell, quote prefix)."""
        if is_blank(value) or value == "":
            return None if plain is None else self.cell(None, plain)
        text = str(value)
        if needs_guard(text):
            return self.cell(text, quoted, as_text=True)
        return text if plain is None else self.cell(text, plain)


class _StreamSheet(WriteOnlyWorksheet):
    """A write-only sheet for the rows ``write_table`` and ``write_notes`` append: plain values,
    None for nothing, and ``(value, look, as_text)`` triples for styled cells (cells are taken too).

    openpyxl's own write-only sheet takes a row of values and cells, and writes each through one
    reused cell, or the given one; a styled cell costs a cell object of its own and an exception
    (every entry is tried as a value first). This sheet changes only that row conversion (the
    hook is openpyxl's, ``_values_to_row``): a triple goes through the reused cell, look first,
    then the value, which openpyxl binds as for any appended value. The tests check that the
    cells are those openpyxl's own write-only sheet (and a plain sheet) writes from cells.

    It also has a ``calculate_dimension`` (which openpyxl's writer looks for, as a plain sheet has
    one) giving ``extent``, the used range its writer sets before the first row, so the file states
    its size as a plain sheet's does (readers in read-only mode go by it)."""

    extent = "A1:A1"

    def calculate_dimension(self) -> str:
        """The sheet's used range, e.g. ``A1:X40``."""
        return self.extent

    def _values_to_row(self, values: Iterable[Any], row_idx: int) -> Iterator[Any]:
        spare = WriteOnlyCell(self)
        for col_idx, value in enumerate(values, 1):
            if value is None:
                continue
            cell = spare
            if type(value) is tuple:
                value, look, as_text = value
                spare._style = look
                spare.value = value
                if as_text:
                    spare.data_type = "s"
            elif isinstance(value, Cell):
                cell = value
            else:
                spare._style = None
                spare.value = value
            cell.column = col_idx
            cell.row = row_idx
            yield cell


def _new_sheet(wb: Workbook, title: str) -> Any:
    """A new sheet at the end of the workbook (a ``_StreamSheet`` in a write-only workbook)."""
    if not wb.write_only:
        return wb.create_sheet(title)
    ws = _StreamSheet(parent=wb, title=title)
    wb._add_sheet(ws)
    return ws


def _number_width(numbers: list[Any], kind: str) -> int:
    """The length of the longest display text (``fmt``) of numbers. Rounding and digit grouping
    keep the order, so it is that of the largest or the smallest (or of a negative zero)."""
    if not numbers:
        return 0
    try:
        hi, lo = max(numbers), min(numbers)
    except (TypeError, ArithmeticError):  # not mutually comparable: measure each
        return max(len(fmt(v, kind)) for v in numbers)
    longest = max(len(fmt(hi, kind)), len(fmt(lo, kind)))
    if lo == 0:
        negative_zero = next((v for v in numbers if v == 0 and math.copysign(1, v) < 0), None)
        if negative_zero is not None:
            longest = max(longest, len(fmt(negative_zero, kind)))
    return longest


def _content_width(kind: str, values: list[Any]) -> int:
    """The length of a column's longest display text (``fmt``, as the PDF shows it), without
    formatting every value."""
    present = [v for v in values if v is not None and (type(v) in _NEVER_BLANK or not is_blank(v))]
    if kind in _NUMERIC:
        texts = [v for v in present if isinstance(v, str)]
        numbers = [v for v in present if not isinstance(v, str)] if texts else present
        return max(_number_width(numbers, kind), max((len(fmt(v, kind)) for v in texts), default=0))
    if kind == DATE:  # a day shows as yyyy-mm-dd
        return max((10 if type(v) in (date, datetime) else len(fmt(v, kind)) for v in present), default=0)
    if kind == BOOL:
        return 3 if any(present) else 0
    if kind == DATETIME:
        return max((len(fmt(v, kind)) for v in present), default=0)
    return max((len(v) if type(v) is str else len(str(v)) for v in present), default=0)


def _column_entries(looks: _Looks, col: Column, values: list[Any],
                    row_looks: Iterable[tuple[Any, Any, Any]]) -> list[Any]:
    """One column's row entries: plain values, styled entries (``_Looks.cell``) or None for nothing."""
    kind = col.kind
    out: list[Any] = []
    add = out.append
    make = looks.cell
    if kind in _NUMERIC:
        for value, (plain, formatted, quoted) in zip(values, row_looks, strict=True):
            t = type(value)
            if t is Decimal:  # what the reports hold; as to_number, inline
                number: Any = int(value) if value == value.to_integral_value() else float(value)
            elif (t is int or t is float) and value == value:
                number = value
            elif value is None or is_blank(value):
                add(None if plain is None else make(None, plain))
                continue
            elif isinstance(value, str):
                add(looks.text(value, plain, quoted))
                continue
            else:
                number = to_number(value)
            add(number if formatted is None else make(number, formatted))
    elif kind in (DATE, DATETIME):
        day = kind == DATE
        for value, (plain, formatted, _) in zip(values, row_looks, strict=True):
            if isinstance(value, datetime):
                value = value.date() if day else value.replace(tzinfo=None)  # stored in UTC; the header says so
            if isinstance(value, datetime) or (day and isinstance(value, date)):
                add(make(value, formatted))
            else:
                add(None if plain is None else make(None, plain))
    elif kind == BOOL:
        for value, (plain, _, quoted) in zip(values, row_looks, strict=True):
            add(looks.text("yes" if value else "", plain, quoted))
    else:
        for value, (plain, _, quoted) in zip(values, row_looks, strict=True):
            if type(value) is str and plain is None and value and not value.startswith(FORMULA_PREFIXES):
                add(value)  # the common case: plain text as it is (needs_guard, inline)
            else:
                add(looks.text(value, plain, quoted))
    return out


def _width(content: int, header: str, fixed: int | None) -> float:
    """A column's width: fixed, or from its longest display text and the header's longest word."""
    if fixed is not None:
        return fixed
    longest_word = max((len(w) for w in header.split()), default=4)
    return min(max(content, longest_word, 6) + 2, MAX_WIDTH)


def write_table(ws: Any, sheet: Sheet) -> int:
    """Write a Sheet's table from A1 (header, rows, totals) on a new worksheet, plain or
    write-only; returns the last data row."""
    columns = sheet.columns
    frame = sheet.frame
    n = len(frame)
    states = [0] * n
    if sheet.mark:
        states = [_MARKED if m else 0 for m in frame[sheet.mark].tolist()]
    if sheet.dim:
        states = [s | (_DIMMED if d else 0) for s, d in zip(states, frame[sheet.dim].tolist(), strict=True)]
    present = sorted(set(states))
    looks = _Looks(ws)
    by_state = [{s: looks.column(j, col, s) for s in present} for j, col in enumerate(columns, start=1)]
    values = [frame[col.key].tolist() for col in columns]
    widths = [_width(_content_width(col.kind, v) if col.width is None else 0, col.header, col.width)
              for col, v in zip(columns, values, strict=True)]
    last = 1 + n
    ncols = len(columns)
    ws.freeze_panes = "C2" if ncols > 12 else "A2"
    ws.auto_filter.ref = f"A1:{get_column_letter(ncols)}{max(last, 1)}"
    for j, width in enumerate(widths, start=1):
        ws.column_dimensions[get_column_letter(j)].width = width
    longest = max((len(c.header) / max(w, 1) for c, w in zip(columns, widths, strict=True)), default=1)
    ws.row_dimensions[1].height = 15 * min(max(1, int(longest) + 1), 4)
    ws.print_title_rows = "1:1"
    ws.page_setup.orientation = "landscape"
    ws.page_setup.fitToWidth = 1
    ws.page_setup.fitToHeight = 0
    ws.sheet_properties.pageSetUpPr.fitToPage = True
    if isinstance(ws, _StreamSheet):
        ws.extent = f"A1:{get_column_letter(ncols)}{last + 1 if sheet.totals and n else last}"
    header = looks.get(None, _HEADER_FONT, _HEADER_FILL, _BELOW, _HEADER_ALIGN)
    ws.append([looks.cell(c.header, header) for c in columns])
    # The rows go in small blocks: a block's entries are made column by column (fast loops) and
    # are gone before the next block, few enough that the garbage collector is not set off by them
    # (it would walk every object alive, the report's frames included, again and again).
    rows_per_block = max(1, CELLS_PER_BLOCK // max(ncols, 1))
    uniform = len(present) == 1
    for start in range(0, n, rows_per_block):
        stop = min(start + rows_per_block, n)
        block = states[start:stop]
        entries = [
            _column_entries(looks, col, v[start:stop],
                            repeat(looks_of[present[0]], stop - start) if uniform else [looks_of[s] for s in block])
            for col, v, looks_of in zip(columns, values, by_state, strict=True)
        ]
        for row in zip(*entries, strict=True):
            ws.append(row)
    if sheet.totals and n:
        ws.append(_totals_row(looks, columns, last))
    return last


def _totals_row(looks: _Looks, columns: Sequence[Column], last: int) -> list[Any]:
    row = last + 1
    letters = {c.key: get_column_letter(j) for j, c in enumerate(columns, start=1)}
    cells = []
    for j, col in enumerate(columns, start=1):
        if col.total == "sum":
            letter = letters[col.key]
            formula = f"=SUM({letter}2:{letter}{last})"
        elif isinstance(col.total, tuple) and col.total[0] == "ratio":
            _, num, den, factor = col.total
            n, d = f"{letters[num]}{row}", f"{letters[den]}{row}"
            formula = f'=IF({d}=0,"",{n}/{d}*{factor})'
        elif j == 1:
            cells.append(looks.cell("total", looks.get(None, _TOTAL_FONT, border=_ABOVE)))
            continue
        else:
            cells.append(looks.cell(None, looks.get(border=_ABOVE)))
            continue
        look = looks.get(NUMBER_FORMATS.get(col.kind, "General"), _TOTAL_FONT, border=_ABOVE)
        cells.append(looks.cell(formula, look))
    return cells


def write_notes(ws: Any, title: str, items: Sequence[tuple[str, str]]) -> None:
    """A notes sheet (new, plain or write-only): a title, then (heading, text) rows with wrapped text."""
    ws.column_dimensions["A"].width = 34
    ws.column_dimensions["B"].width = 100
    for i, (_, text) in enumerate(items, start=3):
        ws.row_dimensions[i].height = 15 * max(1, len(str(text)) // 95 + 1)
    if isinstance(ws, _StreamSheet):
        ws.extent = f"A1:B{2 + len(items)}" if items else "A1:A1"
    looks = _Looks(ws)
    ws.append([looks.cell(title, looks.get(font=_TITLE_FONT))])
    ws.append([])
    head = (looks.get(font=_BOLD, alignment=_WRAP_TOP), looks.get(font=_BOLD, alignment=_WRAP_TOP, quote=True))
    body = (looks.get(alignment=_WRAP_TOP), looks.get(alignment=_WRAP_TOP, quote=True))
    for name, text in items:
        ws.append([looks.text(name, *head), looks.text(text, *body)])


def _book(title: str, version: str, *, write_only: bool = False) -> Workbook:
    """A workbook with its properties. ``write_only``: streamed, with no sheet to begin with."""
    wb = Workbook(write_only=write_only)
    wb.properties.title = title
    wb.properties.creator = f"refledger {version}"
    return wb


def _add_sheets(wb: Workbook, sheets: Sequence[Sheet]) -> None:
    for sheet in sheets:
        write_table(_new_sheet(wb, sheet.name), sheet)


def _integrity_notes(report: Mapping[str, Any]) -> list[tuple[str, str]]:
    """The integrity lines of a report (NOT VERIFIED first) as notes rows."""
    check = report.get("integrity")
    return [("integrity", line) for line in report_lines(check)] if check else []


def annual_notes(summary: Mapping[str, Any]) -> list[tuple[str, str]]:
    """The notes of an annual summary: scope, basis, conventions, methods, sources, caution."""
    scope = f"site {summary['site_filter']}" if summary.get("site_filter") else "whole estate"
    items = [
        ("report", f"Annual refrigerant loss summary {summary['year']} ({scope})"),
        ("period", f"{fmt(summary['period']['from'], DATE)} to {fmt(summary['period']['to'], DATE)}"),
        ("GWP basis", f"{summary['basis']}: 100-year GWPs; 'eu' is the EU F-gas convention of "
         "Reg. (EU) 2024/573 (Annex I/II values), 'gb' that of 517/2014 as retained in GB; "
         "ar4/ar5/ar6 are the IPCC tables"),
        ("obligations evaluated on", fmt(summary["as_of"], DATE)),
        ("chain digest", f"{summary['chain']['digest']} over {summary['chain']['systems']} systems"),
        *_integrity_notes(summary),
        ("generated", fmt(summary["generated_at"], DATETIME)),
        ("tool version", f"refledger {summary['version']}"),
    ]
    items += [(f"convention: {k}", v) for k, v in annual_conventions(summary["chronic_percent"])]
    for m in summary["scope1"]:
        items.append((f"scope 1: {m['label']}", f"{m['formula']}. Source: {m['source']}. "
                      "Assumptions: " + "; ".join(m["assumptions"]) + "."))
        for f in m["factors"]:
            items.append((
                f"factors: {f['label']}",
                f"k {f['k_percent']} %, x {f['x_percent']} %/yr, y {f['y_percent']} %, "
                f"z {f['z_percent']} %. Source: {f['source']} [{f['confidence']}]",
            ))
    rec = summary.get("scope1_recommended")
    if rec:
        items.append(("scope 1: recommended method", f"{rec['method']}: {rec['why']}"))
    items += [("scope 1: flagged", f) for f in dict.fromkeys(
        f for m in summary["scope1"] for f in m.get("flags", ()))]
    items += [("servicing prohibited", t["warning"]) for t in summary.get("prohibited_top_ups", ())]
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
    wb = _book(f"Annual refrigerant loss summary {summary['year']}", summary["version"], write_only=True)
    sheets = {s.name: s for s in annual_sheets(summary)}
    order = ["estate", "sites", "refrigerants", "systems", "scope 1", "scope 1 detail",
             "obligations", "months", "years"]
    _add_sheets(wb, [sheets[n] for n in order])
    write_notes(_new_sheet(wb, "notes"), f"Notes: annual loss summary {summary['year']}",
                annual_notes(summary))
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    wb.save(path)
    return path


def logbook_notes(book: Mapping[str, Any]) -> list[tuple[str, str]]:
    """The notes of a logbook: chain head, period, record-item mapping, caution."""
    items = [
        ("report", f"System logbook {book['site']['code']}/{book['system']['tag']}"),
        ("period", f"{fmt(book['period']['from'], DATE)} to {fmt(book['period']['to'], DATE)}"),
        ("chain head", f"{book['chain_head'] or ''} (hash of the system's last recorded event; "
         f"{book['events_total']} events in the chain)"),
        ("voided events", "stay listed, struck through, with the correction's event and reason "
         "beside them; they do not count in any figure; the correction is an ordinary row"),
        *_integrity_notes(book),
        ("added for", "derived from the record: 'installation' on the in-service or retrofit day, "
         "'leak' while a found leak is open or on a day with a repair or a leak found, else "
         "'servicing'"),
        ("generated", fmt(book["generated_at"], DATETIME)),
        ("tool version", f"refledger {book['version']}"),
    ]
    # the record items the site's regimes ask for, and where this logbook shows each
    items += [(f"{book['record_title']}{item}", f"{need} -> {where}") for item, need, where in book["record_items"]]
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
    wb = _book(f"System logbook {book['site']['code']}/{book['system']['tag']}", book["version"],
               write_only=True)
    _add_sheets(wb, logbook_sheets(book))
    write_notes(_new_sheet(wb, "notes"),
                f"Notes: logbook {book['site']['code']}/{book['system']['tag']}", logbook_notes(book))
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    wb.save(path)
    return path
