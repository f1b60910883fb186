"""End to end in a real browser (Playwright driving Debian's chromium) at a phone's width:
a technician finds a system by its code and records a visit with a cylinder top-up in lb and
sees what is due next; an auditor sees no write form; an officer downloads the annual xlsx.

The run also writes screenshots of the main pages at 360 px and 1280 px into docs/web/.
"""

from __future__ import annotations

import os
import socket
import threading
import time
from collections.abc import Iterator
from contextlib import contextmanager
from datetime import date, timedelta
from pathlib import Path

import pytest

from ledger.services.recording import add_system, site_today
from ledger.store.db import Database, Location
from ledger.units import parse_mass_ng
from tests.web.conftest import PASSWORD, build_ledger

CHROMIUM = "/usr/bin/chromium"
FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
         "--disable-component-update", "--disable-sync", "--no-first-run", "--disable-quic"]
SHOTS = Path(__file__).resolve().parents[2] / "docs" / "web"
PHONE = {"width": 360, "height": 740}
DESK = {"width": 1280, "height": 900}
RECORDS = Path(__file__).resolve().parents[2] / "sample_records"
DEMO_YEAR = 2025  # the demo's last whole year

pytestmark = pytest.mark.slow


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _need_chromium() -> None:
    if not Path(CHROMIUM).exists():
        if os.environ.get("CI"):
            pytest.fail("chromium is missing: scripts/test installs it")
        pytest.skip("chromium is not installed")


@contextmanager
def _serving(location: Location) -> Iterator[str]:
    import uvicorn

    from ledger.web.app import Settings, create_app

    app = create_app(Settings(location=location))
    port = _free_port()
    srv = uvicorn.Server(uvicorn.Config(app, host="127.0.0.1", port=port, log_level="warning"))
    thread = threading.Thread(target=srv.run, daemon=True)
    thread.start()
    deadline = time.monotonic() + 20
    while not srv.started:
        assert time.monotonic() < deadline, "the server did not start"
        time.sleep(0.05)
    try:
        yield f"http://127.0.0.1:{port}"
    finally:
        srv.should_exit = True
        thread.join(timeout=10)
        app.state.db.close()


@pytest.fixture
def server(sqlite_location: Location, tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Iterator[str]:
    """The small test ledger, plus a 30 lb walk-in cooler in Texas."""
    _need_chromium()
    monkeypatch.setenv("REFLEDGER_ATTACHMENTS", str(tmp_path / "attachments"))
    db = Database(sqlite_location)
    build_ledger(db)
    add_system(db, site_code="US-TX", tag="WALK-IN", refrigerant="R-404A", charge_ng=parse_mass_ng("30 lb"),
               application="commercial-refrigeration", in_service_on=date(2022, 4, 1), technician="Ada Novak",
               description="Dairy walk-in cooler")
    db.close()
    with _serving(sqlite_location) as url:
        yield url


@pytest.fixture(scope="module")
def demo_server(tmp_path_factory: pytest.TempPathFactory) -> Iterator[str]:
    """The demo ledger (scripts/demo's invented estate) with its users, for the screenshots."""
    _need_chromium()
    from ledger.services.demo import build_demo
    from ledger.store.db import locate

    folder = tmp_path_factory.mktemp("demo")
    location = locate(str(folder / "demo.db"))
    build_demo(location, records=RECORDS, out=None, replace=True, password=PASSWORD)
    with _serving(location) as url:
        yield url


@pytest.fixture
def browser() -> Iterator[object]:
    from playwright.sync_api import sync_playwright

    with sync_playwright() as p:
        b = p.chromium.launch(executable_path=CHROMIUM, args=FLAGS)
        yield b
        b.close()


def _login(page, base: str, name: str) -> None:  # type: ignore[no-untyped-def]
    page.goto(f"{base}/login")
    page.fill("input[name=name]", name)
    page.fill("input[name=password]", PASSWORD)
    page.click("button[type=submit]")


def _shot(page, name: str) -> None:  # type: ignore[no-untyped-def]
    SHOTS.mkdir(parents=True, exist_ok=True)
    page.screenshot(path=str(SHOTS / f"{name}-{page.viewport_size['width']}.png"), full_page=True)


def test_technician_records_a_visit_on_a_phone(server: str, browser) -> None:  # type: ignore[no-untyped-def]
    page = browser.new_page(viewport=PHONE)
    page.goto(f"{server}/login")
    _shot(page, "login")
    _login(page, server, "technician")
    page.wait_for_url(f"{server}/find")
    page.fill("#q", "US-TX/WALK-IN")  # the code printed on the system's label
    page.click("button:text('Find')")
    page.wait_for_url("**/systems/US-TX/WALK-IN")
    page.click("text=Record a visit")
    page.wait_for_url("**/visit")
    page.select_option("select[name=check_result]", "leak-found")
    page.fill("input[name=check_where]", "king valve gland")
    page.check("input[name=topup][value=cylinder]")
    page.select_option("select[name=cylinder]", "CY-404")
    page.fill("input[name=before]", "30")  # a bare number is in the site's unit: lb
    page.fill("input[name=after]", "22 lb 8 oz")
    page.click("button:text('Save visit')")
    page.wait_for_url("**/visit/done?ids=*")
    _shot(page, "visit-done")
    body = page.inner_text("main")
    # 30 lb - 22 lb 8 oz = 7.5 lb (16 oz to the lb: common practice, no source)
    assert "7.500 lb" in body
    # 7.5 lb on a 30 lb charge is 25 %, above the 20 % threshold for commercial refrigeration,
    # so a repair is due within 30 days (40 CFR 84.106 and 82.157(d)(1); from memory)
    assert "exceeds the threshold" in body
    due_on = site_today("America/Chicago") + timedelta(days=30)
    dates = page.locator("time.next-due").all_inner_texts()
    assert due_on.isoformat() in dates, dates
    assert page.evaluate("document.documentElement.scrollWidth") <= PHONE["width"]  # no sideways scrolling


def test_auditor_sees_no_write_form(server: str, browser) -> None:  # type: ignore[no-untyped-def]
    page = browser.new_page(viewport=PHONE)
    _login(page, server, "auditor")
    page.wait_for_url(f"{server}/find")
    for path in ("/systems/US-TX/RACK-A", "/due", "/verify", "/find?q=RACK"):
        page.goto(server + path)
        forms = page.locator("form[method=post]")
        assert forms.count() == 1 and forms.first.get_attribute("action") == "/logout", path
        assert page.locator("text=Record a visit").count() == 0
    page.goto(f"{server}/verify")
    assert "Intact." in page.inner_text("main")
    page.goto(f"{server}/systems/US-TX/RACK-A/visit")
    assert "Not allowed" in page.inner_text("main")


def test_officer_downloads_the_annual_xlsx(demo_server: str, browser, tmp_path: Path) -> None:  # type: ignore[no-untyped-def]
    from openpyxl import load_workbook

    page = browser.new_page(viewport=PHONE, accept_downloads=True)
    _login(page, demo_server, "greta")
    page.wait_for_url(f"{demo_server}/due")
    page.goto(f"{demo_server}/annual?year={DEMO_YEAR}")
    with page.expect_download() as caught:
        page.click("a.dl-xlsx")
    target = tmp_path / caught.value.suggested_filename
    caught.value.save_as(target)
    assert target.suffix == ".xlsx"
    book = load_workbook(target, read_only=True)
    assert len(book.sheetnames) > 1


# (user, path, screenshot name) of the main pages, shown at both widths
PAGES = (
    ("jana", "/find?q=DE-LEJ", "find"),
    ("jana", "/systems/DE-LEJ/CU-DAIRY/visit", "visit"),
    ("greta", "/due?per=25", "due"),
    ("greta", f"/annual?year={DEMO_YEAR}", "annual"),
    ("greta", "/systems/DE-HAJ/NH3-PLANT", "system"),
    ("audit", "/systems/DE-LEJ/CU-DAIRY", "history"),
    ("audit", "/verify", "verify"),
    ("admin", "/users", "users"),
)


@pytest.mark.parametrize("viewport", [PHONE, DESK], ids=["360", "1280"])
def test_screenshots_of_the_main_pages(demo_server: str, browser, viewport) -> None:  # type: ignore[no-untyped-def]
    who = None
    page = browser.new_page(viewport=viewport)
    for user, path, name in PAGES:
        if user != who:
            page.context.clear_cookies()
            _login(page, demo_server, user)
            page.wait_for_load_state()
            who = user
        page.goto(demo_server + path)
        assert page.locator("footer").inner_text().startswith("Local regulation governs")
        _shot(page, name)
        if viewport is PHONE:
            assert page.evaluate("document.documentElement.scrollWidth") <= PHONE["width"], name
    page.goto(demo_server + "/api/docs")
    _shot(page, "api")
