"""Servicing prohibitions and exposure (ledger/rules/servicing.py, reference/servicing.csv).

Check values: Reg. (EU) 2024/573 Art 13(3) consolidated text (EUR-Lex 02024R0573-20240220,
read Dec 2026 via fantasticsearch.net): "the use of fluorinated greenhouse gases, with a global
warming potential of 2 500 or more, for the maintenance or servicing of refrigeration equipment
with a charge size of 40 tonnes of CO2 equivalent or more, shall be prohibited. From 1 January
2025, … any refrigeration equipment …", reclaimed / recycled gas excepted "until 1 January
2030". HCFC dates (2015, Reg. (EC) 1005/2009 Art 11(3)) from memory; US 2029 reclaim
requirement secondary (reference-notes.md). GWPs: R-404A 3 922 under 517/2014 (published
figure, reference-notes.md); 2024/573 values as in tests/rules/__init__.py.
"""

from __future__ import annotations

from decimal import Decimal

from ledger.domain.records import Application, Event, EventKind
from ledger.domain.state import state_of
from ledger.reference import load_reference
from ledger.reference.servicing import load_retrofits, load_servicing
from ledger.rules import servicing
from ledger.units import parse_mass_ng
from tests.domain import D, Log, site, system

REF = load_reference()
BANS = load_servicing()
TARGETS = load_retrofits()


def _history(regimes, country, refrigerant, charge, application=Application.COMMERCIAL_REFRIGERATION):
    log = Log()
    log.in_service(D(2015, 1, 1), refrigerant, parse_mass_ng(charge))
    return log, log.history(site("S1", country, regimes), system(1, "S1", application=application))


def test_every_prohibition_row_names_its_basis_and_mark():
    assert {b.confidence for b in BANS} <= {"checked", "secondary", "memory"}
    assert all(b.citation and b.note for b in BANS)
    assert {b.regime for b in BANS} == {"eu", "gb", "us-84c"}


def test_eu_2500_gwp_40_t_then_any_refrigeration_from_2025():
    # R-404A 12 kg: 12 x 3921.6 / 1000 = 47.06 t >= 40 t (2024/573 Art 13(3) first sentence)
    _, big = _history(("eu",), "DE", "R-404A", "12 kg")
    rows = servicing.exposure([big], REF, BANS, TARGETS, D(2024, 6, 1))
    assert [(e.ban.code, e.in_force) for e in rows] == [
        ("eu-2500-40t", True), ("eu-2500-any", False), ("eu-2500-2030", False)]
    # 5 kg = 19.6 t: caught only from 1 January 2025 ("any refrigeration equipment")
    _, small = _history(("eu",), "DE", "R-404A", "5 kg")
    rows = servicing.exposure([small], REF, BANS, TARGETS, D(2025, 1, 1))
    assert [(e.ban.code, e.in_force) for e in rows] == [("eu-2500-any", True), ("eu-2500-2030", False)]
    assert rows[0].co2e_t == Decimal("19.608")  # 5 kg x 3921.6 / 1000
    # a retrofit to R-448A (2024/573 basis 1385.9961) saves 5 x (3921.6 - 1385.9961) / 1000
    assert rows[0].retrofit == "R-448A"
    assert rows[0].saved_t == Decimal(5) * (Decimal("3921.6") - Decimal("1385.9961")) / 1000


def test_eu_ban_does_not_reach_air_conditioning_or_low_gwp():
    _, ac = _history(("eu",), "DE", "R-404A", "12 kg", Application.COMFORT_COOLING)
    _, low = _history(("eu",), "DE", "R-448A", "10 kg")  # 13.9 t, GWP < 2 500 and < 40 t
    assert servicing.exposure([ac, low], REF, BANS, TARGETS, D(2026, 1, 1)) == []


def test_gb_hcfc_and_us_reclaim_dates():
    _, r22 = _history(("gb",), "GB", "R-22", "5.6 kg")
    gb_rows = servicing.exposure([r22], REF, BANS, TARGETS, D(2026, 12, 1))
    assert [(e.ban.code, e.ban.from_on, e.in_force) for e in gb_rows] == [("gb-hcfc", D(2015, 1, 1), True)]
    _, rack = _history(("us-82f", "us-84c"), "US", "R-404A", "480 lb")
    us_rows = servicing.exposure([rack], REF, BANS, TARGETS, D(2026, 12, 1))
    assert [(e.regime, e.ban.from_on, e.in_force) for e in us_rows] == [("us-84c", D(2029, 1, 1), False)]


def test_2026_12_virgin_hcfc_top_up_in_gb_is_recorded_with_a_warning():
    # Issue 14 item 6: Reg. (EC) 1005/2009 Art 11(3) and the GB retained version (from memory):
    # no HCFC for servicing after 2014. The event is recorded; the finding says so.
    log, h = _history(("gb",), "GB", "R-22", "5.6 kg")
    add = Event(id=99, system_id=1, kind=EventKind.ADD, performed_on=D(2026, 2, 11),
                mass_ng=parse_mass_ng("1.2 kg"))
    state = state_of(h.events, D(2026, 2, 11))
    found = servicing.top_up_findings(h.system, ("gb",), state, add, REF, BANS, "S1/SYS1")
    assert len(found) == 1 and "servicing prohibited" in found[0].message
    assert "recorded as done" in found[0].message
    before = Event(id=98, system_id=1, kind=EventKind.ADD, performed_on=D(2014, 6, 1),
                   mass_ng=parse_mass_ng("1 kg"))
    assert servicing.top_up_findings(h.system, ("gb",), state_of(h.events, D(2014, 6, 1)), before,
                                     REF, BANS, "S1/SYS1") == []
    # reclaimed HFC of GWP >= 2 500 into big EU refrigeration is allowed until 2030
    _, big = _history(("eu",), "DE", "R-404A", "12 kg")
    reclaimed = Event(id=97, system_id=1, kind=EventKind.ADD, performed_on=D(2026, 3, 1),
                      mass_ng=parse_mass_ng("1 kg"), reclaimed=True)
    st = state_of(big.events, D(2026, 3, 1))
    assert servicing.top_up_findings(big.system, ("eu",), st, reclaimed, REF, BANS, "x") == []
