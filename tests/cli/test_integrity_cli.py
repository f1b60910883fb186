"""The integrity commands and report heads through the CLI (one SQLite ledger each)."""

from __future__ import annotations

import json
import re
from pathlib import Path

from pypdf import PdfReader
from sqlalchemy import create_engine, text
from typer.testing import CliRunner

from ledger.cli.main import app
from ledger.store.db import Location

runner = CliRunner()


def run(location: Location, *args: str):  # type: ignore[no-untyped-def]
    return runner.invoke(app, ["--db", location.url, *args])


def _ledger(location: Location) -> None:
    for args in (
        ["site", "add", "S", "--name", "S", "--country", "DE"],
        ["system", "add", "S/A", "--refrigerant", "R-134a", "--charge", "50kg", "--application",
         "comfort-cooling", "--in-service", "2024-01-01"],
        ["log", "add", "S/A", "--on", "2024-02-01", "--mass", "2kg", "--by", "Ines Okafor"],
        ["log", "void", "S/A", "2", "--reason", "wrong day", "--by", "Ines Okafor", "--yes"],
        ["log", "add", "S/A", "--on", "2024-02-02", "--mass", "2kg"],
    ):
        result = run(location, *args)
        assert result.exit_code == 0, (args, result.output)


def _tamper(location: Location, sql: str) -> None:
    engine = create_engine(location.url)
    with engine.begin() as conn:
        conn.execute(text(sql))
    engine.dispose()


def test_key_checkpoint_and_verify_against_it(sqlite_location: Location, tmp_path: Path) -> None:
    _ledger(sqlite_location)
    made = runner.invoke(app, ["key", "new", str(tmp_path / "k.key")])
    assert made.exit_code == 0 and "key id" in made.output
    cp = run(sqlite_location, "checkpoint", "--key", str(tmp_path / "k.key"), "--out", str(tmp_path / "cp.json"))
    assert cp.exit_code == 0, cp.output
    ok = run(sqlite_location, "verify", "--checkpoint", str(tmp_path / "cp.json"),
             "--public-key", str(tmp_path / "k.key.pub"))
    assert ok.exit_code == 0 and "holds" in ok.output
    _tamper(sqlite_location, "DROP TRIGGER event_no_delete")
    _tamper(sqlite_location, "DELETE FROM event WHERE id = (SELECT max(id) FROM event)")
    bad = run(sqlite_location, "verify", "--checkpoint", "1", "--json")
    assert bad.exit_code == 1
    got = json.loads(bad.output)
    assert [b["what"] for b in got["checkpoint"]["breaks"]] == ["removed"]
    assert "trigger event_no_delete on table event is missing" in got["guards"]
    # the logbook of that system refuses too: the repair duty the deleted event opened cannot vanish quietly
    book = run(sqlite_location, "report", "logbook", "S/A", "--json")
    assert book.exit_code == 1
    want = "NOT VERIFIED: checkpoint, S/A: removed: the checkpoint covers 4 events, the chain now holds 3"
    assert want in book.output


def test_report_refuses_a_broken_chain_unless_allowed(sqlite_location: Location, tmp_path: Path) -> None:
    _ledger(sqlite_location)
    _tamper(sqlite_location, "UPDATE system SET hermetic = 1")
    pdf = tmp_path / "a.pdf"
    refused = run(sqlite_location, "report", "logbook", "S/A", "--pdf", str(pdf))
    assert refused.exit_code == 1 and not pdf.exists()
    assert "NOT VERIFIED: system S/A: changed: hermetic 0 -> 1" in refused.output
    allowed = run(sqlite_location, "report", "logbook", "S/A", "--pdf", str(pdf), "--allow-broken")
    assert allowed.exit_code == 1 and pdf.exists()
    page1 = re.sub(r"\s+", " ", PdfReader(str(pdf)).pages[0].extract_text())
    assert "NOT VERIFIED: system S/A: changed: hermetic 0 -> 1" in page1
    annual = run(sqlite_location, "report", "annual", "--year", "2024")
    assert annual.exit_code == 1 and "NOT VERIFIED" in annual.output


def test_logbook_pdf_shows_who_entered_each_event_and_its_hash(sqlite_location: Location, tmp_path: Path) -> None:
    _ledger(sqlite_location)
    pdf = tmp_path / "a.pdf"
    result = run(sqlite_location, "report", "logbook", "S/A", "--pdf", str(pdf), "--json")
    assert result.exit_code == 0, result.output
    book = json.loads(result.output[result.output.index("{"):])
    text = re.sub(r"\s+", " ", " ".join(p.extract_text() for p in PdfReader(str(pdf)).pages))
    added = next(e for e in book["events"] if e["recorded_by"] == "Ines Okafor")
    assert "Ines Okafor" in text
    assert f"#{added['chain_hash'][:10]}" in text.replace(" ", "") or f"#{added['chain_hash'][:10]}" in text
    assert "days after" in text  # events dated 2024 entered today: the lateness shows
    assert "No signed checkpoint covers this report yet" in text
    assert book["integrity"]["verified"] is True
    assert book["integrity"]["digest"] == json.loads(run(sqlite_location, "verify", "--site", "S", "--json")
                                                     .output)["heads_digest"]


def test_annual_summary_prints_the_digest_verify_prints(sqlite_location: Location) -> None:
    _ledger(sqlite_location)
    annual = run(sqlite_location, "report", "annual", "--year", "2024", "--json")
    assert annual.exit_code == 0, annual.output
    summary = json.loads(annual.output)
    verified = json.loads(run(sqlite_location, "verify", "--json").output)
    assert summary["chain"]["digest"] == verified["heads_digest"]
    assert summary["integrity"]["verified"] and summary["integrity"]["checkpoint"] is None
