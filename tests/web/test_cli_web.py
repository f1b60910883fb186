"""The web commands from the CLI: `user`, `label`, `serve` start-up, and the import guard
(the web libraries load only inside `serve` and ledger.web)."""

from __future__ import annotations

import socket
import subprocess
import sys
import time
import urllib.request
from pathlib import Path

from typer.testing import CliRunner

from ledger.cli.main import app
from ledger.store.db import Location

runner = CliRunner()
WEB_LIBRARIES = ("fastapi", "starlette", "uvicorn", "jinja2", "argon2", "segno", "multipart", "pydantic")


def _run(location: Location, *args: str, stdin: str | None = None):  # type: ignore[no-untyped-def]
    return runner.invoke(app, ["--db", location.url, *args], input=stdin)


def test_help_and_log_do_not_import_the_web_libraries() -> None:
    code = (
        "import sys; sys.argv=['refledger','--help']\n"
        "from ledger.cli.main import app\n"
        "try:\n    app()\nexcept SystemExit:\n    pass\n"
        "import ledger.services.recording, ledger.services.queries, ledger.cli.log_cmd\n"
        f"heavy=[m for m in {WEB_LIBRARIES!r} if m in sys.modules]\n"
        "print('HEAVY', heavy, file=sys.stderr)"
    )
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert "HEAVY []" in done.stderr


def test_user_commands(sqlite_location: Location) -> None:
    assert _run(sqlite_location, "tech", "add", "Ada Novak", "--certificate", "C-1", "--scheme", "EU").exit_code == 0
    assert _run(sqlite_location, "site", "add", "DE-1", "--name", "Store", "--country", "DE").exit_code == 0
    made = _run(sqlite_location, "user", "add", "ada", "--role", "technician", "--tech", "Ada Novak", "--site", "DE-1")
    assert made.exit_code == 0 and "password: " in made.stdout
    typed = _run(sqlite_location, "user", "add", "olga", "--role", "officer", "--password-stdin",
                 stdin="a long enough secret\n")
    assert typed.exit_code == 0 and "password" not in typed.stdout
    short = _run(sqlite_location, "user", "add", "bob", "--role", "auditor", "--password-stdin", stdin="short\n")
    assert short.exit_code == 2 and "at least 10 characters" in short.stderr
    role = _run(sqlite_location, "user", "add", "eve", "--role", "boss")
    assert role.exit_code == 2 and "--role: 'boss' is not one of technician, officer, auditor, admin" in role.stderr
    twice = _run(sqlite_location, "user", "add", "ada", "--role", "auditor")
    assert twice.exit_code == 2 and "exists already" in twice.stderr
    assert _run(sqlite_location, "user", "disable", "olga").exit_code == 0
    import json

    listed = json.loads(_run(sqlite_location, "user", "list", "--json").stdout)
    assert [(u["name"], u["role"], u["disabled"]) for u in listed] == [("ada", "technician", False),
                                                                      ("olga", "officer", True)]
    assert listed[0]["technician"] == "Ada Novak" and listed[0]["sites"] == ["DE-1"]
    assert "hash" not in json.dumps(listed)


def test_label_sheet_has_one_code_per_system(sqlite_location: Location, tmp_path: Path) -> None:
    from pypdf import PdfReader

    from ledger.exports.labels import qr_matrix

    assert _run(sqlite_location, "site", "add", "DE-1", "--name", "Store", "--country", "DE").exit_code == 0
    for tag in ("RACK-1", "CAB 2"):
        done = _run(sqlite_location, "system", "add", f"DE-1/{tag}", "--refrigerant", "R-290", "--charge", "0.15 kg",
                    "--application", "commercial-refrigeration", "--in-service", "2024-01-01")
        assert done.exit_code == 0, done.output
    pdf = tmp_path / "labels.pdf"
    done = _run(sqlite_location, "label", "DE-1", "--pdf", str(pdf), "--base-url", "https://ledger.example")
    assert done.exit_code == 0 and "2 labels" in done.stdout
    text = PdfReader(str(pdf)).pages[0].extract_text()
    assert "DE-1/RACK-1" in text and "DE-1/CAB 2" in text
    # a QR code of version 3 or more has 29+ modules a side (ISO/IEC 18004: 17 + 4 x version)
    assert (len(qr_matrix("https://ledger.example/systems/DE-1/CAB%202")) - 17) % 4 == 0
    bad = _run(sqlite_location, "label", "DE-1", "--pdf", str(pdf), "--base-url", "ftp://x")
    assert bad.exit_code == 2 and "--base-url" in bad.stderr


def test_serve_answers_on_its_port(sqlite_location: Location) -> None:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    proc = subprocess.Popen([sys.executable, "-m", "ledger.cli.main", "--db", sqlite_location.url, "serve",
                             "--port", str(port)], stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    try:
        deadline = time.monotonic() + 30
        while True:
            try:
                with urllib.request.urlopen(f"http://127.0.0.1:{port}/login", timeout=2) as answer:
                    body = answer.read().decode()
                break
            except OSError:
                assert proc.poll() is None, proc.stderr.read() if proc.stderr else ""
                assert time.monotonic() < deadline, "serve did not answer"
                time.sleep(0.2)
        assert "Log in" in body and "Local regulation governs" in body
    finally:
        proc.terminate()
        proc.wait(timeout=10)
