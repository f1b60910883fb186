"""PDFs: the key content is in the text layer, and the first page renders as something visible."""

from __future__ import annotations

import re
import shutil
import subprocess
from pathlib import Path

import pytest
from pypdf import PdfReader

from ledger.exports.common import CAUTION
from ledger.exports.pdf import write_annual_pdf, write_logbook_pdf
from tests.exports.test_xlsx import sample_logbook, sample_summary


def text_of(path: Path) -> str:
    """All pages' text, whitespace collapsed (lines wrap anywhere in a PDF)."""
    reader = PdfReader(str(path))
    return re.sub(r"\s+", " ", " ".join(page.extract_text() or "" for page in reader.pages))


def first_page_is_not_blank(path: Path) -> None:
    """Render page 1 with pdftoppm and check that some pixels are not white."""
    if shutil.which("pdftoppm") is None:
        pytest.skip("pdftoppm (poppler-utils) is not installed")
    from PIL import Image

    prefix = path.with_suffix("")
    subprocess.run(["pdftoppm", "-png", "-r", "50", "-f", "1", "-l", "1", str(path), str(prefix)],
                   check=True, capture_output=True)
    png = next(path.parent.glob(prefix.name + "*.png"))
    with Image.open(png) as img:
        grey = img.convert("L")
        dark = sum(grey.histogram()[:200])  # pixels darker than light grey
        assert dark > grey.width * grey.height * 0.01  # at least 1 % of the page is ink


def test_annual_pdf(tmp_path: Path) -> None:
    s = sample_summary()
    path = write_annual_pdf(tmp_path / "annual.pdf", s)
    text = text_of(path)
    reader = PdfReader(str(path))
    assert reader.metadata.title == "Annual refrigerant loss summary 2025"
    assert "Refrigerant losses 2025" in text
    # key figures of page 1: kg added, t CO2e, chronic leakers, overdue obligations
    e = s["estate"]
    page1 = re.sub(r"\s+", " ", reader.pages[0].extract_text())
    assert f"{e['added_kg']:,.1f} kg" in page1
    assert f"{e['co2e_t']:,.1f} t" in page1
    assert "chronic leakers" in page1 and "obligations overdue" in page1
    assert e["chronic"] == 1 and e["overdue"] == 1
    assert CAUTION in text
    assert s["chain"]["digest"] in text
    for m in s["scope1"]:
        assert m["label"] in text
    assert "Table 7.9" in text or "T7.9" in text
    first_page_is_not_blank(path)


def test_logbook_pdf(tmp_path: Path) -> None:
    book = sample_logbook()
    path = write_logbook_pdf(tmp_path / "logbook.pdf", book)
    text = text_of(path)
    assert "System logbook DE-HAM/LT-RACK" in text
    assert book["chain_head"] in text
    assert CAUTION in text
    assert "VOIDED by event 5: typed 65 kg, was 6.5 kg" in text
    assert "Ada Novak" in text and "DE-I-2041" in text
    assert "refledger " + book["version"] in text
    for item in ("(a)", "(b)", "(c)", "(d)", "(e)", "(f)", "(g)"):
        assert item in text
    first_page_is_not_blank(path)


def test_us_logbook_shows_pounds_and_leak_rates(tmp_path: Path) -> None:
    book = sample_logbook(2)
    text = text_of(write_logbook_pdf(tmp_path / "us.pdf", book))
    assert "26.0 lb" in text  # 11.793402 kg = 26.000 lb (1 lb = 0.45359237 kg exactly)
    assert "Highest leak rate" in text and "EXCEEDED" in text
