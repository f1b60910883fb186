"""Report data: totals reconcile with the events, the spreadsheet agrees with the JSON, logbooks
show every event (voided ones marked) and the chain head, on both databases.
"""

from __future__ import annotations

import json
from datetime import date, timedelta
from decimal import Decimal
from pathlib import Path

import openpyxl
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from ledger.cli.render import dumps
from ledger.domain import emissions as em
from ledger.domain.drafts import EventDraft
from ledger.domain.records import (
    Application,
    Basis,
    Confidence,
    Event,
    EventKind,
    Obligation,
    ObligationKind,
    ObligationStatus,
    Site,
    System,
    SystemHistory,
)
from ledger.domain.state import effective_events, state_of
from ledger.reference import load_reference
from ledger.services import reporting
from ledger.services.recording import (
    add_cylinder,
    add_site,
    add_system,
    add_technician,
    log_event,
    void_event,
)
from ledger.store.db import Database

KG = 10**12  # ng per kg
REF = load_reference()
REFRIGERANTS = ("R-404A", "R-134a", "R-744", "R-410A", "R-290")
SITES = (
    Site(1, "DE-1", "Store one", "DE", None, "Europe/Berlin", ("eu",)),
    Site(2, "US-1", "Store two", "US", "US-TX", "America/Chicago", ("us-82f", "us-84c"), mass_unit="lb"),
)


@st.composite
def ledgers(draw) -> list[SystemHistory]:  # type: ignore[no-untyped-def]
    histories = []
    next_id = 1
    for sid in range(1, draw(st.integers(1, 6)) + 1):
        site = draw(st.sampled_from(SITES))
        system = System(sid, site.code, f"S{sid}",
                        application=draw(st.sampled_from(list(Application))))
        day = date(2022, 1, 1) + timedelta(days=draw(st.integers(0, 1200)))
        events = [Event(next_id, sid, EventKind.IN_SERVICE, day,
                        refrigerant=draw(st.sampled_from(REFRIGERANTS)),
                        charge_ng=draw(st.integers(1, 400 * KG)))]
        next_id += 1
        for _ in range(draw(st.integers(0, 15))):
            day += timedelta(days=draw(st.integers(1, 150)))
            kind = draw(st.sampled_from([EventKind.ADD, EventKind.ADD, EventKind.RECOVER,
                                         EventKind.CHECK, EventKind.RETROFIT, EventKind.RETIRE,
                                         EventKind.VOID]))
            kw: dict = {}
            if kind in (EventKind.ADD, EventKind.RECOVER, EventKind.RETIRE):
                kw["mass_ng"] = draw(st.integers(0, 50 * KG))
                kw["destination"] = draw(st.sampled_from(["reclaim", "destruction", None]))
            if kind is EventKind.RETROFIT:
                kw["refrigerant"] = draw(st.sampled_from(REFRIGERANTS))
                kw["charge_ng"] = draw(st.integers(1, 400 * KG))
            if kind is EventKind.VOID:
                targets = [e.id for e in events if e.kind not in (EventKind.IN_SERVICE, EventKind.VOID)]
                if not targets:
                    continue
                kw.update(voids_id=draw(st.sampled_from(targets)), reason="mistyped")
            events.append(Event(next_id, sid, kind, day, **kw))
            next_id += 1
            if kind is EventKind.RETIRE:
                break
        histories.append(SystemHistory(site, system, tuple(events)))
    return histories


def _in_year(h: SystemHistory, year: int) -> list[Event]:
    return [e for e in effective_events(h.events) if e.performed_on.year == year]


@settings(max_examples=80, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(ledgers(), st.integers(2022, 2026), st.sampled_from(["eu", "ar4", "ar5", "ar6"]))
def test_annual_totals_reconcile_with_events(histories: list[SystemHistory], year: int, basis: str) -> None:
    s = reporting.annual_data(histories, REF, year=year, basis=basis)
    added = sum(e.mass_ng or 0 for h in histories for e in _in_year(h, year) if e.kind is EventKind.ADD)
    recovered = sum(e.mass_ng or 0 for h in histories for e in _in_year(h, year)
                    if e.kind in (EventKind.RECOVER, EventKind.RETIRE))
    # the estate equals the events, to the nanogram
    assert s["estate"]["added_kg"] == Decimal(added) / KG
    assert s["estate"]["recovered_kg"] == Decimal(recovered) / KG
    # CO2e: every addition that is not an initial charge, times the GWP of what the system held
    co2e = Decimal(0)
    for h in histories:
        charged = {e.performed_on for e in effective_events(h.events)
                   if e.kind in (EventKind.IN_SERVICE, EventKind.RETROFIT)}
        for e in _in_year(h, year):
            if e.kind is EventKind.ADD and e.performed_on not in charged:
                gas = state_of(h.events, e.performed_on).refrigerant
                co2e += Decimal(e.mass_ng or 0) / KG * REF.gwp(gas, basis).value / 1000
    assert abs(s["estate"]["co2e_t"] - co2e) <= Decimal("0.0000005")  # rounded to the gram
    # every grouping adds up to the estate
    for group in ("systems", "sites", "refrigerants"):
        for key in ("added_kg", "recovered_kg", "full_charge_start_kg", "full_charge_end_kg",
                    "net_loss_kg", "initial_fill_kg"):
            assert sum((r[key] for r in s[group]), Decimal(0)) == s["estate"][key], (group, key)
        # each row's CO2e is rounded to the gram of CO2e: the sum may differ by half a gram a row
        slack = Decimal("0.0000005") * (len(s[group]) + 1)
        assert abs(sum((r["co2e_t"] for r in s[group]), Decimal(0)) - s["estate"]["co2e_t"]) <= slack
    # full charges at the year's ends equal the state fold
    start_charge = sum(state_of(h.events, date(year - 1, 12, 31)).full_charge_ng for h in histories
                       if state_of(h.events, date(year - 1, 12, 31)).in_service)
    assert s["estate"]["full_charge_start_kg"] == Decimal(start_charge) / KG
    # the simplified material balance's PS input is the additions excluding initial charges
    smb = s["scope1"][1]
    assert smb["method"] == em.SIMPLIFIED_MATERIAL_BALANCE
    # (estimates are rounded to the mg where they are made; masses of record stay exact in ng)
    places = reporting.KG_PLACES
    assert smb["inputs"].get("ps_kg", Decimal(0)) == reporting.rounded(s["estate"]["service_added_kg"], places)
    # the material balance, per refrigerant, adds up to the systems' net losses (HCFC parts
    # included); the scope 1 total counts only Kyoto-gas parts of 0 or more, the rest is
    # flagged (US EPA 2014 guidance / GHG Protocol: negative balances are not netted)
    mb = s["scope1"][0]
    parts = [p["emissions_kg"] for p in mb["by_refrigerant"] + mb["outside_scope1"]]
    # each part is rounded to the mg: the sum may differ by half a mg a part
    assert abs(sum(parts, Decimal(0)) - s["estate"]["net_loss_kg"]) <= Decimal("0.0000005") * len(parts)
    assert mb["emissions_kg"] == sum((p["emissions_kg"] for p in mb["by_refrigerant"]
                                      if p["emissions_kg"] >= 0), Decimal(0))
    negative = [p for p in mb["by_refrigerant"] if p["emissions_kg"].is_signed()]  # -0.000000 included
    assert len([f for f in mb["flags"] if "negative balance" in f]) == len(negative)


def test_chronic_leaker_and_obligations_counted() -> None:
    # 125 % rule (US 40 CFR 82.157(j), EPA fact sheet): 13 kg added to a 10 kg charge = 130 %
    site = SITES[1]
    sys_ = System(1, site.code, "RTU", application=Application.COMFORT_COOLING)
    h = SystemHistory(site, sys_, (
        Event(1, 1, EventKind.IN_SERVICE, date(2020, 1, 1), refrigerant="R-410A", charge_ng=10 * KG),
        Event(2, 1, EventKind.ADD, date(2025, 3, 1), mass_ng=6 * KG),
        Event(3, 1, EventKind.ADD, date(2025, 9, 1), mass_ng=7 * KG),
        Event(4, 1, EventKind.CHECK, date(2025, 9, 1), result="leak-found"),
    ))
    basis = Basis("test", Confidence.MEMORY)
    obs = [
        Obligation("us-82f", ObligationKind.LEAK_INSPECTION, date(2025, 6, 30), basis,
                   ObligationStatus.OVERDUE, system_id=1),
        Obligation("us-82f", ObligationKind.REPAIR, date(2025, 10, 1), basis,
                   ObligationStatus.MET, system_id=1, met_by=4),
        Obligation("us-82f", ObligationKind.REPORT, date(2026, 3, 1), basis,
                   ObligationStatus.OPEN, site_code=site.code),
    ]
    s = reporting.annual_data([h], REF, year=2025, basis="ar4", obligations=obs)
    row = s["systems"][0]
    assert row["chronic"] is True
    assert row["leak_rate_percent"] == Decimal(130)
    assert (row["checks_required"], row["checks_done"], row["checks_missed"], row["overdue"]) == (1, 1, 1, 1)
    # R-410A AR4 GWP = 0.5 x 675 + 0.5 x 3500 = 2087.5 (IPCC AR4 WG1 Table 2.14 components)
    assert row["co2e_t"] == Decimal(13) * Decimal("2087.5") / 1000
    assert s["estate"]["chronic"] == 1
    assert [o["state"] for o in s["obligations"]] == ["missed", "met"]  # the 2026 report is next year's


def test_default_basis() -> None:
    eu = SystemHistory(SITES[0], System(1, "DE-1", "A"), ())
    us = SystemHistory(SITES[1], System(2, "US-1", "B"), ())
    assert reporting.default_basis([eu]) == "eu"
    assert reporting.default_basis([us]) == "ar4"
    assert reporting.default_basis([eu, us]) == reporting.FALLBACK_BASIS == "eu"


# --- the spreadsheet equals the JSON ---------------------------------------------------------


@settings(max_examples=6, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(ledgers())
def test_spreadsheet_cells_equal_json(tmp_path: Path, histories: list[SystemHistory]) -> None:
    from ledger.exports.xlsx import write_annual_xlsx

    s = reporting.annual_data(histories, REF, year=2024, basis="eu")
    data = json.loads(dumps(s))  # exactly what `report annual --json` prints
    path = write_annual_xlsx(tmp_path / "a.xlsx", s)
    wb = openpyxl.load_workbook(path)
    for sheet, rows, keys in (
        ("systems", data["systems"], ("site", "system", "added_kg", "recovered_kg", "full_charge_kg",
                                      "full_charge_start_kg", "full_charge_end_kg", "net_loss_kg",
                                      "leak_rate_percent", "co2e_t", "chronic", "overdue")),
        ("sites", data["sites"], ("site", "added_kg", "recovered_kg", "co2e_t", "leak_rate_percent")),
        ("refrigerants", data["refrigerants"], ("refrigerant", "gwp", "added_kg", "co2e_t")),
    ):
        ws = wb[sheet]
        headers = [c.value for c in ws[1]]
        from ledger.exports.frames import annual_sheets

        spec = {c.key: c.header for c in next(x for x in annual_sheets(s) if x.name == sheet).columns}
        for i, row in enumerate(rows, start=2):
            for key in keys:
                column = "refrigerants" if key == "refrigerant" and sheet == "systems" else key
                cell = ws.cell(row=i, column=headers.index(spec[column]) + 1).value
                expected = row[key]
                if key == "chronic":
                    assert (cell == "yes") is expected
                elif sheet == "systems" and key == "refrigerant":
                    assert cell == " -> ".join(row["refrigerants"])
                else:
                    assert cell == expected, (sheet, i, key, cell, expected)
        if rows:
            total = [c.value for c in ws[len(rows) + 2]]
            assert total[0] == "total"
            letter = openpyxl.utils.get_column_letter(headers.index(spec["added_kg"]) + 1)
            assert total[headers.index(spec["added_kg"])] == f"=SUM({letter}2:{letter}{len(rows) + 1})"
    estate = {r[0].value: r[1].value for r in wb["estate"].iter_rows(min_row=2)}
    assert estate["added"] == data["estate"]["added_kg"]
    assert estate["recovered"] == data["estate"]["recovered_kg"]
    assert estate["CO2e of additions (eu)"] == data["estate"]["co2e_t"]


# --- on the databases ------------------------------------------------------------------------


def _ledger(db: Database) -> None:
    add_site(db, code="DE-1", name="Store", country="DE")
    add_technician(db, name="Ada Novak", certificate="DE-I-2041", scheme="EU 2015/2067 cat I",
                   company="Kalt GmbH", valid_to=date(2030, 1, 1))
    add_cylinder(db, code="CY-R", refrigerant="R-448A", kind="reclaimed", tare_ng=None)
    add_system(db, site_code="DE-1", tag="RACK", refrigerant="R-448A", charge_ng=120 * KG,
               application="commercial-refrigeration", in_service_on=date(2022, 4, 1),
               technician="Ada Novak")
    add_system(db, site_code="DE-1", tag="OLD", refrigerant="R-404A", charge_ng=8 * KG,
               application="commercial-refrigeration", in_service_on=date(2015, 4, 1))

    def log(tag: str, **kw) -> int:  # type: ignore[no-untyped-def]
        return log_event(db, site_code="DE-1", tag=tag, draft=EventDraft(**kw)).event_id

    log("RACK", kind=EventKind.CHECK, performed_on=date(2024, 3, 1), result="leak-found",
        location="suction header", method="electronic detector", technician="Ada Novak")
    log("RACK", kind=EventKind.REPAIR, performed_on=date(2024, 3, 2), location="suction header",
        technician="Ada Novak")
    wrong = log("RACK", kind=EventKind.ADD, performed_on=date(2024, 3, 2), mass_ng=65 * KG,
                technician="Ada Novak", note='=HYPERLINK("x")')
    void_event(db, event_id=wrong, reason="typed 65 kg, was 6.5 kg", recorded_by="Office")
    log("RACK", kind=EventKind.ADD, performed_on=date(2024, 3, 2), cylinder_code="CY-R",
        cylinder_before_ng=48_200_000_000_000, cylinder_after_ng=41_700_000_000_000, technician="Ada Novak")
    log("RACK", kind=EventKind.FOLLOW_UP, performed_on=date(2024, 3, 20), result="pass",
        technician="Ada Novak")
    log("RACK", kind=EventKind.RECOVER, performed_on=date(2024, 6, 1), mass_ng=2 * KG,
        destination="reclaim", technician="Ada Novak")
    log("OLD", kind=EventKind.RETIRE, performed_on=date(2024, 9, 1), mass_ng=7 * KG,
        destination="destruction", technician="Ada Novak")


def test_annual_summary_from_the_database(db: Database) -> None:
    _ledger(db)
    s = reporting.annual_summary(db, year=2024)
    assert s["basis"] == "eu"
    e = s["estate"]
    assert e["added_kg"] == Decimal("6.5")  # the voided 65 kg is not counted
    assert e["recovered_kg"] == Decimal(9)
    assert e["recovered_to"] == {"destruction": Decimal(7), "reclaim": Decimal(2)}
    # R-448A under the 2024/573 basis (Annex II olefins 0.501 / 1.37, reference notes
    # "Checked in December 2026"): 1385.9961; t CO2e shown to the gram (6 places).
    gwp = REF.gwp("R-448A", "eu").value
    assert e["co2e_t"] == (Decimal("6.5") * gwp / 1000).quantize(Decimal("0.000001"))
    smb = s["scope1"][1]
    # hand-worked simplified balance: PS 6.5 + (CD 8 - RD 7) = 7.5 kg
    assert smb["emissions_kg"] == Decimal("7.5")
    assert s["caution"] and "competent authority" in s["caution"]
    assert len(s["chain"]["digest"]) == 64


def test_logbook_from_the_database(db: Database) -> None:
    _ledger(db)
    book = reporting.logbook(db, site_code="DE-1", tag="RACK", to_on=date(2024, 12, 31))
    events = book["events"]
    voided = [x for x in events if x["voided"]]
    assert len(voided) == 1 and voided[0]["void_reason"] == "typed 65 kg, was 6.5 kg"
    void_row = next(x for x in events if x["kind"] == "void")
    assert void_row["voids"] == voided[0]["id"]
    add = next(x for x in events if x["kind"] == "add" and not x["voided"])
    assert add["cylinder_kind"] == "reclaimed" and add["reclaimed"] is True
    assert add["added_for"] == "leak"  # repaired that day
    assert add["certificate"].startswith("EU 2015/2067 cat I DE-I-2041")
    assert [x["on"] for x in events] == sorted(x["on"] for x in events)
    last = max(events, key=lambda x: x["id"])
    assert book["chain_head"] == last["chain_hash"]
    assert book["refrigerant"] == "R-448A" and book["safety_class"] == "A1"
    assert book["tiers"] and book["tiers"][0]["regime"] == "eu"
    assert "competent authority" in book["caution"]
    window = reporting.logbook(db, site_code="DE-1", tag="RACK", from_on=date(2024, 3, 10),
                               to_on=date(2024, 12, 31))
    assert all(x["on"] >= date(2024, 3, 10) for x in window["events"])
    assert window["chain_head"] == book["chain_head"]


def test_logbook_art6_items_are_in_the_spreadsheet(db: Database, tmp_path: Path) -> None:
    """Each EU 517/2014 Art 6 record item (a)-(g) maps to cells of the logbook spreadsheet."""
    from ledger.exports.common import ART6_MAP
    from ledger.exports.xlsx import write_logbook_xlsx

    _ledger(db)
    rack = reporting.logbook(db, site_code="DE-1", tag="RACK", to_on=date(2024, 12, 31))
    old = reporting.logbook(db, site_code="DE-1", tag="OLD", to_on=date(2024, 12, 31))
    wb = openpyxl.load_workbook(write_logbook_xlsx(tmp_path / "rack.xlsx", rack))
    wb_old = openpyxl.load_workbook(write_logbook_xlsx(tmp_path / "old.xlsx", old))

    def table(book, name: str) -> list[dict]:  # type: ignore[no-untyped-def]
        rows = list(book[name].iter_rows(values_only=True))
        return [dict(zip(rows[0], r, strict=True)) for r in rows[1:]]

    facts = {r["item"]: r["value"] for r in table(wb, "system")}
    ev = table(wb, "events")
    ev_old = table(wb_old, "events")
    live = [r for r in ev if not r["voided"]]
    # (a) quantity and type of gas installed
    assert facts["refrigerant"] == "R-448A" and facts["full charge"].startswith("120.000 kg")
    first = next(r for r in ev if r["kind"] == "placed in service")
    assert first["refrigerant"] == "R-448A" and first["full charge (kg)"] == 120
    # (b) quantities added, with why
    added = [r for r in live if r["kind"] == "refrigerant added"]
    assert [(r["quantity (kg)"], r["added for"]) for r in added] == [(6.5, "leak")]
    # (c) recycled or reclaimed gas used
    assert added[0]["recycled or reclaimed gas"] == "yes" and added[0]["cylinder kind"] == "reclaimed"
    assert added[0]["cylinder"] == "CY-R"
    # (d) quantity recovered, and where it went
    rec = next(r for r in live if r["kind"] == "refrigerant recovered")
    assert (rec["quantity (kg)"], rec["recovered gas to"]) == (2, "reclaim")
    # (e) identity of the undertaking and certificate
    assert {(r["technician"], r["company"]) for r in added} == {("Ada Novak", "Kalt GmbH")}
    assert "DE-I-2041" in added[0]["certificate (scheme, number)"]
    # (f) dates and results of checks
    check = next(r for r in live if r["kind"] == "leak check")
    assert check["date"].date() == date(2024, 3, 1) and check["result"] == "leak-found"
    follow = next(r for r in live if r["kind"] == "follow-up check")
    assert follow["result"] == "pass"
    # (g) recovery and disposal at decommissioning
    retire = next(r for r in ev_old if r["kind"] == "taken out of service")
    assert (retire["quantity (kg)"], retire["recovered gas to"]) == (7, "destruction")
    # the notes sheet prints the mapping for every item
    notes = {r[0]: r[1] for r in wb["notes"].iter_rows(min_row=3, values_only=True) if r[0]}
    for item, _, where in ART6_MAP:
        assert where in notes[f"EU 517/2014 Art 6{item}"]
    # a voided event stays, marked with the correction's reason
    gone = next(r for r in ev if r["voided"])
    assert gone["quantity (kg)"] == 65 and "typed 65 kg, was 6.5 kg" in gone["voided"]
    assert wb["events"].cell(row=2 + ev.index(gone), column=1).font.strike


def test_formula_text_from_users_stays_text(db: Database, tmp_path: Path) -> None:
    from ledger.exports.xlsx import write_logbook_xlsx

    _ledger(db)
    book = reporting.logbook(db, site_code="DE-1", tag="RACK", to_on=date(2024, 12, 31))
    wb = openpyxl.load_workbook(write_logbook_xlsx(tmp_path / "x.xlsx", book))
    ws = wb["events"]
    note_col = [c.value for c in ws[1]].index("note") + 1
    cells = [ws.cell(row=r, column=note_col) for r in range(2, ws.max_row + 1)]
    hit = [c for c in cells if c.value == '=HYPERLINK("x")']
    assert len(hit) == 1
    assert hit[0].data_type == "s" and hit[0].quotePrefix


def test_unknown_basis_is_refused(db: Database) -> None:
    from ledger.errors import InputError

    with pytest.raises(InputError):
        reporting.annual_summary(db, year=2024, basis="ar3")


def test_report_commands(sqlite_location, tmp_path: Path) -> None:  # type: ignore[no-untyped-def]
    from typer.testing import CliRunner

    from ledger.cli import context, report_cmd

    db = Database(sqlite_location)
    _ledger(db)
    db.close()
    context.set_db(sqlite_location.url)
    try:
        runner = CliRunner()
        r = runner.invoke(report_cmd.app, ["annual", "--year", "2024", "--json"])
        assert r.exit_code == 0, r.output
        data = json.loads(r.stdout)
        assert data["year"] == 2024 and data["basis"] == "eu"
        assert data["estate"]["added_kg"] == 6.5 and "competent authority" in data["caution"]
        assert {"site", "system", "refrigerant", "full_charge_kg", "added_kg", "recovered_kg",
                "leak_rate_percent", "co2e_t"} <= set(data["systems"][0])
        assert [m["method"] for m in data["scope1"]] == list(em.METHODS)
        pdf, xlsx = tmp_path / "lb.pdf", tmp_path / "lb.xlsx"
        r = runner.invoke(report_cmd.app, ["logbook", "DE-1/RACK", "--to", "2024-12-31",
                                           "--pdf", str(pdf), "--xlsx", str(xlsx)])
        assert r.exit_code == 0, r.output
        assert pdf.exists() and xlsx.exists() and "chain head" in r.stdout
        r = runner.invoke(report_cmd.app, ["logbook", "--site", "DE-1", "--out", str(tmp_path / "s")])
        assert r.exit_code == 0, r.output
        assert sorted(p.name for p in (tmp_path / "s").iterdir()) == [
            "logbook-DE-1-OLD.pdf", "logbook-DE-1-OLD.xlsx", "logbook-DE-1-RACK.pdf",
            "logbook-DE-1-RACK.xlsx"]
        r = runner.invoke(report_cmd.app, ["annual", "--year", "2024"])
        assert r.exit_code == 0 and "Simplified material balance" in r.stdout
    finally:
        context.set_db(None)
