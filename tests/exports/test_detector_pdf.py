"""Smoke test of the detector review PDF: it opens, has pages, and says the key things."""

from __future__ import annotations

from datetime import date
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from ledger.domain.detector import ChannelConfig, review_channel
from ledger.exports.detector_pdf import DETECTOR_CAUTION, MAX_EPISODE_ROWS, render_review_pdf

pypdf = pytest.importorskip("pypdf")

# R-134a, CoolProp's molar mass (PropsSI("M", "R134a") = 0.102032 kg/mol).
M_R134A = 102.032


def _readings(days: int) -> pd.DataFrame:
    """Constructed: 4 ppm with noise, a 20-minute release to 60 ppm every 6 h, one 300 ppm hour."""
    t = pd.date_range("2025-03-01", periods=days * 1440, freq="min", tz="UTC")
    m = np.arange(len(t))
    ppm = 4 + np.random.default_rng(1).normal(0, 0.5, len(t)) + 56.0 * ((m % 360) < 20)
    ppm[5 * 1440 + 600 : 5 * 1440 + 660] = 300.0
    return pd.DataFrame({"time": t, "ppm": ppm})


def _text(path: Path) -> tuple[int, str]:
    reader = pypdf.PdfReader(str(path))
    text = "\n".join(page.extract_text() for page in reader.pages)
    return len(reader.pages), " ".join(text.split())


def test_review_pdf_has_key_figures_charts_episodes_and_caution(tmp_path: Path) -> None:
    df = _readings(14)
    repairs = [date(2025, 3, 7)]
    review = review_channel(
        df, ChannelConfig("A3", timezone="Europe/Berlin"), defrost_every_hours=6.0, repairs=repairs
    )
    out = render_review_pdf(
        tmp_path / "review.pdf",
        review,
        df,
        title="Detector review: cold room 2",
        system_label="DE-HAM / LT-RACK",
        refrigerant="R-134a",
        molar_mass_g_mol=M_R134A,
        repairs=repairs,
    )
    pages, text = _text(out)
    assert pages >= 2
    assert "Detector review: cold room 2" in text
    assert "Key figures" in text
    # Peak 300 ppm of R-134a: 300 x 102.032 / 24.45 = 1 252 mg/m³ (formula of reference-notes).
    assert "300.0 ppm = 1,252 mg/m" in text
    assert "6.0 h" in text and "matches the recorded defrost interval of 6 h" in text
    assert "after the repair of 2025-03-07; the follow-up check is questionable" in text
    assert "Episodes" in text and "ppm-hours" in text
    assert "local regulation governs" in text
    assert "fall under their own standards" in text
    assert "Local regulation and the competent authority govern" in text  # the ledger caution
    assert pypdf.PdfReader(str(out)).metadata.title == "Detector review: cold room 2"


def test_long_episode_lists_are_cut_with_a_note(tmp_path: Path) -> None:
    df = _readings(60)  # 4 releases a day: 240 episodes at level 1
    review = review_channel(df, ChannelConfig("A3", timezone="UTC"))
    assert len(review.episodes_at(1)) > MAX_EPISODE_ROWS
    out = render_review_pdf(
        tmp_path / "long.pdf",
        review,
        df,
        title="Long review",
        system_label="S",
        refrigerant="R-134a",
        molar_mass_g_mol=M_R134A,
        caution="",
    )
    _, text = _text(out)
    assert "more episodes (all are in the JSON export)" in text
    assert " ".join(DETECTOR_CAUTION.split()[:8]) in text


def test_empty_review_still_renders(tmp_path: Path) -> None:
    df = pd.DataFrame({"time": pd.Series([], dtype="datetime64[us, UTC]"), "ppm": []})
    review = review_channel(df, ChannelConfig("A3", timezone="UTC"))
    out = render_review_pdf(
        tmp_path / "empty.pdf",
        review,
        df,
        title="Empty",
        system_label="S",
        refrigerant="R-134a",
        molar_mass_g_mol=M_R134A,
    )
    pages, text = _text(out)
    assert pages == 1 and "No readings above level 1." in text
