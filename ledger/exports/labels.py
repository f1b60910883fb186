"""A sheet of system labels: each with a QR code that opens the system's web page, and its code
(SITE/TAG) in large type so it can also be typed. A4, 3 x 7 labels of 70 x 42.3 mm (a common
self-adhesive layout; common practice, no source). QR codes are drawn as vector squares from
segno's module matrix, error correction level M.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

from ledger.exports.common import INK, MUTED

COLUMNS, ROWS = 3, 7
LABEL_W_MM, LABEL_H_MM = 70.0, 42.3
QUIET_MODULES = 2  # white border around the code, in modules


def qr_matrix(text: str) -> list[list[bool]]:
    """The dark/light modules of the QR code of ``text`` (rows, top first)."""
    import segno

    code = segno.make(text, error="m", micro=False)
    return [[bool(m) for m in row] for row in code.matrix]


def _draw_qr(canvas: Any, matrix: list[list[bool]], x: float, y: float, size: float) -> None:
    n = len(matrix) + 2 * QUIET_MODULES
    cell = size / n
    canvas.setFillColor(INK)
    for r, row in enumerate(matrix):
        for c, dark in enumerate(row):
            if dark:
                canvas.rect(x + (c + QUIET_MODULES) * cell, y + size - (r + 1 + QUIET_MODULES) * cell,
                            cell, cell, stroke=0, fill=1)


def write_label_sheet(path: Path, rows: Sequence[Mapping[str, Any]], *, title: str) -> Path:
    """Write label sheets (as many pages as needed).

    Args:
        path: the .pdf file to write.
        rows: ``queries.label_rows`` output (code, description, refrigerant, url).
        title: the PDF's title.
    Returns:
        The path written.
    """
    from reportlab.lib.pagesizes import A4
    from reportlab.lib.units import mm
    from reportlab.pdfgen.canvas import Canvas

    from ledger.exports.pdf import _fonts

    fonts = _fonts()
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    canvas = Canvas(str(path), pagesize=A4)
    canvas.setTitle(title)
    page_w, page_h = A4
    w, h = LABEL_W_MM * mm, LABEL_H_MM * mm
    left = (page_w - COLUMNS * w) / 2
    top = page_h - (page_h - ROWS * h) / 2
    per_page = COLUMNS * ROWS
    for i, row in enumerate(rows):
        if i and i % per_page == 0:
            canvas.showPage()
        slot = i % per_page
        x = left + (slot % COLUMNS) * w
        y = top - (slot // COLUMNS + 1) * h
        qr = h - 6 * mm
        _draw_qr(canvas, qr_matrix(str(row["url"])), x + 2 * mm, y + 3 * mm, qr)
        tx = x + 3 * mm + qr
        canvas.setFillColor(INK)
        code = str(row["code"])
        size = 11 if len(code) <= 16 else 8
        canvas.setFont(fonts["bold"], size)
        canvas.drawString(tx, y + h - 10 * mm, code)
        canvas.setFont(fonts["regular"], 7)
        canvas.setFillColor(MUTED)
        canvas.drawString(tx, y + h - 15 * mm, str(row.get("refrigerant") or "")[:30])
        canvas.drawString(tx, y + h - 19 * mm, str(row.get("description") or "")[:30])
        canvas.drawString(tx, y + 5 * mm, "scan or type the code above")
    if not rows:
        canvas.setFont(fonts["regular"], 10)
        canvas.drawString(20 * mm, page_h - 20 * mm, "No systems in service at this site.")
    canvas.save()
    return path
