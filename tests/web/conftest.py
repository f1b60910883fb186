"""A small ledger with one user per role, and the web app over it (test client on localhost)."""

from __future__ import annotations

import re
from collections.abc import Iterator
from datetime import date
from pathlib import Path

import pytest

from ledger.services.accounts import add_user
from ledger.services.recording import add_cylinder, add_site, add_system, add_technician
from ledger.store.db import Database, Location
from ledger.units import parse_mass_ng

PASSWORD = "correct horse battery"  # test only
ROLES = ("technician", "officer", "auditor", "admin")
XSS = "<script>alert('x')</script>"


def build_ledger(db: Database) -> None:
    """Two sites: a US store (lb) with an R-404A rack, a German store (kg) with an R-290 cabinet."""
    add_site(db, code="US-TX", name="Store " + XSS, country="US", subdivision="US-TX")
    add_site(db, code="DE-LEJ", name="Markt", country="DE")
    add_technician(db, name="Ada Novak", certificate="EPA-1", scheme="EPA 608 universal")
    add_technician(db, name="Jonas Weber", certificate="DE-7", scheme="EU 2015/2067 cat I")
    add_cylinder(db, code="CY-404", refrigerant="R-404A", kind="virgin", tare_ng=None)
    add_cylinder(db, code="CY-134", refrigerant="R-134a", kind="virgin", tare_ng=None)
    add_system(db, site_code="US-TX", tag="RACK-A", refrigerant="R-404A", charge_ng=parse_mass_ng("400 lb"),
               application="commercial-refrigeration", in_service_on=date(2022, 4, 1), technician="Ada Novak",
               description="Low-temp rack " + XSS, note=XSS)
    add_system(db, site_code="DE-LEJ", tag="CAB-1", refrigerant="R-290", charge_ng=parse_mass_ng("0.15 kg"),
               application="commercial-refrigeration", in_service_on=date(2023, 1, 10), hermetic=True,
               description="Ice cream cabinet")
    add_user(db, name="technician", role="technician", password=PASSWORD, technician="Ada Novak", sites=["US-TX"])
    add_user(db, name="officer", role="officer", password=PASSWORD)
    add_user(db, name="auditor", role="auditor", password=PASSWORD)
    add_user(db, name="admin", role="admin", password=PASSWORD)


@pytest.fixture
def web(location: Location, tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Iterator[object]:
    from fastapi.testclient import TestClient

    from ledger.web.app import Settings, create_app

    monkeypatch.setenv("REFLEDGER_ATTACHMENTS", str(tmp_path / "attachments"))
    db = Database(location)
    build_ledger(db)
    db.close()
    app = create_app(Settings(location=location))
    with TestClient(app, base_url="http://localhost") as client:
        client.app_state = app.state  # type: ignore[attr-defined]
        yield client
    app.state.db.close()


def csrf_of(html: str) -> str:
    found = re.search(r'name="csrf" value="([^"]+)"', html)
    assert found, "no CSRF field in the page"
    return found.group(1)


def login(client, name: str) -> str:  # type: ignore[no-untyped-def]
    """Log in as ``name``; returns the session's CSRF token."""
    client.cookies.clear()
    page = client.get("/login")
    done = client.post("/login", data={"name": name, "password": PASSWORD, "csrf": csrf_of(page.text), "next": "/"},
                       follow_redirects=False)
    assert done.status_code == 303, done.text
    home = client.get("/", follow_redirects=True)
    return csrf_of(home.text)
