"""The command-line contract, through Typer's test runner (logic is tested below the CLI)."""

from __future__ import annotations

import json
import subprocess
import sys
from decimal import Decimal

import pytest
from typer.testing import CliRunner

from ledger.cli.main import app
from ledger.reference import BASES, load_reference, round_half_up
from ledger.store.db import Location

runner = CliRunner()


def run(location: Location, *args: str):  # type: ignore[no-untyped-def]
    return runner.invoke(app, ["--db", location.url, *args])


def test_refrigerant_show_json_contract() -> None:
    result = runner.invoke(app, ["refrigerant", "show", "R-404A", "--json", "--charge", "10 kg"])
    assert result.exit_code == 0, result.output
    data = json.loads(result.stdout)
    assert {"designation", "safety_class", "components", "gwp", "charge_kg", "co2e_t"} <= data.keys()
    assert data["designation"] == "R-404A"
    # EU 517/2014 Annex IV method; published figure 3 922 (reference-notes.md)
    assert round_half_up(Decimal(str(data["gwp"]["eu"]))) == 3922
    assert data["gwp_rounded"]["eu"] == 3922
    assert set(data["gwp"]) == set(BASES)
    assert [c["designation"] for c in data["components"]] == ["R-125", "R-143a", "R-134a"]
    assert sum(Decimal(str(c["mass_percent"])) for c in data["components"]) == 100
    assert data["co2e_t"]["eu"] == pytest.approx(39.216)  # 10 kg x 3921.6 / 1000


@pytest.mark.parametrize("designation", sorted(load_reference().refrigerants))
def test_refrigerant_show_works_for_every_refrigerant(designation: str) -> None:
    result = runner.invoke(app, ["refrigerant", "show", designation, "--json", "--charge", "1 kg"])
    assert result.exit_code == 0, result.output
    data = json.loads(result.stdout)
    assert set(data["gwp"]) == set(BASES) == set(data["co2e_t"])


def test_unknown_refrigerant_is_one_line_exit_2() -> None:
    result = runner.invoke(app, ["refrigerant", "show", "R-404B"])
    assert result.exit_code == 2
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: refrigerant: 'R-404B'")
    assert "Traceback" not in result.output


def _estate(loc: Location) -> None:
    assert run(loc, "site", "add", "DE-1", "--name", "Store", "--country", "DE").exit_code == 0
    assert run(loc, "tech", "add", "Ada Novak", "--certificate", "C-1", "--scheme", "EU cat I").exit_code == 0
    out = run(
        loc,
        "system",
        "add",
        "DE-1/RACK",
        "--refrigerant",
        "R-404A",
        "--charge",
        "20 kg",
        "--application",
        "commercial-refrigeration",
        "--in-service",
        "2022-04-01",
    )
    assert out.exit_code == 0, out.output


def test_system_show_json_contract(sqlite_location: Location) -> None:
    _estate(sqlite_location)
    out = run(
        sqlite_location, "log", "add", "DE-1/RACK", "--on", "2024-03-01", "--mass", "5 lb 8 oz", "--tech", "Ada Novak"
    )
    assert out.exit_code == 0, out.output
    assert "event" in out.stdout
    out = run(sqlite_location, "system", "show", "DE-1/RACK", "--as-of", "2024-12-31", "--json")
    assert out.exit_code == 0, out.output
    data = json.loads(out.stdout)
    assert {
        "site",
        "tag",
        "refrigerant",
        "full_charge_kg",
        "co2e_t",
        "in_service",
        "events",
        "tier",
        "obligations",
        "leak_rates",
    } <= data.keys()
    assert data["full_charge_kg"] == 20
    # 20 kg x 3921.6 (EU Annex IV method) / 1000 = 78.432 t
    assert data["co2e_t"] == pytest.approx(78.432)
    assert [e["kind"] for e in data["events"]] == ["in-service", "add"]
    # 5 lb 8 oz = 5.5 x 0.45359237 kg (1959 definition) = 2.494758 kg, stored to the mg
    assert data["events"][1]["mass_kg"] == pytest.approx(2.494758)


@pytest.mark.parametrize(
    ("args", "fragment"),
    [
        (["log", "add", "DE-1/RACK", "--on", "2024-03-01", "--mass", "2.5"], "--mass: '2.5' has no unit"),
        (["log", "add", "DE-1/RACK", "--on", "2024-03-01", "--mass", "-1 kg"], "must be greater than zero"),
        (["log", "add", "DE-1/RACK", "--on", "2024-03-01", "--mass", "lots"], "is not a mass"),
        (["log", "add", "DE-1/RACK", "--on", "14/03/2024", "--mass", "1 kg"], "--on: '14/03/2024' is not a date"),
        (["log", "add", "DE-1/RACK", "--on", "2099-03-01", "--mass", "1 kg"], "is in the future"),
        (
            ["log", "add", "DE-1/RACK", "--on", "2020-03-01", "--mass", "1 kg"],
            "before the system was placed in service",
        ),
        (
            ["log", "add", "DE-1/RACK", "--on", "2024-03-01", "--mass", "1 kg", "--refrigerant", "R-134a"],
            "is not what the system holds",
        ),
        (["log", "add", "DE-9/RACK", "--on", "2024-03-01", "--mass", "1 kg"], "site: 'DE-9'"),
        (["log", "add", "DE-1/NOPE", "--on", "2024-03-01", "--mass", "1 kg"], "system: DE-1/'NOPE'"),
        (["log", "add", "DE-1/RACK", "--on", "2024-03-01", "--mass", "1 kg", "--tech", "Nobody"], "tech: 'Nobody'"),
        (["site", "add", "DE-1", "--name", "X", "--country", "DE"], "site: 'DE-1' already exists"),
        (
            [
                "system",
                "add",
                "DE-1/RACK",
                "--refrigerant",
                "R-404A",
                "--charge",
                "1 kg",
                "--application",
                "other",
                "--in-service",
                "2023-01-01",
            ],
            "already exists",
        ),
        (
            [
                "system",
                "add",
                "DE-1/X",
                "--refrigerant",
                "R-4O4A",
                "--charge",
                "1 kg",
                "--application",
                "other",
                "--in-service",
                "2023-01-01",
            ],
            "refrigerant: 'R-4O4A'",
        ),
    ],
)
def test_bad_input_one_line_nonzero_no_write(sqlite_location: Location, args: list[str], fragment: str) -> None:
    _estate(sqlite_location)
    before = json.loads(run(sqlite_location, "system", "show", "DE-1/RACK", "--json").stdout)["events"]
    result = run(sqlite_location, *args)
    assert result.exit_code == 2, result.output
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1, result.stderr
    assert fragment in lines[0]
    assert "Traceback" not in result.output
    after = json.loads(run(sqlite_location, "system", "show", "DE-1/RACK", "--json").stdout)["events"]
    assert after == before


def test_missing_database_is_a_clear_error(tmp_path) -> None:  # type: ignore[no-untyped-def]
    result = runner.invoke(app, ["--db", str(tmp_path / "none.db"), "site", "list"])
    assert result.exit_code == 2
    assert "refledger db init" in result.stderr


def test_help_does_not_import_heavy_libraries() -> None:
    code = (
        "import sys; sys.argv=['refledger','--help']\n"
        "from ledger.cli.main import app\n"
        "try:\n    app()\nexcept SystemExit:\n    pass\n"
        "heavy=[m for m in ('pandas','matplotlib','reportlab','CoolProp','openpyxl','pint',"
        "'sqlalchemy.orm','numpy') if m in sys.modules]\n"
        "print('HEAVY', heavy, file=sys.stderr)"
    )
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert "HEAVY []" in done.stderr


def test_log_does_not_import_report_libraries() -> None:
    code = (
        "import sys\n"
        "import ledger.cli.main, ledger.services.recording, ledger.services.queries\n"
        "heavy=[m for m in ('pandas','matplotlib','reportlab','CoolProp','openpyxl','pint') if m in sys.modules]\n"
        "print('HEAVY', heavy, file=sys.stderr)"
    )
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert "HEAVY []" in done.stderr
