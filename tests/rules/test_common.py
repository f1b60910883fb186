"""Shared rule helpers (ledger.rules.common) and the regime registry (ledger.rules)."""

from __future__ import annotations

import ast
import dataclasses
from decimal import Decimal
from pathlib import Path

import pytest

from ledger.domain.records import (
    Basis,
    Confidence,
    ObligationStatus,
    Severity,
)
from ledger.rules import REGIMES, compute_all, default_regimes
from ledger.rules.common import (
    MONTH,
    QUARTER,
    YEAR,
    Cadence,
    Constant,
    Segment,
    at_least_lb,
    calendar_windows,
    detection_triggers,
    fmt_t,
    interval_windows,
    kg_of,
    late_note,
    period_end,
    service_segments,
    status_of,
)
from tests.domain import D, Log, kg, site, system
from tests.rules import REF

ROOT = Path(__file__).resolve().parents[2]
BASIS = Basis("test", Confidence.MEMORY)
OPEN, MET, OVERDUE = ObligationStatus.OPEN, ObligationStatus.MET, ObligationStatus.OVERDUE


# --- helpers ----------------------------------------------------------------------------------


def test_constant_is_frozen():
    c = Constant("x", Decimal(5), "t CO2e", BASIS)
    with pytest.raises(dataclasses.FrozenInstanceError):
        c.value = 6  # type: ignore[misc]


def test_pound_thresholds_compare_exactly_in_nanograms():
    # 1 lb = 0.45359237 kg exactly (international pound, 1959 agreement) = 453 592 370 000 ng:
    # 50 lb = 22 679 618 500 000 ng, 15 lb = 6 803 885 550 000 ng, 500 lb = 226 796 185 000 000 ng
    assert at_least_lb(22_679_618_500_000, 50) and not at_least_lb(22_679_618_499_999, 50)
    assert at_least_lb(6_803_885_550_000, 15) and not at_least_lb(6_803_885_549_999, 15)
    assert at_least_lb(226_796_185_000_000, 500) and not at_least_lb(226_796_184_999_999, 500)


def test_masses_and_display():
    assert kg_of(1_324_504_000_000) == Decimal("1.324504")
    # truncated, never rounded up across a threshold (our display rule)
    assert fmt_t(Decimal("4.9999999")) == "4.999 t CO2e"


def test_period_ends():
    # calendar: month, quarter and year ends
    assert period_end(D(2024, 2, 10), MONTH) == D(2024, 2, 29)
    assert period_end(D(2025, 5, 10), QUARTER) == D(2025, 6, 30)
    assert period_end(D(2025, 5, 10), YEAR) == D(2025, 12, 31)
    with pytest.raises(ValueError):
        period_end(D(2025, 5, 10), "week")


def test_status_and_late_note():
    log = Log()
    done = log.check(D(2025, 3, 3))
    assert status_of(D(2025, 3, 1), None, D(2025, 3, 1)) is OPEN  # due today: still open
    assert status_of(D(2025, 3, 1), None, D(2025, 3, 2)) is OVERDUE
    assert status_of(D(2025, 3, 1), done, D(2025, 3, 9)) is MET
    assert late_note(D(2025, 3, 1), done) == "; done 2025-03-03, 2 days late"
    assert late_note(D(2025, 3, 3), done) == ""


def test_service_segments_split_at_retrofit_and_retirement():
    log = Log()
    a = log.in_service(D(2024, 1, 1), "R-404A", kg(10))
    b = log.retrofit(D(2024, 6, 1), "R-448A", kg(10))
    log.retire(D(2025, 1, 1))
    c = log.in_service(D(2025, 3, 1), "R-448A", kg(10))
    assert service_segments(log.events) == [
        Segment(D(2024, 1, 1), a.id, D(2024, 6, 1)),
        Segment(D(2024, 6, 1), b.id, D(2025, 1, 1)),
        Segment(D(2025, 3, 1), c.id, None),
    ]


def test_detection_triggers_and_lapses():
    # hand-worked: needed from 1 Jan, fitted 1 Feb, removed 1 Mar, need ends 1 Apr
    need = {D(2025, 1, 1): True, D(2025, 2, 1): True, D(2025, 3, 1): True, D(2025, 4, 1): False}
    have = {D(2025, 1, 1): False, D(2025, 2, 1): True, D(2025, 3, 1): False, D(2025, 4, 1): False}
    assert detection_triggers(need, need.__getitem__, have.__getitem__) == [
        (D(2025, 1, 1), None), (D(2025, 3, 1), D(2025, 4, 1))]


def test_interval_windows_restart_and_miss():
    log = Log()
    start = log.in_service(D(2025, 1, 31), "x", 1)
    check = log.check(D(2025, 4, 15))
    cadence = Cadence("3-month check", BASIS, months=3)
    windows = interval_windows(segments=[Segment(D(2025, 1, 31), start.id, None)],
                               cadence_at=lambda _d: cadence, change_dates=[], checks=[check],
                               events=log.events, as_of=D(2025, 9, 1))
    # hand-worked from the interval rule in docs/rules/README.md and design.md §4:
    # (31 Jan, 30 Apr] met on 15 Apr; (15 Apr, 15 Jul] missed; (15 Jul, 15 Oct] open
    assert [(w.opens_on, w.due_on, w.status) for w in windows] == [
        (D(2025, 2, 1), D(2025, 4, 30), MET),
        (D(2025, 4, 16), D(2025, 7, 15), OVERDUE),
        (D(2025, 7, 16), D(2025, 10, 15), OPEN),
    ]


def test_calendar_windows_by_quarter():
    log = Log()
    check = log.check(D(2025, 5, 2))
    cadence = Cadence("quarterly", BASIS, period=QUARTER)
    # hand-worked from design.md §4 ("once per calendar quarter" = end of the quarter)
    windows = calendar_windows(spans=[(D(2025, 2, 10), None, None)], stop_on=None,
                               cadence_at=lambda _d: cadence, change_dates=[], checks=[check],
                               as_of=D(2025, 8, 1))
    assert [(w.opens_on, w.due_on, w.status) for w in windows] == [
        (D(2025, 2, 10), D(2025, 3, 31), OVERDUE),
        (D(2025, 4, 1), D(2025, 6, 30), MET),
        (D(2025, 7, 1), D(2025, 9, 30), OPEN),
    ]


# --- registry ---------------------------------------------------------------------------------


def test_regimes_are_read_only_and_complete():
    assert set(REGIMES) == {"eu", "gb", "us-82f", "us-84c", "us-ca", "us-wa"}
    with pytest.raises(TypeError):
        REGIMES["xx"] = REGIMES["eu"]  # type: ignore[index]
    for code, module in REGIMES.items():
        assert module.REGIME_VERSION and module.TITLE, code
        assert module.GWP_BASIS == {"eu": "eu", "gb": "gb"}.get(code, "ar4")
        assert module.CONSTANTS and all(isinstance(c, Constant) for c in module.CONSTANTS)
        assert all(c.basis.citation and c.basis.confidence for c in module.CONSTANTS)


@pytest.mark.parametrize(
    ("country", "subdivision", "expected"),
    [
        ("DE", None, ("eu",)),  # EU member state (the 27 members, public EU list)
        ("fr", None, ("eu",)),
        ("GR", None, ("eu",)),
        ("GB", None, ("gb",)),  # Great Britain: retained 517/2014 (reference-notes.md)
        ("UK", "GB-ENG", ("gb",)),
        ("GB", "GB-NIR", ("eu",)),  # Northern Ireland: EU F-gas rules (from memory)
        ("US", None, ("us-82f", "us-84c")),
        ("US", "US-TX", ("us-82f", "us-84c")),
        ("US", "US-CA", ("us-82f", "us-84c", "us-ca")),  # 17 CCR 95380 ff. in California
        ("US", "US-WA", ("us-82f", "us-84c", "us-wa")),  # chapter 173-443 WAC in Washington
        ("CH", None, ()),  # not an EU member state (public EU list)
        ("JP", None, ()),
    ],
)
def test_default_regimes(country, subdivision, expected):
    assert default_regimes(country, subdivision) == expected


def _eu_log(system_id=1, first_id=1, refrigerant="TEST-1000", charge=kg(20), start=D(2025, 1, 31)):
    log = Log(system_id=system_id, first_id=first_id)
    log.in_service(start, refrigerant, charge)
    return log


def test_compute_all_unions_sites_and_sorts_by_due_date():
    de, us = site("DE1", "DE", ("eu",)), site("US1", "US", ("us-82f", "us-84c"))
    a = _eu_log(1, 1, start=D(2025, 3, 1))
    b = _eu_log(2, 100, start=D(2025, 1, 31))
    c = Log(system_id=3, first_id=200)
    c.in_service(D(2026, 1, 1), "R-404A", kg(100))
    c.top_up(D(2026, 2, 1), kg(30))
    histories = [a.history(de, system(1, "DE1")), c.history(us, system(3, "US1")),
                 b.history(de, system(2, "DE1"))]
    obs, findings = compute_all(histories, REF, D(2026, 2, 2))
    assert [o.due_on for o in obs] == sorted(o.due_on for o in obs)
    assert {(o.regime, o.system_id) for o in obs} == {("eu", 1), ("eu", 2), ("us-84c", 3)}
    assert findings == []


def test_site_without_regime_gets_an_info_finding():
    nowhere = site("CH1", "CH", ())
    obs, findings = compute_all([_eu_log().history(nowhere, system(1, "CH1"))], REF, D(2025, 6, 1))
    assert obs == []
    assert [(f.severity, f.message) for f in findings] == [
        (Severity.INFO, "no covered regime applies: site CH1 has no regime")]


def test_system_no_regime_covers_gets_an_info_finding():
    log = _eu_log(refrigerant="R-744", charge=kg(500))
    obs, findings = compute_all([log.history(site("DE1"), system(1, "S1"))], REF, D(2025, 6, 1))
    assert obs == [] and findings[0].severity is Severity.INFO
    assert "eu: R-744 is not a fluorinated gas: out of scope" in findings[0].message


def test_unknown_regime_code_is_a_warning_and_duplicate_findings_are_merged():
    odd = site("US2", "US", ("us-82f", "us-84c", "xx"))
    log = Log()
    log.in_service(D(2026, 1, 1), "R-9999X", kg(100))
    _, findings = compute_all([log.history(odd, system(1, "US2"))], REF, D(2026, 6, 1))
    messages = [f.message for f in findings]
    assert any("unknown regime 'xx'" in m for m in messages)
    assert sum("R-9999X" in m for m in messages) == 1  # said by two regimes, given once


def test_every_regime_has_a_docs_page_and_a_test_file():
    for code in REGIMES:
        assert (ROOT / "docs" / "rules" / f"{code}.md").is_file(), code
        module = code.replace("-", "_")
        assert (ROOT / "tests" / "rules" / f"test_{module}.py").is_file(), code
    assert (ROOT / "docs" / "rules" / "README.md").is_file()


def test_rules_do_no_io_and_read_no_clock():
    # conventions.md §1: rules and domain import no store/ORM and never call date.today()
    files = [*(ROOT / "ledger" / "rules").glob("*.py"), ROOT / "ledger" / "domain" / "leak_rate.py"]
    banned = ("sqlmodel", "sqlalchemy", "ledger.store", "ledger.services", "ledger.cli")
    for path in files:
        tree = ast.parse(path.read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            if isinstance(node, ast.Import | ast.ImportFrom):
                names = [a.name for a in node.names] if isinstance(node, ast.Import) else [
                    node.module or ""]
                assert not any(n.startswith(banned) for n in names), (path, names)
            if isinstance(node, ast.Attribute) and node.attr in ("today", "now", "utcnow"):
                raise AssertionError(f"{path}: reads the clock")
            if isinstance(node, ast.Name) and node.id in ("open", "print"):
                raise AssertionError(f"{path}: does I/O")



def test_site_profile_reads_the_regimes_declarations():
    from ledger.exports.common import ART6_MAP
    from ledger.rules import site_profile

    us = site_profile(("us-82f", "us-84c", "us-ca"))
    # US 40 CFR 82.157(j): a report when 125 % or more of the full charge is added in a year
    assert (us.gwp_basis, us.mass_unit, us.leak_rates, us.chronic_percent) == (
        "ar4", "lb", True, Decimal(125))
    assert us.record_items == () and us.record_title is None
    eu = site_profile(("eu",))
    assert (eu.gwp_basis, eu.mass_unit, eu.leak_rates, eu.chronic_percent) == ("eu", "kg", False, None)
    assert eu.record_items == ART6_MAP and len(eu.record_items) == 7  # 517/2014 Art 6(a)-(g)
    assert site_profile(("gb",)).gwp_basis == "gb"
    none = site_profile(("xx",))  # unknown codes are skipped: the fallbacks apply
    assert (none.regimes, none.gwp_basis, none.mass_unit) == ((), "eu", "kg")
