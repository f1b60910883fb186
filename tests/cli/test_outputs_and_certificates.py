"""Output paths, extreme dates, missing databases, certificates and narrow terminals, through
the CLI on SQLite and PostgreSQL (docs/errors.md, "Output files, dates, databases and
certificates"). Every bad case: one line on stderr, exit 2, no traceback, no row written.
"""

from __future__ import annotations

import os
from pathlib import Path

import pytest
from sqlalchemy import create_engine, func, select
from typer.testing import CliRunner

from ledger.cli.main import app
from ledger.store.db import Location
from ledger.store.tables import metadata

runner = CliRunner()
TODAY = "2026-11-30"  # before "today" on any machine running these tests after it


def run(location: Location, *args: str, env: dict[str, str] | None = None):  # type: ignore[no-untyped-def]
    return runner.invoke(app, ["--db", location.url, *args], env=env)


def counts(location: Location) -> dict[str, int]:
    """Rows in every table (kept results included: a refused command keeps nothing either)."""
    engine = create_engine(location.url)
    try:
        with engine.connect() as conn:
            return {t.name: conn.execute(select(func.count()).select_from(t)).scalar_one()
                    for t in metadata.sorted_tables}
    finally:
        engine.dispose()


def one_error_line(result, starts: str) -> None:  # type: ignore[no-untyped-def]
    assert result.exit_code == 2, result.output
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith(f"error: {starts}"), result.stderr
    assert "Traceback" not in result.output


def _ledger(loc: Location) -> None:
    ok = [
        ("site", "add", "DE-1", "--name", "Leipzig", "--country", "DE"),
        ("site", "add", "US-1", "--name", "Houston", "--country", "US", "--subdivision", "US-TX"),
        # scoped certificates: Reg. (EU) 2024/573 Art 10 category I; 40 CFR 82.161 types
        ("tech", "add", "Ada Novak", "--certificate", "DE-I-1", "--scheme", "F-gas", "--scope", "eu",
         "--category", "I", "--valid-from", "2020-01-01", "--valid-to", "2025-12-31", "--company", "Kälte GmbH"),
        ("tech", "add", "Dee Small", "--certificate", "608-1", "--scheme", "EPA 608", "--scope", "us-608",
         "--category", "Type I", "--company", "Gulf LLC"),
        ("tech", "company", "certificate", "Kälte GmbH", "--certificate", "DE-U-77", "--scope", "eu",
         "--valid-from", "2019-01-01"),
        # R-404A 120 kg = 470.6 t CO2e (EU 517/2014 Annex IV figure 3 922): every 6 months
        ("system", "add", "DE-1/RACK", "--refrigerant", "R-404A", "--charge", "120 kg", "--application",
         "commercial-refrigeration", "--in-service", "2025-01-15", "--description", "Main rack of the store"),
        ("system", "add", "US-1/RACK-MT", "--refrigerant", "R-404A", "--charge", "480 lb", "--application",
         "commercial-refrigeration", "--in-service", "2024-01-15"),
        ("log", "check", "DE-1/RACK", "--on", "2025-07-01", "--result", "no-leak", "--tech", "Ada Novak"),
        ("log", "add", "US-1/RACK-MT", "--on", "2026-03-01", "--mass", "10 lb", "--tech", "Dee Small"),
    ]
    for args in ok:
        result = run(loc, *args)
        assert result.exit_code == 0, (args, result.output)


@pytest.fixture
def ledger(location: Location) -> Location:
    _ledger(location)
    return location


# --- output paths ------------------------------------------------------------------------------

COMMANDS = [
    ("due", "--as-of", TODAY),
    ("report", "annual", "--year", "2025"),
    ("report", "logbook", "DE-1/RACK", "--to", TODAY),
]
OPTIONS = {"due": ("--csv", "--xlsx", "--pdf"), "report": ("--xlsx", "--pdf")}


@pytest.mark.parametrize("command", COMMANDS, ids=lambda c: " ".join(c[:2]))
def test_an_output_path_that_is_a_folder_under_a_file_or_unwritable_is_one_line(
    ledger: Location, command: tuple[str, ...], tmp_path: Path
) -> None:
    a_file = tmp_path / "plain.txt"
    a_file.write_text("x")
    before = counts(ledger)
    for option in OPTIONS[command[0]]:
        for path, says in (
            (tmp_path, "is a folder"),
            (a_file / "sub" / "out.bin", "which is a file, not a folder"),
            (Path("/proc/refledger-test.out"), "cannot be written"),  # refused even to root
        ):
            result = run(ledger, *command, option, str(path))
            one_error_line(result, f"{option}: '{path}'")
            assert says in result.stderr
    assert counts(ledger) == before


def test_every_other_output_is_checked_too(ledger: Location, tmp_path: Path) -> None:
    a_file = tmp_path / "plain.txt"
    a_file.write_text("x")
    before = counts(ledger)
    cases = [
        (("report", "logbook", "--site", "DE-1", "--out", str(a_file)), "--out"),
        (("export", str(a_file)), "DIR"),
        (("export", "--workbook", str(tmp_path)), "--workbook"),
        (("import", "--template", str(a_file / "t.xlsx")), "--template"),
    ]
    for args, option in cases:
        one_error_line(run(ledger, *args), f"{option}: ")
    assert counts(ledger) == before


# --- dates -------------------------------------------------------------------------------------

@pytest.mark.parametrize("args", [
    ("due", "--as-of", "9999-12-31"),
    ("due", "--as-of", "0001-01-01"),
    ("system", "show", "DE-1/RACK", "--as-of", "9999-12-31"),
    ("leak-rate", "US-1/RACK-MT", "--as-of", "9999-12-31"),
    ("report", "logbook", "DE-1/RACK", "--to", "9999-12-31", "--json"),
    ("report", "logbook", "DE-1/RACK", "--from", "0001-01-01", "--json"),
    ("report", "annual", "--year", "9999"),
], ids=lambda a: " ".join(a))
def test_extreme_dates_are_one_line(ledger: Location, args: tuple[str, ...]) -> None:
    before = counts(ledger)
    result = run(ledger, *args)
    assert result.exit_code == 2 and "Traceback" not in result.output
    assert len(result.stderr.strip().splitlines()) == 1 and result.stderr.startswith("error: --")
    assert counts(ledger) == before


def test_the_widest_accepted_day_still_computes(ledger: Location) -> None:
    assert run(ledger, "due", "--as-of", "2999-12-31", "--json").exit_code == 0


# --- missing database ----------------------------------------------------------------------------

@pytest.mark.parametrize("args", [("due",), ("system", "list"), ("tech", "list"), ("verify",), ("db", "upgrade"),
                                  ("log", "check", "X/Y", "--on", "2025-01-01", "--result", "no-leak")])
def test_a_missing_relative_database_is_reported_and_not_created(
    args: tuple[str, ...], tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.chdir(tmp_path)
    result = runner.invoke(app, list(args), env={"REFLEDGER_DB": "elsewhere/ledger.db"})
    one_error_line(result, f"db: no ledger at {tmp_path / 'elsewhere' / 'ledger.db'} (from REFLEDGER_DB)")
    assert list(tmp_path.iterdir()) == []


def test_db_status_on_a_missing_file_writes_nothing_and_db_init_creates_it(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.chdir(tmp_path)
    env = {"REFLEDGER_DB": "new/ledger.db"}
    status = runner.invoke(app, ["db", "status"], env=env)
    assert status.exit_code == 0 and "none (empty database)" in status.output
    assert list(tmp_path.iterdir()) == []
    assert runner.invoke(app, ["db", "init"], env=env).exit_code == 0  # the documented way to create one
    assert (tmp_path / "new" / "ledger.db").exists()


# --- certificates --------------------------------------------------------------------------------

def test_work_without_a_valid_certificate_is_recorded_warned_and_does_not_meet_the_duty(
    ledger: Location, tmp_path: Path
) -> None:
    # Ada's certificate ran to 2025-12-31; a check on 2026-01-10 is recorded, with a warning
    before = counts(ledger)["event"]
    lapsed = run(ledger, "log", "check", "DE-1/RACK", "--on", "2026-01-10", "--result", "no-leak",
                 "--tech", "Ada Novak")
    assert lapsed.exit_code == 0
    assert "DE-I-1 was not valid on 2026-01-10 (valid to 2025-12-31)" in lapsed.stderr
    assert "done by an uncertified person" in lapsed.stderr
    nobody = run(ledger, "log", "check", "DE-1/RACK", "--on", "2026-01-11", "--result", "no-leak")
    assert nobody.exit_code == 0 and "no technician named" in nobody.stderr
    assert counts(ledger)["event"] == before + 2  # append-only: recorded, not refused
    # 6-month interval from the check of 2025-07-01: due 2026-01-01, still open/overdue
    due = run(ledger, "due", "--as-of", "2026-01-20", "--site", "DE-1", env={"COLUMNS": "80"})
    assert "2026-01-01" in due.stdout and "overdue" in due.stdout
    assert "done by an uncertified person on 2026-01-10" in " ".join(due.stdout.split())
    show = run(ledger, "system", "show", "DE-1/RACK", "--as-of", "2026-01-20", env={"COLUMNS": "80"})
    assert "done by an uncertified person on 2026-01-10" in " ".join(show.stdout.split())
    # the renewal, then a certified check meets the duty
    renewal = run(ledger, "tech", "certificate", "add", "Ada Novak", "--certificate", "DE-I-2", "--scheme",
                  "F-gas", "--scope", "eu", "--category", "I", "--valid-from", "2026-01-15")
    assert renewal.exit_code == 0, renewal.output
    assert run(ledger, "log", "check", "DE-1/RACK", "--on", "2026-01-16", "--result", "no-leak",
               "--tech", "Ada Novak").stderr == ""
    rows = run(ledger, "due", "--as-of", "2026-01-20", "--site", "DE-1", "--json").stdout
    assert "2026-01-01" not in rows and "2026-07-16" in rows  # next: 6 months from the certified check
    # the logbook prints the warning and the company certificate
    from openpyxl import load_workbook

    path = tmp_path / "book.xlsx"
    assert run(ledger, "report", "logbook", "DE-1/RACK", "--to", "2026-01-20", "--xlsx", str(path)).exit_code == 0
    wb = load_workbook(path, read_only=True)
    text = " ".join(str(c) for ws in wb.worksheets for row in ws.iter_rows(values_only=True) for c in row if c)
    assert "no certificate valid for this work; done by an uncertified person" in text
    assert "eu DE-U-77" in text
    listed = run(ledger, "tech", "company", "list", "--json")
    assert listed.exit_code == 0 and '"certificate": "DE-U-77"' in listed.stdout
    pdf = tmp_path / "book.pdf"
    assert run(ledger, "report", "logbook", "DE-1/RACK", "--to", "2026-01-20", "--pdf", str(pdf)).exit_code == 0
    import shutil
    import subprocess

    if shutil.which("pdftotext"):  # poppler-utils (scripts/test installs it)
        words = " ".join(subprocess.run(["pdftotext", str(pdf), "-"], capture_output=True, text=True,
                                        check=True).stdout.split())
        assert "uncertified person" in words and "DE-U-77" in words


def test_a_small_appliance_type_does_not_cover_a_480_lb_rack(ledger: Location) -> None:
    # issue 13 / 40 CFR 82.161(a): Type I is for small appliances (5 lb or less) only
    show = run(ledger, "system", "show", "US-1/RACK-MT", "--as-of", TODAY, "--json")
    events = [e for e in __import__("json").loads(show.stdout)["events"] if e["kind"] == "add"]
    assert events and events[0]["certificate"] is None and events[0]["uncertified"] is True


def test_an_eu_certificate_is_not_taken_on_a_us_site(ledger: Location) -> None:
    result = run(ledger, "log", "check", "US-1/RACK-MT", "--on", "2025-03-02", "--result", "no-leak",
                 "--tech", "Ada Novak")
    assert result.exit_code == 0 and "not valid at a site under us-82f, us-84c" in result.stderr


def test_certificate_scope_and_category_are_checked(ledger: Location) -> None:
    before = counts(ledger)
    one_error_line(run(ledger, "tech", "certificate", "add", "Ada Novak", "--certificate", "X", "--scheme", "s",
                       "--scope", "mars"), "--scope: 'mars'")
    one_error_line(run(ledger, "tech", "certificate", "add", "Ada Novak", "--certificate", "X", "--scheme", "s",
                       "--scope", "us-608", "--category", "IV"), "--category: 'IV'")
    one_error_line(run(ledger, "tech", "certificate", "add", "Nobody", "--certificate", "X", "--scheme", "s"),
                   "tech: 'Nobody'")
    one_error_line(run(ledger, "tech", "certificate", "add", "Ada Novak", "--certificate", "DE-I-1",
                       "--scheme", "F-gas"), "certificate: F-gas 'DE-I-1' is already registered")
    assert counts(ledger) == before


# --- terminal width and units --------------------------------------------------------------------

@pytest.mark.parametrize("columns", ["80", "100", "120", "150"])
def test_due_and_system_show_never_cut_date_status_or_system(ledger: Location, columns: str) -> None:
    env = {"COLUMNS": columns}
    due = run(ledger, "due", "--as-of", "2026-11-30", env=env)
    assert due.exit_code == 0 and "…" not in due.stdout
    for whole in ("2026-01-01", "overdue", "DE-1/RACK"):
        assert whole in due.stdout
    # table lines fit the width (the closing caution is prose the terminal wraps)
    table_lines = [line for line in due.stdout.splitlines() if not line.startswith("Local regulation")]
    assert max(len(line) for line in table_lines) <= int(columns)
    show = run(ledger, "system", "show", "DE-1/RACK", "--as-of", "2026-11-30", env=env)
    assert show.exit_code == 0 and "…" not in show.stdout
    for whole in ("2026-01-01", "overdue", "2025-07-01", "Ada Novak", "F-gas DE-I-1 (I)"):
        assert whole in show.stdout


def test_a_site_in_pounds_gets_pounds_in_history_and_logbook(ledger: Location, tmp_path: Path) -> None:
    show = run(ledger, "system", "show", "US-1/RACK-MT", "--as-of", TODAY, env={"COLUMNS": "150"})
    history = show.stdout.split("History", 1)[1]
    header = next(line for line in history.splitlines() if line.strip().startswith("id"))
    assert " lb " in header and " kg " not in header
    assert "10.00" in history  # 10 lb typed, shown in lb
    from openpyxl import load_workbook

    path = tmp_path / "us.xlsx"
    assert run(ledger, "report", "logbook", "US-1/RACK-MT", "--to", TODAY, "--xlsx", str(path)).exit_code == 0
    ws = load_workbook(path, read_only=True)["events"]
    rows = [r for r in ws.iter_rows(values_only=True)]
    header = next(r for r in rows if r and "quantity (lb)" in r)
    col = header.index("quantity (lb)")
    values = [r[col] for r in rows[rows.index(header) + 1:] if r and r[col] is not None]
    assert any(abs(float(v) - 10) < 1e-6 for v in values)  # 1 lb = 0.45359237 kg (1959 agreement)


def test_piped_output_stays_wide_without_columns(ledger: Location) -> None:
    env = {k: v for k, v in os.environ.items() if k != "COLUMNS"}
    result = runner.invoke(app, ["--db", ledger.url, "due", "--as-of", TODAY], env={**env, "COLUMNS": ""})
    assert result.exit_code == 0 and "DE-1/RACK" in result.stdout
