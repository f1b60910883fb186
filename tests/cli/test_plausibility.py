"""Units, plausibility, duplicates and `log void` through the CLI, on SQLite and PostgreSQL.

Every bad input is one line on stderr, exit code 2, and no row written (event rows counted
before and after). Listed with their messages in docs/errors.md.

Pound figures: 1 lb = 0.45359237 kg exactly (international pound, 1959 agreement). Leak
rate: 40 CFR 82.152 ("leak rate", annualizing: first addition over 365 days) against the
10 % comfort-cooling threshold of 82.157(c)(2), which applies when the rate "exceeds" it.
The 1 g floor and the full-charge ceiling are our own plausibility rules (common practice,
no source).
"""

from __future__ import annotations

import json

import pytest
from sqlalchemy import text
from typer.testing import CliRunner

from ledger.cli.main import app
from ledger.store.db import Database, Location

runner = CliRunner()
ON = "2024-03-01"


def run(location: Location, *args: str, env: dict[str, str] | None = None):  # type: ignore[no-untyped-def]
    return runner.invoke(app, ["--db", location.url, *args], env=env)


def events(location: Location) -> int:
    db = Database(location)
    with db.engine.connect() as conn:
        n = conn.execute(text("SELECT COUNT(*) FROM event")).scalar()
    db.close()
    return int(n)


def ok(result) -> None:  # type: ignore[no-untyped-def]
    assert result.exit_code == 0, result.output


def _estate(loc: Location) -> None:
    ok(run(loc, "site", "add", "DE-1", "--name", "Store", "--country", "DE"))
    ok(run(loc, "tech", "add", "Ada Novak", "--certificate", "C-1", "--scheme", "EU cat I"))
    for tag, charge in (("CU", "11.5 kg"), ("RACK", "120 kg")):
        ok(run(loc, "system", "add", f"DE-1/{tag}", "--refrigerant", "R-404A", "--charge", charge,
               "--application", "commercial-refrigeration", "--in-service", "2022-04-01"))


def refused(loc: Location, args: list[str], fragment: str, env: dict[str, str] | None = None) -> None:
    before = events(loc)
    result = run(loc, *args, env=env)
    assert result.exit_code == 2, result.output
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1, result.stderr
    assert fragment in lines[0], lines[0]
    assert "Traceback" not in result.output
    assert events(loc) == before


ADD = ["log", "add", "DE-1/CU", "--on", ON]


@pytest.mark.parametrize(
    ("mass", "fragment"),
    [
        ("2 ton", "'2 ton' uses 'ton', which the ledger does not take; use kg, g, lb or oz"),
        ("2.5 t", "uses 't', which the ledger does not take; use kg, g, lb or oz"),
        ("3 grain", "uses 'grain', which the ledger does not take"),
        ("2 carat", "uses 'carat', which the ledger does not take"),
        ("1 dram", "uses 'dram', which the ledger does not take"),
        ("0.0001 mg", "uses 'mg', which the ledger does not take"),
        ("3 furlongs", "is not a mass ('furlongs' is not a unit of mass); use kg, g, lb or oz"),
        ("3 blorps", "has an unknown unit 'blorps'; use kg, g, lb or oz"),
        ("200000 kg", "is implausibly large (more than 100 t)"),
        ("1e-10 g", "is less than the ledger keeps"),
    ],
)
def test_units_other_than_kg_g_lb_oz_are_refused(location: Location, mass: str, fragment: str) -> None:
    _estate(location)
    refused(location, [*ADD, "--mass", mass], f"--mass: {mass!r}")
    refused(location, [*ADD, "--mass", mass], fragment)


def test_more_than_the_full_charge_asks_for_confirmation(location: Location) -> None:
    _estate(location)
    refused(location, [*ADD, "--mass", "99999 kg"], "confirm: The addition of 99999.00 kg is more than its full "
            "charge (11.50 kg) of CU.")
    refused(location, ["log", "recover", "DE-1/CU", "--on", ON, "--mass", "12 kg", "--destination", "reclaim"],
            "The recovery of 12.00 kg is more than its full charge")
    refused(location, ["log", "retire", "DE-1/CU", "--on", ON, "--recovered", "30 lb"],
            "The recovery at retirement of 13.61 kg is more than its full charge")
    before = events(location)
    result = run(location, *ADD, "--mass", "99999 kg", "--confirm")
    ok(result)
    assert events(location) == before + 1
    assert "99999.00 kg stored" in result.stdout


def test_exactly_the_full_charge_does_not_ask(location: Location) -> None:
    _estate(location)
    ok(run(location, *ADD, "--mass", "11.5 kg"))


def test_the_share_of_the_full_charge_is_configurable(location: Location) -> None:
    _estate(location)
    env = {"REFLEDGER_CONFIRM_ABOVE_PERCENT": "50"}
    refused(location, [*ADD, "--mass", "6 kg"], "is more than 50 % of its full charge (11.50 kg)", env=env)
    ok(run(location, *ADD, "--mass", "5.75 kg", env=env))  # exactly half
    refused(location, [*ADD, "--mass", "1 kg"], "REFLEDGER_CONFIRM_ABOVE_PERCENT: 'lots' must be a positive",
            env={"REFLEDGER_CONFIRM_ABOVE_PERCENT": "lots"})


def test_less_than_a_gram_asks_for_confirmation(location: Location) -> None:
    _estate(location)
    refused(location, [*ADD, "--mass", "0.5 g"], "The addition of 0.0005 kg is less than 1 g.")
    ok(run(location, *ADD, "--mass", "1 g"))
    ok(run(location, *ADD, "--mass", "0.5 g", "--confirm"))


def test_the_same_event_twice_asks_for_confirmation(location: Location) -> None:
    _estate(location)
    first = [*ADD, "--mass", "2 kg", "--tech", "Ada Novak"]
    ok(run(location, *first))
    refused(location, first, "already records the same add of 2.00 kg on CU on 2024-03-01 by Ada Novak.")
    # another day, mass or technician is another event
    ok(run(location, "log", "add", "DE-1/CU", "--on", "2024-03-02", "--mass", "2 kg", "--tech", "Ada Novak"))
    ok(run(location, *ADD, "--mass", "2.1 kg", "--tech", "Ada Novak"))
    ok(run(location, *ADD, "--mass", "2 kg"))
    ok(run(location, "log", "check", "DE-1/CU", "--on", ON, "--result", "no-leak"))
    refused(location, ["log", "check", "DE-1/CU", "--on", ON, "--result", "no-leak"],
            "already records the same check on CU on 2024-03-01 with no technician.")
    before = events(location)
    ok(run(location, *first, "--confirm"))
    assert events(location) == before + 1


def test_a_voided_event_is_not_a_duplicate(location: Location) -> None:
    _estate(location)
    out = run(location, *ADD, "--mass", "2 kg")
    ok(out)
    event_id = out.stdout.split()[1]
    ok(run(location, "log", "void", "DE-1/CU", event_id, "--reason", "wrong day", "--by", "Office", "--yes"))
    ok(run(location, *ADD, "--mass", "2 kg"))


def test_log_prints_the_stored_mass_and_on_us_sites_the_leak_rate(location: Location) -> None:
    ok(run(location, "site", "add", "US-1", "--name", "Store", "--country", "US", "--subdivision", "US-TX",
           "--unit", "lb"))
    ok(run(location, "system", "add", "US-1/RTU", "--refrigerant", "R-410A", "--charge", "100 lb",
           "--application", "comfort-cooling", "--in-service", "2024-01-05"))
    result = run(location, "log", "add", "US-1/RTU", "--on", ON, "--mass", "10 lb")
    ok(result)
    assert "10.00 lb stored" in result.stdout
    # 10 lb / 100 lb x 365 / 365 = 10 % exactly: does not exceed 10 %
    assert "leak rate: 10.00 % (annualizing), does not exceed the 10 % threshold" in result.stdout
    result = run(location, "log", "add", "US-1/RTU", "--on", "2024-03-02", "--mass", "8 oz")
    ok(result)
    assert "0.50 lb stored" in result.stdout and "exceeds the 10 % threshold" in result.stdout
    _estate(location)
    result = run(location, "log", "add", "DE-1/RACK", "--on", ON, "--mass", "5 lb 8 oz")
    ok(result)
    # 5.5 lb = 2.494758035 kg (1959 pound), shown to the mg
    assert "2.494758 kg stored" in result.stdout and "leak rate" not in result.stdout


def test_facility_fields_on_recoveries(location: Location) -> None:
    _estate(location)
    ok(run(location, "log", "recover", "DE-1/RACK", "--on", ON, "--mass", "4 kg", "--destination", "reclaim",
           "--facility", "Nordhafen Reclaim GmbH, Kaistr. 4, Kiel", "--facility-certificate", "RC-2291"))
    shown = json.loads(run(location, "system", "show", "DE-1/RACK", "--json").stdout)["events"][-1]
    assert (shown["facility"], shown["facility_certificate"]) == ("Nordhafen Reclaim GmbH, Kaistr. 4, Kiel", "RC-2291")
    refused(location, ["log", "recover", "DE-1/RACK", "--on", ON, "--mass", "1 kg", "--facility-certificate", "X"],
            "--facility-certificate: needs --facility")
    assert not run(location, "verify").exit_code


# ---- log void SITE/TAG EVENT ------------------------------------------------------------------


def _one_add(location: Location) -> str:
    _estate(location)
    out = run(location, *ADD, "--mass", "2 kg", "--tech", "Ada Novak")
    ok(out)
    return out.stdout.split()[1]


def test_void_needs_by_the_right_system_and_a_yes(location: Location) -> None:
    event_id = _one_add(location)
    void = ["log", "void", "DE-1/CU", event_id, "--reason", "typed in lb"]
    refused(location, void, "--by: is required")
    refused(location, ["log", "void", "DE-1/RACK", event_id, "--reason", "x", "--by", "Office", "--yes"],
            f"event: {event_id} belongs to DE-1/CU, not to DE-1/RACK; nothing was voided")
    refused(location, ["log", "void", "DE-1/CU", "99999", "--reason", "x", "--by", "Office", "--yes"],
            "event: 99999 is not in the ledger")
    refused(location, ["log", "void", "DE-1/NOPE", event_id, "--reason", "x", "--by", "Office", "--yes"],
            "system: DE-1/'NOPE'")
    # not at a terminal (the test runner's stdin is not one) and no --yes: refused, event shown
    refused(location, [*void, "--by", "Office"],
            f"log void: event {event_id} (2024-03-01 add 2.00 kg by Ada Novak) was not voided: add --yes")
    refused(location, [*void, "--by", "Office", "--json"], "was not voided: add --yes")
    refused(location, [*void, "--by", "  ", "--yes"], "--by: is required")
    before = events(location)
    result = run(location, *void, "--by", "Office", "--yes")
    ok(result)
    assert f"void of event {event_id} (2024-03-01 add 2.00 kg by Ada Novak) on DE-1/CU" in result.stdout
    assert events(location) == before + 1
    refused(location, [*void, "--by", "Office", "--yes"], f"event: {event_id} is already voided")


def test_void_json(location: Location) -> None:
    event_id = _one_add(location)
    result = run(location, "log", "void", "DE-1/CU", event_id, "--reason", "typed in lb", "--by", "Office",
                 "--yes", "--json")
    ok(result)
    data = json.loads(result.stdout)
    assert data["voided"]["id"] == int(event_id) and data["voided"]["mass_kg"] == 2
    assert isinstance(data["void_event_id"], int) and len(data["chain_hash"]) == 64
