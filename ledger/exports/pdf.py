"""PDF reports (reportlab platypus; charts from ``ledger.exports.charts``).

Layout rules of our own: A4 landscape; every page opens with a lead line that states the page's
key figure in large type; the first page of a report shows its key figures as large numerals in
tiles, then the caution; tables follow with a header row repeated on each page; rows that need
attention (missed obligations, chronic leakers, exceeded leak rates) get a pale sand tint, a
dark edge and a bold status; voided events are struck through in grey with the correction
beside them. Every page footer carries the tool version, the generation time and the chain
head (logbook) or chain digest (annual summary).
"""

from __future__ import annotations

import io
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from decimal import Decimal
from pathlib import Path
from typing import Any
from xml.sax.saxutils import escape

from reportlab.lib import colors
from reportlab.lib.enums import TA_LEFT, TA_RIGHT
from reportlab.lib.pagesizes import A4, landscape
from reportlab.lib.styles import ParagraphStyle
from reportlab.lib.units import mm
from reportlab.platypus import (
    BaseDocTemplate,
    CondPageBreak,
    Flowable,
    Frame,
    Image,
    KeepTogether,
    PageBreak,
    PageTemplate,
    Paragraph,
    Spacer,
    Table,
    TableStyle,
)

from ledger.exports import charts
from ledger.exports.common import (
    ACCENT,
    CAUTION,
    DATE,
    DATETIME,
    HEADER_FILL,
    INK,
    INT,
    KG,
    MUTED,
    NUMBER,
    OVERDUE_FILL,
    OVERDUE_MARK,
    PERCENT,
    RULE,
    TONNES,
    VOIDED_INK,
    annual_conventions,
    fmt,
    gwp_text,
    in_unit,
    recorded_text,
    report_lines,
    share_text,
    short_hash,
)
from ledger.exports.frames import void_text

PAGE = landscape(A4)
MARGIN = 14 * mm
WIDTH = PAGE[0] - 2 * MARGIN

_FONTS: dict[str, str] = {}


def _fonts() -> dict[str, str]:
    """Register DejaVu (shipped with matplotlib; covers accents, ≥, ->) or fall back."""
    if _FONTS:
        return _FONTS
    names = {"regular": "Helvetica", "bold": "Helvetica-Bold", "italic": "Helvetica-Oblique",
             "mono": "Courier"}
    try:
        import matplotlib
        from reportlab.lib.fonts import addMapping
        from reportlab.pdfbase import pdfmetrics
        from reportlab.pdfbase.ttfonts import TTFont

        base = Path(matplotlib.get_data_path()) / "fonts" / "ttf"
        files = {"regular": "DejaVuSans.ttf", "bold": "DejaVuSans-Bold.ttf",
                 "italic": "DejaVuSans-Oblique.ttf", "mono": "DejaVuSansMono.ttf"}
        if all((base / f).exists() for f in files.values()):
            for key, f in files.items():
                name = "RL-" + f.removesuffix(".ttf")
                pdfmetrics.registerFont(TTFont(name, str(base / f)))
                names[key] = name
            addMapping(names["regular"], 0, 0, names["regular"])
            addMapping(names["regular"], 1, 0, names["bold"])
            addMapping(names["regular"], 0, 1, names["italic"])
            addMapping(names["regular"], 1, 1, names["bold"])
    except Exception:  # noqa: BLE001 - any font trouble: the built-in fonts still work
        pass
    _FONTS.update(names)
    return _FONTS


@dataclass(frozen=True)
class _Styles:
    title: ParagraphStyle
    subtitle: ParagraphStyle
    lead: ParagraphStyle
    h2: ParagraphStyle
    body: ParagraphStyle
    small: ParagraphStyle
    cell: ParagraphStyle
    cell_num: ParagraphStyle
    head: ParagraphStyle
    head_num: ParagraphStyle
    tile_value: ParagraphStyle
    tile_label: ParagraphStyle
    tile_sub: ParagraphStyle
    caution: ParagraphStyle
    mono: ParagraphStyle


def _styles() -> _Styles:
    f = _fonts()
    ink, muted = colors.HexColor(INK), colors.HexColor(MUTED)

    def s(name: str, size: float, *, font: str = "regular", color=ink, lead: float | None = None,
          align=TA_LEFT, space_after: float = 0, space_before: float = 0,
          ) -> ParagraphStyle:
        return ParagraphStyle(name, fontName=f[font], fontSize=size, leading=lead or size * 1.25,
                              textColor=color, alignment=align, spaceAfter=space_after,
                              spaceBefore=space_before)

    return _Styles(
        title=s("title", 22, font="bold", space_after=2),
        subtitle=s("subtitle", 10, color=muted, space_after=10),
        lead=s("lead", 15, font="bold", lead=19, space_after=8, space_before=6),
        h2=s("h2", 11, font="bold", space_after=4),
        body=s("body", 9, lead=12, space_after=4),
        small=s("small", 7.5, color=muted, lead=9.5),
        cell=s("cell", 7.3, lead=8.8),
        cell_num=s("cell_num", 7.3, lead=8.8, align=TA_RIGHT),
        head=s("head", 7.3, font="bold", lead=8.8),
        head_num=s("head_num", 7.3, font="bold", lead=8.8, align=TA_RIGHT),
        tile_value=s("tile_value", 30, font="bold", lead=34),
        tile_label=s("tile_label", 9.5, font="bold", lead=12),
        tile_sub=s("tile_sub", 7.8, color=muted, lead=10),
        caution=s("caution", 8.5, lead=11.5),
        mono=ParagraphStyle("mono", fontName=f["mono"], fontSize=7, leading=9,
                            textColor=muted),
    )


def _p(text: Any, style: ParagraphStyle) -> Paragraph:
    return Paragraph(escape("" if text is None else str(text)), style)


def _markup(text: str, style: ParagraphStyle) -> Paragraph:
    return Paragraph(text, style)


# --- building blocks --------------------------------------------------------------------------


@dataclass(frozen=True)
class Tile:
    """A key figure: the number large, what it is, one line of context."""

    value: str
    label: str
    sub: str = ""
    alert: bool = False


def tiles(items: Sequence[Tile], st: _Styles) -> Table:
    """A row of key-figure tiles across the page."""
    cells = [[_p(t.value, st.tile_value), _p(t.label, st.tile_label), _p(t.sub, st.tile_sub)]
             for t in items]
    gap = 6
    width = (WIDTH - gap * (len(items) - 1)) / len(items)
    data: list[list[Any]] = [[]]
    widths: list[float] = []
    for i, c in enumerate(cells):
        if i:
            data[0].append("")
            widths.append(gap)
        data[0].append(c)
        widths.append(width)
    table = Table(data, colWidths=widths)
    style: list[tuple[Any, ...]] = [("VALIGN", (0, 0), (-1, -1), "TOP"),
             ("TOPPADDING", (0, 0), (-1, -1), 8), ("BOTTOMPADDING", (0, 0), (-1, -1), 10),
             ("LEFTPADDING", (0, 0), (-1, -1), 10)]
    for i, t in enumerate(items):
        col = i * 2
        fill = OVERDUE_FILL if t.alert else HEADER_FILL
        style += [("BACKGROUND", (col, 0), (col, 0), colors.HexColor(fill)),
                  ("LINEBEFORE", (col, 0), (col, 0), 3, colors.HexColor(ACCENT))]
    table.setStyle(TableStyle(style))
    return table


@dataclass(frozen=True)
class Col:
    """A PDF table column: header, kind (for alignment and formatting) and relative width."""

    header: str
    kind: str = "text"
    weight: float = 1.0


NUMERIC = (KG, TONNES, PERCENT, INT, NUMBER)


def table(
    columns: Sequence[Col],
    rows: Sequence[Sequence[Any]],
    st: _Styles,
    *,
    marked: Sequence[bool] = (),
    dimmed: Sequence[bool] = (),
    total: Sequence[Any] | None = None,
    width: float = WIDTH,
) -> Table:
    """A data table: header repeated on each page, numbers right-aligned, marks and dims."""
    weights = sum(c.weight for c in columns)
    widths = [width * c.weight / weights for c in columns]
    data = [[_p(c.header, st.head_num if c.kind in NUMERIC else st.head) for c in columns]]
    for i, row in enumerate(rows):
        dim = bool(dimmed[i]) if i < len(dimmed) else False
        cells = []
        for c, v in zip(columns, row, strict=True):
            if isinstance(v, Flowable):  # pre-built cell (e.g. a struck note with its correction)
                cells.append(v)
                continue
            text = v if isinstance(v, str) else _cell_text(v, c.kind)
            style = st.cell_num if c.kind in NUMERIC else st.cell
            if dim:
                cells.append(_markup(f'<font color="{VOIDED_INK}"><strike>{escape(text)}</strike></font>', style))
            else:
                cells.append(_p(text, style))
        data.append(cells)
    if total is not None:
        data.append([_markup(f"<b>{escape(t if isinstance(t, str) else fmt(t, c.kind))}</b>",
                             st.cell_num if c.kind in NUMERIC else st.cell)
                     for c, t in zip(columns, total, strict=True)])
    t = Table(data, colWidths=widths, repeatRows=1)
    style = [
        ("BACKGROUND", (0, 0), (-1, 0), colors.HexColor(HEADER_FILL)),
        ("LINEBELOW", (0, 0), (-1, 0), 0.8, colors.HexColor(MUTED)),
        ("LINEBELOW", (0, 1), (-1, -1), 0.3, colors.HexColor(RULE)),
        ("VALIGN", (0, 0), (-1, -1), "TOP"),
        ("TOPPADDING", (0, 0), (-1, -1), 2.5),
        ("BOTTOMPADDING", (0, 0), (-1, -1), 2.5),
        ("LEFTPADDING", (0, 0), (-1, -1), 3),
        ("RIGHTPADDING", (0, 0), (-1, -1), 3),
    ]
    for i, m in enumerate(marked, start=1):
        if m:
            style += [("BACKGROUND", (0, i), (-1, i), colors.HexColor(OVERDUE_FILL)),
                      ("LINEBEFORE", (0, i), (0, i), 2.5, colors.HexColor("#8a6d3b"))]
    if total is not None:
        style += [("LINEABOVE", (0, -1), (-1, -1), 0.8, colors.HexColor(INK))]
    t.setStyle(TableStyle(style))
    return t


def _cell_text(value: Any, kind: str) -> str:
    """Table text; zero masses, rates and counts show as a dash so the non-zero ones stand out."""
    if kind in (KG, TONNES, PERCENT, INT) and not isinstance(value, bool):
        try:
            if value is not None and Decimal(str(value)) == 0:
                return "\u2013"
        except ArithmeticError:
            pass
    return fmt(value, kind)


def _image(png: bytes, width: float, max_height: float | None = None) -> Image:
    img = Image(io.BytesIO(png))
    ratio = img.imageHeight / img.imageWidth
    if max_height is not None and width * ratio > max_height:
        width = max_height / ratio
    img.drawWidth, img.drawHeight = width, width * ratio
    img.hAlign = "LEFT"
    return img


def _caution_box(st: _Styles) -> Table:
    box = Table([[_markup(f"<b>Caution.</b> {escape(CAUTION)}", st.caution)]], colWidths=[WIDTH])
    box.setStyle(TableStyle([
        ("BOX", (0, 0), (-1, -1), 0.8, colors.HexColor(MUTED)),
        ("BACKGROUND", (0, 0), (-1, -1), colors.white),
        ("LEFTPADDING", (0, 0), (-1, -1), 8), ("RIGHTPADDING", (0, 0), (-1, -1), 8),
        ("TOPPADDING", (0, 0), (-1, -1), 6), ("BOTTOMPADDING", (0, 0), (-1, -1), 6),
    ]))
    return box


def _facts_grid(pairs: Sequence[tuple[str, str]], st: _Styles, columns: int = 2) -> Table:
    """Label/value pairs laid out in ``columns`` column pairs."""
    per = -(-len(pairs) // columns)
    data = []
    for r in range(per):
        row: list[Any] = []
        for c in range(columns):
            i = c * per + r
            if i < len(pairs):
                row += [_p(pairs[i][0], st.small), _p(pairs[i][1], st.cell)]
            else:
                row += ["", ""]
        data.append(row)
    label_w, value_w = WIDTH / columns * 0.3, WIDTH / columns * 0.7
    t = Table(data, colWidths=[label_w, value_w] * columns)
    t.setStyle(TableStyle([
        ("VALIGN", (0, 0), (-1, -1), "TOP"),
        ("LINEBELOW", (0, 0), (-1, -1), 0.3, colors.HexColor(RULE)),
        ("TOPPADDING", (0, 0), (-1, -1), 2.5), ("BOTTOMPADDING", (0, 0), (-1, -1), 2.5),
        ("LEFTPADDING", (0, 0), (-1, -1), 3),
    ]))
    return t


def _build(path: Path, story: list[Flowable], *, title: str, running: str, footer: str,
           footer_mono: str) -> Path:
    f = _fonts()
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)

    def decorate(canvas, doc) -> None:
        canvas.saveState()
        canvas.setFont(f["regular"], 7.5)
        canvas.setFillColor(colors.HexColor(MUTED))
        canvas.drawString(MARGIN, PAGE[1] - MARGIN + 12, running)
        canvas.drawRightString(PAGE[0] - MARGIN, PAGE[1] - MARGIN + 12, f"page {doc.page}")
        canvas.setStrokeColor(colors.HexColor(RULE))
        canvas.line(MARGIN, MARGIN - 6, PAGE[0] - MARGIN, MARGIN - 6)
        canvas.drawString(MARGIN, MARGIN - 15, footer)
        canvas.setFont(f["mono"], 6.8)
        canvas.drawString(MARGIN, MARGIN - 24, footer_mono)
        canvas.restoreState()

    doc = BaseDocTemplate(
        str(path), pagesize=PAGE, leftMargin=MARGIN, rightMargin=MARGIN, topMargin=MARGIN + 4,
        bottomMargin=MARGIN + 4, title=title, author="refledger", creator="refledger",
        subject=title,
    )
    frame = Frame(MARGIN, MARGIN + 4, WIDTH, PAGE[1] - 2 * MARGIN - 8, id="body",
                  leftPadding=0, rightPadding=0, topPadding=0, bottomPadding=0)
    doc.addPageTemplates([PageTemplate(id="page", frames=[frame], onPage=decorate)])
    doc.build(story)
    return path


def _kg_short(value: Any) -> str:
    return fmt(value, KG, 1)


def _pct(part: float, whole: float) -> str:
    return f"{part / whole * 100:.0f} %" if whole else "-"


# --- annual summary ---------------------------------------------------------------------------


def write_annual_pdf(path: Path, summary: Mapping[str, Any]) -> Path:
    """Write the annual loss summary PDF (key figures, charts, tables, notes).

    Args:
        path: the .pdf file to write.
        summary: ``reporting.annual_summary`` output.
    Returns:
        The path written.
    """
    st = _styles()
    year, basis, estate = summary["year"], summary["basis"], summary["estate"]
    chronic = share_text(summary["chronic_percent"])  # "125 %": the regimes' indicator share
    scope = f"site {summary['site_filter']}" if summary.get("site_filter") else "whole estate"
    story: list[Flowable] = []

    # page 1: key figures first
    story.append(_p(f"Refrigerant losses {year}", st.title))
    story.append(_p(
        f"Annual loss summary, {scope}: {estate['sites']} sites, {estate['systems']} systems. "
        f"GWP basis {basis}. Obligations evaluated on {fmt(summary['as_of'], DATE)}.", st.subtitle))
    due_total = len(summary["obligations"])
    initial = estate["initial_fill_kg"]
    story.append(tiles([
        Tile(f"{_kg_short(estate['added_kg'])} kg", "refrigerant added",
             f"{_kg_short(initial)} kg of it initial charges" if initial else
             f"leak rate {fmt(estate['leak_rate_percent'], PERCENT)} % of full charge"),
        Tile(f"{fmt(estate['co2e_t'], TONNES, 1)} t", f"CO2e of additions ({basis})",
             "additions excluding initial charges x GWP"),
        Tile(str(estate["chronic"]), "chronic leakers",
             f"systems with {chronic} or more of full charge added", alert=estate["chronic"] > 0),
        Tile(str(estate["overdue"]), "obligations overdue",
             f"of {due_total} due in {year}; {estate['checks_missed']} leak checks missed",
             alert=estate["overdue"] > 0),
    ], st))
    story.append(Spacer(1, 10))
    left = [
        ("full charge 1 January", f"{fmt(estate['full_charge_start_kg'], KG, 1)} kg"),
        ("full charge 31 December", f"{fmt(estate['full_charge_end_kg'], KG, 1)} kg"),
        ("added", f"{fmt(estate['added_kg'], KG)} kg"),
        ("added excluding initial charges", f"{fmt(estate['service_added_kg'], KG)} kg"),
        ("recovered", f"{fmt(estate['recovered_kg'], KG)} kg"
         + "".join(f"; {d} {fmt(v, KG)} kg" for d, v in estate["recovered_to"].items())),
        ("net loss (material balance)", f"{fmt(estate['net_loss_kg'], KG)} kg"),
        ("leak rate", f"{fmt(estate['leak_rate_percent'], PERCENT)} % of full charge"),
        ("leak checks required / done / missed",
         f"{estate['checks_required']} / {estate['checks_done']} / {estate['checks_missed']}"),
    ]
    methods = [(m["label"], f"{fmt(m['emissions_kg'], KG, 1)} kg = "
                f"{fmt(m['co2e_t'], TONNES, 1)} t CO2e") for m in summary["scope1"]]
    story.append(_p("Estate totals and corporate scope 1 estimates", st.h2))
    story.append(_facts_grid(left + [("scope 1: " + k, v) for k, v in methods], st, columns=2))
    story.append(Spacer(1, 10))
    story.append(_caution_box(st))
    top = sorted((s for s in summary["systems"] if s["co2e_t"]), key=lambda s: s["co2e_t"],
                 reverse=True)[:5]
    if top:
        story.append(Spacer(1, 8))
        story.append(_p(f"Largest losses ({len(top)} systems with the most CO2e added)", st.h2))
        story.append(table(
            [Col("site", weight=0.8), Col("system", weight=1.0), Col("refrigerant", weight=1.0),
             Col("added (kg)", KG, 0.9), Col("leak rate (%)", PERCENT, 0.9),
             Col(f"CO2e (t, {basis})", TONNES, 0.9), Col(f"{chronic} or more", weight=0.9),
             Col("description", weight=3)],
            [[s["site"], s["system"], s["refrigerant"], s["added_kg"], s["leak_rate_percent"],
              s["co2e_t"], "YES" if s["chronic"] else "", s["description"]] for s in top],
            st, marked=[s["chronic"] for s in top],
        ))

    # page 2: where the losses are
    story.append(PageBreak())
    sites = summary["sites"]
    refrigerants = summary["refrigerants"]
    top_site = max(sites, key=lambda s: s["service_added_kg"], default=None)
    if top_site and top_site["service_added_kg"]:
        share = _pct(float(top_site["service_added_kg"]), float(estate["service_added_kg"]))
        story.append(_p(f"{top_site['site']} lost the most: {_kg_short(top_site['service_added_kg'])} "
                        f"kg added, {share} of the estate", st.lead))
    else:
        story.append(_p("No refrigerant was added outside initial charges", st.lead))
    half = WIDTH / 2 - 6
    by_site = charts.ranked_bars([s["site"] for s in sites],
                                 [float(s["service_added_kg"]) for s in sites],
                                 "Added by site (kg, excl. initial charges)")
    by_ref = charts.ranked_bars([r["refrigerant"] for r in refrigerants],
                                [float(r["co2e_t"]) for r in refrigerants],
                                f"CO2e of additions by refrigerant (t, {basis})")
    months = summary["monthly"]
    month_values = [float(m["added_kg"]) for m in months]
    busiest = max(range(12), key=lambda i: month_values[i]) if any(month_values) else None
    by_month = charts.column_bars(["J", "F", "M", "A", "M", "J", "J", "A", "S", "O", "N", "D"],
                                  month_values, "Added by month (kg, excl. initial charges)",
                                  highlight=busiest, places=0)
    rates = [float(s["leak_rate_percent"]) for s in summary["systems"]
             if s["leak_rate_percent"] is not None]
    bands = charts.rate_bands(float(summary["chronic_percent"]))
    counts = charts.rate_band_counts(rates, bands)
    dist = charts.column_bars([b[0] for b in bands], counts,
                              "Systems by annual leak rate (% of full charge)", places=0,
                              highlight=len(counts) - 1 if counts[-1] else None)
    cell_h = (PAGE[1] - 2 * MARGIN - 60) / 2 - 8
    grid = Table([[_image(by_site, half, cell_h), _image(by_ref, half, cell_h)],
                  [_image(by_month, half, cell_h), _image(dist, half, cell_h)]],
                 colWidths=[WIDTH / 2, WIDTH / 2])
    grid.setStyle(TableStyle([("VALIGN", (0, 0), (-1, -1), "TOP"),
                              ("LEFTPADDING", (0, 0), (-1, -1), 0)]))
    story.append(grid)

    # page 3: years and scope 1
    story.append(PageBreak())
    trend = summary["trend"]
    if len(trend) > 1:
        story.append(_p(_trend_lead(trend, basis), st.lead))
        story.append(_image(charts.trend_line([str(t["year"]) for t in trend],
                                              [float(t["co2e_t"]) for t in trend],
                                              f"CO2e of additions by year (t, {basis})"),
                            WIDTH * 0.62, 150))
        story.append(Spacer(1, 4))
    results = [m["co2e_t"] for m in summary["scope1"]]
    story.append(_p(f"Scope 1 estimates {year}: {fmt(min(results), TONNES, 1)} to "
                    f"{fmt(max(results), TONNES, 1)} t CO2e, by method", st.lead))
    story.append(table(
        [Col("method", weight=1.4), Col("formula", weight=2.2), Col("inputs (kg)", weight=3.2),
         Col("emissions (kg)", KG, 0.9), Col(f"CO2e (t, {basis})", TONNES, 0.9),
         Col("source", weight=2.4)],
        [[m["label"], m["formula"],
          "; ".join(f"{k.removesuffix('_kg')} {fmt(v, KG, 1)}" for k, v in m["inputs"].items()),
          m["emissions_kg"], m["co2e_t"], _short_source(m["source"])] for m in summary["scope1"]],
        st,
    ))
    factors = summary["scope1"][2]["factors"]
    if factors:
        story.append(Spacer(1, 6))
        story.append(KeepTogether([_p("Screening factors used (percent)", st.h2), table(
            [Col("equipment row", weight=3), Col("k install", NUMBER), Col("x per year", NUMBER),
             Col("y at disposal", NUMBER), Col("z recovered", NUMBER), Col("source", weight=5)],
            [[f["label"], fmt(f["k_percent"], NUMBER, 1), fmt(f["x_percent"], NUMBER, 1),
              fmt(f["y_percent"], NUMBER, 1), fmt(f["z_percent"], NUMBER, 1),
              _short_source(f["source"]) + f" [{f['confidence']}]"] for f in factors],
            st,
        )]))

    # page 4+: tables
    story.append(PageBreak())
    story.append(_p(_sites_lead(sites), st.lead))
    mass_cols = [Col("charge 1 Jan (kg)", KG), Col("charge 31 Dec (kg)", KG), Col("added (kg)", KG),
                 Col("recovered (kg)", KG), Col("net loss (kg)", KG), Col("leak rate (%)", PERCENT),
                 Col(f"CO2e (t, {basis})", TONNES)]

    def masses(r: Mapping[str, Any]) -> list[Any]:
        return [r["full_charge_start_kg"], r["full_charge_end_kg"], r["added_kg"], r["recovered_kg"],
                r["net_loss_kg"], r["leak_rate_percent"], r["co2e_t"]]

    estate_total = ["total", "", estate["systems"], *masses(estate), estate["chronic"],
                    estate["overdue"]]
    story.append(table(
        [Col("site", weight=0.8), Col("name", weight=2), Col("systems", INT, 0.75), *mass_cols,
         Col("chronic", INT, 0.75), Col("overdue", INT, 0.8)],
        [[s["site"], s["name"], s["systems"], *masses(s), s["chronic"], s["overdue"]] for s in sites],
        st, marked=[s["overdue"] > 0 or s["chronic"] > 0 for s in sites], total=estate_total,
    ))
    story.append(Spacer(1, 12))
    story.append(KeepTogether([
        _p("Refrigerants", st.h2),
        table(
            [Col("refrigerant", weight=1.1), Col(f"GWP ({basis})", NUMBER, 0.8),
             Col("systems", INT, 0.6), *mass_cols],
            [[r["refrigerant"], fmt(r["gwp"], NUMBER, 0), r["systems"], *masses(r)]
             for r in refrigerants],
            st, total=["total", "", "", *masses(estate)],
        ),
    ]))

    story.append(PageBreak())
    systems = sorted(summary["systems"], key=lambda s: (-(s["co2e_t"] or 0),
                                                        -(s["added_kg"] or 0), s["site"], s["system"]))
    story.append(_p(_systems_lead(systems, chronic), st.lead))
    story.append(_p("Largest CO2e first; the spreadsheet lists the same rows by site.", st.small))
    story.append(table(
        [Col("site", weight=0.75), Col("system", weight=1.0), Col("refrigerant", weight=0.9),
         Col("full charge (kg)", KG, 0.85), Col("added (kg)", KG, 0.8),
         Col("recovered (kg)", KG, 0.8), Col("net loss (kg)", KG, 0.8),
         Col("leak rate (%)", PERCENT, 0.7), Col(f"CO2e (t, {basis})", TONNES, 0.8),
         Col(f"{chronic}+", weight=0.5), Col("checks req.", INT, 0.6), Col("done", INT, 0.5),
         Col("missed", INT, 0.6), Col("overdue", INT, 0.65)],
        [[s["site"], s["system"], " -> ".join(s["refrigerants"]), s["full_charge_kg"],
          s["added_kg"], s["recovered_kg"], s["net_loss_kg"], s["leak_rate_percent"], s["co2e_t"],
          "YES" if s["chronic"] else "", s["checks_required"], s["checks_done"],
          s["checks_missed"], s["overdue"]] for s in systems],
        st, marked=[s["chronic"] or s["overdue"] > 0 for s in systems],
    ))

    obligations = summary["obligations"]
    story.append(PageBreak())
    missed = [o for o in obligations if o["state"] == "missed"]
    late = [o for o in obligations if o["state"] == "met late"]
    story.append(_p(f"{len(missed)} of {len(obligations)} obligations due in {year} missed"
                    + (f", {len(late)} met late" if late else ""), st.lead))
    story.append(_obligation_table(sorted(obligations, key=lambda o: (o["state"] != "missed",
                                                                      o["due_on"])), st))

    story.append(CondPageBreak(120))
    story += _annual_notes(summary, st)
    story += _integrity_paragraphs(summary, st)
    digest = summary["chain"]["digest"]
    return _build(
        Path(path), story,
        title=f"Annual refrigerant loss summary {year}",
        running=f"Annual refrigerant loss summary {year} - {scope} - GWP basis {basis}",
        footer=(f"refledger {summary['version']} - generated {fmt(summary['generated_at'], DATETIME)}"
                " - local regulation and the competent authority govern (see caution)"),
        footer_mono=_unverified_mark(summary) + f"chain digest {digest} ({summary['chain']['systems']} systems)",
    )


def _short_source(text: str) -> str:
    """Sources as table text: the long guidance title shortened (the notes give it in full)."""
    from ledger.domain.emissions import GUIDANCE, TABLE_7_9

    return (text.replace(GUIDANCE, "GHG Protocol / US EPA 2014 guidance")
            .replace(TABLE_7_9, "IPCC 2006 V3 Ch7 T7.9")
            .replace("values from memory, to be checked against the table", "from memory"))


def _trend_lead(trend: Sequence[Mapping[str, Any]], basis: str) -> str:
    last, prev = trend[-1], trend[-2]
    text = f"CO2e of additions: {fmt(last['co2e_t'], TONNES, 1)} t in {last['year']} ({basis})"
    if prev["co2e_t"]:
        change = (float(last["co2e_t"]) - float(prev["co2e_t"])) / float(prev["co2e_t"]) * 100
        text += f", {'up' if change >= 0 else 'down'} {abs(change):.0f} % on {prev['year']}"
    return text


def _sites_lead(sites: Sequence[Mapping[str, Any]]) -> str:
    if not sites:
        return "No site had a system in service this year"
    worst = max(sites, key=lambda s: (s["leak_rate_percent"] or 0))
    return (f"Highest site leak rate: {worst['site']} at "
            f"{fmt(worst['leak_rate_percent'] or 0, PERCENT)} % of full charge")


def _systems_lead(systems: Sequence[Mapping[str, Any]], chronic_share: str) -> str:
    chronic = [s for s in systems if s["chronic"]]
    worst = max(systems, key=lambda s: (s["leak_rate_percent"] or 0), default=None)
    if worst is None:
        return "No systems in service this year"
    head = (f"{len(chronic)} of {len(systems)} systems had {chronic_share} or more of full charge added"
            if chronic else f"No system had {chronic_share} or more of its full charge added ({len(systems)} systems)")
    return (f"{head}; highest leak rate {worst['site']}/{worst['system']} at "
            f"{fmt(worst['leak_rate_percent'] or 0, PERCENT)} %")


def _obligation_table(rows: Sequence[Mapping[str, Any]], st: _Styles, *,
                      with_system: bool = True) -> Table:
    cols = [Col("due", DATE, 0.75)]
    if with_system:
        cols += [Col("site", weight=0.7), Col("system", weight=0.9)]
    cols += [Col("kind", weight=1.4), Col("regime", weight=0.6), Col("state", weight=0.75),
             Col("met on", DATE, 0.75), Col("basis", weight=1.9), Col("detail", weight=3.0)]
    data = []
    for o in rows:
        state = OVERDUE_MARK if o["state"] == "missed" else o["state"]
        row: list[Any] = [o["due_on"]]
        if with_system:
            row += [o["site"], o["system"] or "(facility)"]
        row += [o["kind"], o["regime"], state, o["met_on"], o["basis"], o["detail"]]
        data.append(row)
    return table(cols, data, st, marked=[o["state"] in ("missed", "met late") for o in rows])


def _annual_notes(summary: Mapping[str, Any], st: _Styles) -> list[Flowable]:
    out: list[Flowable] = [_p("How the figures are made", st.lead)]
    for k, v in annual_conventions(summary["chronic_percent"]):
        out.append(_markup(f"<b>{escape(k)}</b>: {escape(v)}", st.body))
    for m in summary["scope1"]:
        out.append(_markup(f"<b>Scope 1, {escape(m['label'].lower())}</b>: {escape(m['formula'])}. "
                           f"Source: {escape(m['source'])}. Assumptions: "
                           f"{escape('; '.join(m['assumptions']))}.", st.body))
    rec = summary.get("scope1_recommended")
    if rec:
        out.append(_markup(f"<b>Scope 1, recommended method</b>: {escape(rec['method'])}: "
                           f"{escape(rec['why'])}.", st.body))
    for flag in dict.fromkeys(f for m in summary["scope1"] for f in m.get("flags", ())):
        out.append(_markup(f"<b>Scope 1, flagged</b>: {escape(flag)}.", st.body))
    for top_up in summary.get("prohibited_top_ups", ()):
        out.append(_markup(f"<b>Servicing</b>: {escape(top_up['warning'])}.", st.body))
    for n in summary["notes"]:
        out.append(_markup(f"<b>GWP</b>: {escape(n)}", st.body))
    out.append(Spacer(1, 6))
    out.append(_caution_box(st))
    return out


# --- logbook ----------------------------------------------------------------------------------

# Event kinds whose rows name the refrigerant (elsewhere it would repeat on every line).
_GAS_KINDS = frozenset({"in-service", "add", "recover", "retire", "retrofit", "charge-revised"})


def write_logbook_pdf(path: Path, book: Mapping[str, Any]) -> Path:
    """Write one system's logbook PDF (header, events, obligations, leak rates, Art 6 map).

    Args:
        path: the .pdf file to write.
        book: ``reporting.logbook`` output.
    Returns:
        The path written.
    """
    from ledger.exports.frames import logbook_facts

    st = _styles()
    site, system = book["site"], book["system"]
    ref = f"{site['code']}/{system['tag']}"
    events = book["events"]
    period = f"{fmt(book['period']['from'], DATE)} to {fmt(book['period']['to'], DATE)}"
    story: list[Flowable] = []
    story.append(_p(f"System logbook {ref}", st.title))
    story.append(_p(f"{system['description'] or system['application']} - {site['name']} "
                    f"({site['country']}) - period {period}", st.subtitle))
    story += _not_verified(book, st)
    voided = sum(1 for e in events if e["voided"])
    pending = [o for o in book["obligations"] if o["state"] in ("missed", "open")]
    missed = [o for o in pending if o["state"] == "missed"]
    next_due = min((o["due_on"] for o in pending if o["state"] == "open"), default=None)
    charge = f"{fmt(book['full_charge_kg'], KG, 1)} kg"
    charge_sub = book["refrigerant"] or "no refrigerant recorded"
    if book["safety_class"]:
        charge_sub += f", safety class {book['safety_class']}"
    if book.get("full_charge_lb") is not None:
        if site.get("mass_unit") == "lb":  # the site's own unit large, the other one small
            charge, charge_sub = (f"{fmt(book['full_charge_lb'], KG, 1)} lb",
                                  f"{charge}; " + charge_sub)
        else:
            charge_sub = f"{fmt(book['full_charge_lb'], KG, 1)} lb; " + charge_sub
    story.append(tiles([
        Tile(charge, "full charge", charge_sub),
        Tile(f"{fmt(book['co2e_t'], TONNES)} t" if book["co2e_t"] is not None else "-",
             "CO2e of the full charge",
             f"GWP {gwp_text(book['gwp'])} ({book['gwp_basis']})" if book["gwp"] is not None
             else ""),
        Tile(str(len(events)), "events in the period",
             f"{voided} voided, kept and marked" if voided else "none voided"),
        Tile(str(len(missed)), "obligations missed",
             f"next due {fmt(next_due, DATE)}" if next_due else "nothing open",
             alert=bool(missed)),
    ], st))
    story.append(Spacer(1, 10))
    facts = [(r["item"], r["value"]) for r in logbook_facts(book)
             if r["item"] not in ("chain head", "generated", "tool version")]
    story.append(_facts_grid(facts, st, columns=2))
    story.append(Spacer(1, 10))
    story.append(_caution_box(st))

    story.append(PageBreak())
    adds = sum((e["mass_kg"] or Decimal(0)) for e in events if e["kind"] == "add" and not e["voided"])
    unit = book["site"].get("mass_unit") or "kg"
    story.append(_p(f"{len(events)} events, {fmt(in_unit(adds, unit), KG, 1)} {unit} added in the period"
                    + (f"; {voided} voided (struck through, kept)" if voided else ""), st.lead))
    rows = []
    for e in events:
        qty = in_unit(e["mass_kg"] if e["mass_kg"] is not None else e["charge_kg"], unit)
        gas = [e["refrigerant"]] if e["refrigerant"] and e["kind"] in _GAS_KINDS else []
        if e["cylinder"]:
            cyl = f"cyl. {e['cylinder']}" + (f" ({e['cylinder_kind']})" if e["cylinder_kind"] else "")
            if e["cylinder_before_kg"] is not None:
                cyl += (f" {fmt(in_unit(e['cylinder_before_kg'], unit), KG)} -> "
                        f"{fmt(in_unit(e['cylinder_after_kg'], unit), KG)} {unit}")
            gas.append(cyl)
        if e["reclaimed"]:
            gas.append("recycled/reclaimed gas")
        if e.get("facility"):
            cert = f", cert. {e['facility_certificate']}" if e.get("facility_certificate") else ""
            gas.append(f"facility {e['facility']}{cert}")
        if e["added_for"]:
            gas.append(f"for {e['added_for']}")
        outcome = [x for x in (e["result"], e["location"], e["method"],
                               f"to {e['destination']}" if e["destination"] else None) if x]
        company = e["company"]
        if company and e.get("company_certificate"):
            company += f" (company cert. {e['company_certificate']})"
        who = [x for x in (e["technician"], company, e["certificate"], e.get("uncertified")) if x]
        note: list[str] = [e["note"]] if e["note"] else []
        if e["attachments"]:
            note.append("docs " + ", ".join(short_hash(a, 10) for a in e["attachments"]))
        correction = void_text(e)
        label = e["kind_label"] + (" (full charge)" if e["mass_kg"] is None and e["charge_kg"] is not None
                                   else "")
        note_cell: Any = "; ".join(note)
        if correction:  # the correction stays readable even where the event is struck through
            struck = (f'<font color="{VOIDED_INK}"><strike>{escape(note_cell)}</strike></font> '
                      if note_cell else "")
            note_cell = _markup(f"{struck}<i>{escape(correction)}</i>", st.cell)
        rows.append([e["on"], str(e["id"]), label, qty, "; ".join(gas), "; ".join(outcome),
                     "; ".join(who), note_cell, recorded_text(e)])
    story.append(table(
        [Col("date", DATE, 0.72), Col("#", weight=0.35), Col("kind", weight=1.05),
         Col(unit, KG, 0.55), Col("gas, cylinder, reclaimed", weight=1.6),
         Col("result, location, method, destination", weight=1.5),
         Col("technician, company, certificate", weight=1.7), Col("note, correction", weight=1.9),
         Col("recorded by, at (UTC), hash", weight=1.55)],
        rows, st, dimmed=[e["voided"] for e in events],
    ))
    voids = [e for e in events if e["voided"]]
    if voids:
        story.append(Spacer(1, 4))
        story.append(_p("Struck-through rows are voided events: they stay in the record and count in "
                        "no figure; the correction's event number and reason stand beside them, and the "
                        "correction itself is an ordinary row.", st.small))
    story.append(_p("The last column shows who entered each event into the ledger, when (UTC) and the "
                    "first digits of its chain hash; an entry made well after the day it records says "
                    "how many days later.", st.small))

    if book.get("findings"):
        story.append(CondPageBreak(80))
        story.append(_p(f"Findings ({len(book['findings'])}): detector evidence and rule notes", st.lead))
        story.append(table(
            [Col("severity", weight=0.6), Col("source", weight=1.4), Col("finding", weight=5)],
            [[f["severity"], f["source"], f["message"]] for f in book["findings"]], st,
        ))
    story.append(CondPageBreak(160))
    obligations = book["obligations"]
    met = sum(1 for o in obligations if o["state"] in ("met", "met late"))
    late = sum(1 for o in obligations if o["state"] == "met late")
    story.append(_p(f"Obligations: {len(missed)} missed, "
                    f"{sum(1 for o in obligations if o['state'] == 'open')} open, {met} met"
                    + (f" ({late} late)" if late else "")
                    + (f"; next due {fmt(next_due, DATE)}" if next_due else ""), st.lead))
    if obligations:
        story.append(_obligation_table(obligations, st, with_system=False))
    else:
        story.append(_p("No obligations under the site's regimes in this period.", st.body))

    if book["leak_rates"]:
        story.append(CondPageBreak(160))
        counted = [r for r in book["leak_rates"] if r["percent"] is not None]
        top = max(counted, key=lambda r: r["percent"], default=None)
        lead = "Leak rate at each addition (US method)"
        if top is not None:
            lead = (f"Highest leak rate {fmt(top['percent'], PERCENT)} % on {fmt(top['on'], DATE)} "
                    f"(threshold {fmt(top['threshold_percent'], PERCENT, 0)} %)")
        story.append(_p(lead, st.lead))
        story.append(table(
            [Col("added on", DATE), Col("added (kg)", KG), Col("full charge (kg)", KG),
             Col("annualizing (%)", PERCENT), Col("rolling (%)", PERCENT),
             Col("method used"), Col("threshold (%)", PERCENT), Col("exceeded"),
             Col("note", weight=3)],
            [[r["on"], r["added_kg"], r["full_charge_kg"], r["annualizing_percent"],
              r["rolling_percent"], r["method"], r["threshold_percent"],
              "EXCEEDED" if r["exceeded"] else "", r["note"]] for r in book["leak_rates"]],
            st, marked=[r["exceeded"] for r in book["leak_rates"]],
        ))

    if book["record_items"]:  # the record items the site's regimes ask for (none: no table)
        story.append(CondPageBreak(200))
        story.append(_p(f"Where this logbook shows each record item of {book['record_title']}", st.lead))
        story.append(table([Col("item", weight=0.4), Col("record item", weight=3), Col("shown in", weight=5)],
                           [list(r) for r in book["record_items"]], st))
    story.append(Spacer(1, 8))
    story.append(_p(f"Chain head: {book['chain_head'] or '(no events)'} - the hash of the system's last "
                    f"recorded event ({book['events_total']} events). `refledger verify` recomputes "
                    "the chain; a matching head ties this paper to the ledger.", st.body))
    story += _integrity_paragraphs(book, st)
    story.append(Spacer(1, 6))
    story.append(_caution_box(st))
    return _build(
        Path(path), story,
        title=f"System logbook {ref}",
        running=f"System logbook {ref} - {period}",
        footer=(f"refledger {book['version']} - generated {fmt(book['generated_at'], DATETIME)}"
                " - local regulation and the competent authority govern (see caution)"),
        footer_mono=_unverified_mark(book) + f"chain head {book['chain_head'] or '-'}",
    )


def _not_verified(report: Mapping[str, Any], st: _Styles) -> list[Flowable]:
    """A prominent block on the first page when the report's chains did not verify."""
    check = report.get("integrity")
    if not check or check["verified"]:
        return []
    lines = "<br/>".join(escape(f"NOT VERIFIED: {p}") for p in check["problems"][:8])
    return [Spacer(1, 4), _markup(f'<font color="#b00020"><b>{lines}</b></font>', st.lead), Spacer(1, 4)]


def _integrity_paragraphs(report: Mapping[str, Any], st: _Styles) -> list[Flowable]:
    """The integrity lines (verification now, covering checkpoint) as paragraphs."""
    check = report.get("integrity")
    if not check:
        return []
    return [_p(line, st.body) for line in report_lines(check)]


def _unverified_mark(report: Mapping[str, Any]) -> str:
    check = report.get("integrity")
    return "NOT VERIFIED - " if check and not check["verified"] else ""


# --- generic list (due list) ------------------------------------------------------------------


def write_list_pdf(
    path: Path,
    *,
    title: str,
    subtitle: str,
    lead: str,
    key_tiles: Sequence[Tile],
    columns: Sequence[Col],
    rows: Sequence[Sequence[Any]],
    marked: Sequence[bool],
    footer: str,
    footer_mono: str = "",
    extra: Callable[[_Styles], list[Flowable]] | None = None,
) -> Path:
    """A one-table report: title, tiles, lead, table, caution (used by the due list)."""
    st = _styles()
    story: list[Flowable] = [_p(title, st.title), _p(subtitle, st.subtitle)]
    if key_tiles:
        story += [tiles(key_tiles, st), Spacer(1, 10)]
    story.append(_caution_box(st))
    story.append(Spacer(1, 10))
    story.append(_p(lead, st.lead))
    story.append(table(columns, rows, st, marked=marked))
    if extra is not None:
        story += extra(st)
    return _build(Path(path), story, title=title, running=title, footer=footer,
                  footer_mono=footer_mono)
