"""Web routes and API on both databases: roles on every write route, CSRF, escaping, uploads,
sessions, login limits, and the API's JSON equal to the CLI's ``--json``."""

from __future__ import annotations

import json
from datetime import UTC, datetime, timedelta

import pytest
from sqlalchemy import func, select
from typer.testing import CliRunner

from ledger.cli.main import app as cli_app
from ledger.services import accounts
from ledger.store.tables import app_user, event
from tests.web.conftest import PASSWORD, ROLES, XSS, csrf_of, login

VISIT_FORM = {"on": "2025-03-14", "check_result": "no-leak", "topup": "cylinder", "cylinder": "CY-404",
              "before": "30", "after": "27 lb 8 oz"}
API_VISIT = {"on": "2025-03-15", "parts": [{"kind": "check", "result": "no-leak"}]}


def _count(client, table) -> int:  # type: ignore[no-untyped-def]
    with client.app_state.db.read() as conn:
        return conn.execute(select(func.count()).select_from(table)).scalar_one()


def _csv_upload() -> dict:
    return {"files": ("cylinders.csv", b"id,refrigerant,kind,tare\nCY-NEW,R-404A,virgin,\n", "text/csv")}


# (name, allowed roles, table that must not change when refused, how to send it)
WRITES = {
    "visit form": (("technician", "officer"), event,
                   lambda c, t: c.post("/systems/US-TX/RACK-A/visit", data={**VISIT_FORM, "csrf": t},
                                       follow_redirects=False)),
    "visit api": (("technician", "officer"), event,
                  lambda c, t: c.post("/api/systems/US-TX/RACK-A/visit", json=API_VISIT,
                                      headers={"X-CSRF-Token": t})),
    "import": (("officer",), None,
               lambda c, t: c.post("/import", data={"csrf": t}, files=_csv_upload())),
    "user add": (("admin",), app_user,
                 lambda c, t: c.post("/users", data={"csrf": t, "name": "newbie", "role": "auditor",
                                                     "password": PASSWORD})),
    "user disable": (("admin",), None,
                     lambda c, t: c.post("/users/auditor/disable", data={"csrf": t}, follow_redirects=False)),
}


@pytest.mark.parametrize("route", list(WRITES))
@pytest.mark.parametrize("role", ROLES)
def test_every_role_on_every_write_route(web, role: str, route: str) -> None:  # type: ignore[no-untyped-def]
    allowed, table, send = WRITES[route]
    token = login(web, role)
    before = _count(web, table) if table is not None else None
    done = send(web, token)
    if role in allowed:
        assert done.status_code in (200, 201, 303), done.text
        if table is not None:
            assert _count(web, table) > before
    else:
        assert done.status_code == 403, done.text
        if table is not None:
            assert _count(web, table) == before


@pytest.mark.parametrize("route", list(WRITES))
def test_a_write_without_the_csrf_token_is_refused(web, route: str) -> None:  # type: ignore[no-untyped-def]
    allowed, table, send = WRITES[route]
    login(web, allowed[0])
    before = _count(web, table) if table is not None else None
    done = send(web, "")
    assert done.status_code == 403
    assert "csrf" in done.text
    if table is not None:
        assert _count(web, table) == before
    wrong = send(web, "not-the-token")
    assert wrong.status_code == 403


def test_login_needs_its_form_token(web) -> None:  # type: ignore[no-untyped-def]
    web.get("/login")
    done = web.post("/login", data={"name": "officer", "password": PASSWORD}, follow_redirects=False)
    assert done.status_code == 403


def test_without_a_session_pages_send_to_login_and_the_api_answers_401(web) -> None:  # type: ignore[no-untyped-def]
    for path in ("/find", "/due", "/systems/US-TX/RACK-A", "/annual", "/verify", "/users", "/import"):
        page = web.get(path, follow_redirects=False)
        assert page.status_code == 303 and page.headers["location"].startswith("/login?next=")
    for path in ("/api/due", "/api/systems", "/api/verify", "/api/me"):
        assert web.get(path).status_code == 401
    assert web.post("/api/systems/US-TX/RACK-A/visit", json=API_VISIT).status_code == 401


READS = {  # path -> roles that may read it
    "/find?q=RACK": ("technician", "officer", "auditor"),
    "/systems/US-TX/RACK-A": ("technician", "officer", "auditor"),
    "/due": ("officer", "auditor"),
    "/annual?year=2025": ("officer", "auditor"),
    "/verify": ("officer", "auditor"),
    "/import": ("officer",),
    "/users": ("admin",),
    "/api/due": ("officer", "auditor"),
    "/api/verify": ("officer", "auditor"),
    "/api/annual?year=2025": ("officer", "auditor"),
    "/systems/US-TX/RACK-A/logbook.xlsx": ("officer", "auditor"),
}


@pytest.mark.parametrize("role", ROLES)
def test_reads_by_role(web, role: str) -> None:  # type: ignore[no-untyped-def]
    login(web, role)
    for path, allowed in READS.items():
        status = web.get(path).status_code
        assert status == (200 if role in allowed else 403), (path, status)


def test_a_technician_sees_only_their_sites(web) -> None:  # type: ignore[no-untyped-def]
    token = login(web, "technician")
    assert web.get("/systems/DE-LEJ/CAB-1").status_code == 403
    assert web.get("/api/systems/DE-LEJ/CAB-1").status_code == 403
    assert "DE-LEJ" not in web.get("/find?q=CAB").text.split("<main>")[1].split("</main>")[0].replace(
        'placeholder="e.g. DE-LEJ/RACK-1"', "")
    before = _count(web, event)
    refused = web.post("/api/systems/DE-LEJ/CAB-1/visit", json=API_VISIT, headers={"X-CSRF-Token": token})
    assert refused.status_code == 403 and _count(web, event) == before


def test_the_auditor_sees_no_write_form(web) -> None:  # type: ignore[no-untyped-def]
    login(web, "auditor")
    for path in ("/systems/US-TX/RACK-A", "/due", "/annual?year=2025", "/verify", "/find?q=RACK"):
        html = web.get(path).text
        assert html.count('method="post"') == 1, path  # only the log-out button
        assert "/visit" not in html


def test_names_and_notes_are_escaped(web) -> None:  # type: ignore[no-untyped-def]
    login(web, "officer")
    for path in ("/systems/US-TX/RACK-A", "/find?q=rack", "/api/docs", f"/find?q={XSS}"):
        html = web.get(path).text
        assert "<script>" not in html, path
    assert "&lt;script&gt;" in web.get("/systems/US-TX/RACK-A").text
    assert "&lt;script&gt;" in web.get(f"/find?q={XSS}").text


def test_cookie_flags_and_secure_off_localhost(web) -> None:  # type: ignore[no-untyped-def]
    page = web.get("/login")
    token = csrf_of(page.text)
    done = web.post("/login", data={"name": "officer", "password": PASSWORD, "csrf": token},
                    follow_redirects=False)
    cookie = done.headers["set-cookie"].lower()
    assert "httponly" in cookie and "samesite=lax" in cookie and "secure" not in cookie
    from fastapi.testclient import TestClient

    with TestClient(web.app, base_url="http://ledger.example") as remote:
        assert "secure" in remote.get("/login").headers["set-cookie"].lower()
    assert "frame-ancestors 'none'" in page.headers["content-security-policy"]


def test_logins_are_limited_after_failures(web) -> None:  # type: ignore[no-untyped-def]
    page = web.get("/login")
    token = csrf_of(page.text)
    for _ in range(accounts.MAX_FAILURES):
        wrong = web.post("/login", data={"name": "officer", "password": "wrong password!", "csrf": token})
        assert wrong.status_code == 401 and "wrong name or password" in wrong.text
    blocked = web.post("/login", data={"name": "officer", "password": PASSWORD, "csrf": token})
    assert blocked.status_code == 401 and "too many failed attempts" in blocked.text


def test_sessions_end_when_idle_and_on_logout(web) -> None:  # type: ignore[no-untyped-def]
    db = web.app_state.db
    token, _ = accounts.login(db, name="auditor", password=PASSWORD)
    assert accounts.session_of(db, token) is not None
    later = datetime.now(UTC) + accounts.IDLE_TIMEOUT + timedelta(minutes=1)
    assert accounts.session_of(db, token, now=later) is None
    assert accounts.session_of(db, token) is None  # the idle session was removed
    csrf = login(web, "auditor")
    out = web.post("/logout", data={"csrf": csrf}, follow_redirects=False)
    assert out.status_code == 303
    assert web.get("/api/me").status_code == 401


def test_visit_form_errors_sit_beside_their_field_and_write_nothing(web) -> None:  # type: ignore[no-untyped-def]
    token = login(web, "technician")
    before = _count(web, event)
    bad = web.post("/systems/US-TX/RACK-A/visit", data={**VISIT_FORM, "csrf": token, "before": "27", "after": "30"})
    assert bad.status_code == 400
    assert "--before: " in bad.text and "is not heavier than --after" in bad.text  # the CLI's message
    unit = web.post("/systems/US-TX/RACK-A/visit", data={**VISIT_FORM, "csrf": token, "before": "30 furlongs"})
    assert unit.status_code == 400 and "--before" in unit.text
    wrong_gas = web.post("/systems/US-TX/RACK-A/visit", data={**VISIT_FORM, "csrf": token, "cylinder": "CY-134"})
    assert wrong_gas.status_code == 400 and "holds R-134a" in wrong_gas.text
    assert _count(web, event) == before


def test_a_duplicate_visit_asks_for_confirmation(web) -> None:  # type: ignore[no-untyped-def]
    token = login(web, "technician")
    first = web.post("/systems/US-TX/RACK-A/visit", data={**VISIT_FORM, "csrf": token}, follow_redirects=False)
    assert first.status_code == 303
    before = _count(web, event)
    again = web.post("/systems/US-TX/RACK-A/visit", data={**VISIT_FORM, "csrf": token})
    assert again.status_code == 409 and "Is this a duplicate?" in again.text
    assert _count(web, event) == before
    api = web.post("/api/systems/US-TX/RACK-A/visit", headers={"X-CSRF-Token": token},
                   json={"on": "2025-03-14", "parts": [{"kind": "check", "result": "no-leak"}]})
    assert api.status_code == 409 and api.json()["needs_confirmation"]
    sure = web.post("/systems/US-TX/RACK-A/visit", data={**VISIT_FORM, "csrf": token, "confirm": "1"},
                    follow_redirects=False)
    assert sure.status_code == 303 and _count(web, event) == before + 2


def test_the_visit_result_shows_stored_masses_and_the_recorder(web) -> None:  # type: ignore[no-untyped-def]
    token = login(web, "technician")
    done = web.post("/systems/US-TX/RACK-A/visit", data={**VISIT_FORM, "csrf": token})
    assert done.status_code == 200
    # 30 lb - 27 lb 8 oz = 2.5 lb; 2.5 x 0.45359237 kg = 1.134 kg (1959 pound definition)
    assert "2.500 lb" in done.text and "1.134 kg" in done.text
    system = web.get("/api/systems/US-TX/RACK-A").json()
    assert system["events"][-1]["recorded_by"] == "technician"
    assert system["events"][-1]["technician"] == "Ada Novak"  # the technician's own record


def test_attachments_are_checked_and_stored_by_digest(web) -> None:  # type: ignore[no-untyped-def]
    import hashlib

    token = login(web, "technician")
    before = _count(web, event)
    bad = web.post("/systems/US-TX/RACK-A/visit", data={**VISIT_FORM, "csrf": token},
                   files={"files": ("../../etc/passwd.jpg", b"#!/bin/sh\n", "image/jpeg")})
    assert bad.status_code == 400 and "is not a JPEG, PNG, WebP or PDF" in bad.text
    assert _count(web, event) == before
    pdf = b"%PDF-1.4\n% a service report\n"
    ok = web.post("/systems/US-TX/RACK-A/visit", data={**VISIT_FORM, "csrf": token},
                  files={"files": ("../report.pdf", pdf, "application/pdf")})
    assert ok.status_code == 200
    digest = hashlib.sha256(pdf).hexdigest()
    root = web.app_state.attachments
    assert sorted(p.name for p in root.iterdir()) == [digest]
    assert web.get("/api/systems/US-TX/RACK-A").json()["events"][-1]["attachments"] == [digest]
    login(web, "auditor")
    assert web.get(f"/attachments/{digest}").content == pdf
    assert web.get("/attachments/..%2F..%2Fetc%2Fpasswd").status_code == 404


def test_a_too_large_body_is_refused(web) -> None:  # type: ignore[no-untyped-def]
    token = login(web, "officer")
    huge = b"x" * (web.app_state.settings.max_body + 1)
    done = web.post("/import", data={"csrf": token}, files={"files": ("events.csv", huge, "text/csv")})
    assert done.status_code == 413


def test_import_upload_shows_row_problems_and_writes_nothing(web) -> None:  # type: ignore[no-untyped-def]
    token = login(web, "officer")
    bad = b"id,refrigerant,kind,tare\nCY-X,R-999Z,virgin,\n"
    done = web.post("/import", data={"csrf": token}, files={"files": ("cylinders.csv", bad, "text/csv")})
    assert done.status_code == 400 and "Nothing imported" in done.text and "R-999Z" in done.text
    odd = web.post("/import", data={"csrf": token}, files={"files": ("evil.sh", b"x", "text/plain")})
    assert odd.status_code == 400 and "only .csv and .xlsx" in odd.text


def test_the_caution_and_safety_class_are_shown(web) -> None:  # type: ignore[no-untyped-def]
    login(web, "officer")
    page = web.get("/systems/DE-LEJ/CAB-1").text
    # R-290 is ASHRAE 34 safety class A3 (ASHRAE Standard 34 designations; from memory)
    assert "Safety class A3" in page and "highly flammable" in page
    for path in ("/due", "/annual?year=2025", "/verify", "/find"):
        assert "Local regulation governs" in web.get(path).text


def _cli_json(location, *args: str):  # type: ignore[no-untyped-def]
    done = CliRunner().invoke(cli_app, ["--db", location.url, *args])
    assert done.exit_code == 0, done.output
    return json.loads(done.stdout)


def test_the_api_answers_with_the_cli_json_contract(web, location) -> None:  # type: ignore[no-untyped-def]
    login(web, "officer")
    day = "2026-06-30"
    assert web.get(f"/api/systems/US-TX/RACK-A?as_of={day}").json() == _cli_json(
        location, "system", "show", "US-TX/RACK-A", "--as-of", day, "--json")
    assert web.get(f"/api/due?as_of={day}").json() == _cli_json(location, "due", "--as-of", day, "--json")
    assert web.get("/api/verify").json() == _cli_json(location, "verify", "--json")
    assert web.get("/api/due?regime=nope").status_code == 400
    assert "/api/due" in web.get("/api/openapi.json").json()["paths"]


def test_the_verify_page_names_a_record_changed_outside_the_ledger(web) -> None:  # type: ignore[no-untyped-def]
    # issue 12's record chain seen from the auditor's page: a direct UPDATE of a system's
    # hermetic flag is a broken record, not "intact" (common practice, no source)
    from sqlalchemy import update

    from ledger.store.tables import system

    login(web, "auditor")
    assert "Intact." in web.get("/verify").text
    with web.app_state.db.write() as conn:
        conn.execute(update(system).where(system.c.tag == "RACK-A").values(hermetic=True))
    html = web.get("/verify").text
    assert "Intact." not in html and "NOT VERIFIED" in html
    assert "US-TX/RACK-A: changed" in html
