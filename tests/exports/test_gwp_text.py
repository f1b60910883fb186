"""GWPs are shown as their table gives them: no rounding of a value below 1 to 0 or 1."""

from decimal import Decimal

from ledger.exports.common import gwp_text
from ledger.reference import load_reference


def test_a_gwp_below_one_is_shown_as_the_regulation_gives_it():
    # Reg. (EU) 2024/573 Annex II: HFC-1234yf 0,501 (reference-notes.md, "Checked in December 2026")
    gwp = load_reference().gwp("R-1234yf", "eu").value
    assert gwp == Decimal("0.501")
    assert gwp_text(gwp) == "0.501"


def test_whole_and_blank_gwps():
    # R-404A 3922 (IPCC AR4, as in Reg. (EU) 517/2014 Annex IV): thousands marked, no decimals
    assert gwp_text(Decimal("3922")) == "3,922"
    assert gwp_text(Decimal("12400")) == "12,400"  # PFC-116 under 2024/573 Annex I
    assert gwp_text(1) == "1"
    assert gwp_text(None) == ""
