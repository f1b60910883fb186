"""Shared fixtures: a ledger database per test, on SQLite and on a real PostgreSQL.

The SQLite template is migrated to head once per session and copied per test (fast, and
through our real migrations). PostgreSQL is used when ``REFLEDGER_TEST_PG_URL`` names a
server (``scripts/test`` starts a throwaway one): a template database is migrated once and
each test gets ``CREATE DATABASE ... TEMPLATE``. Under CI a missing server is an error, not
a skip.
"""

from __future__ import annotations

import os
import shutil
import uuid
from collections.abc import Iterator
from pathlib import Path

import pytest

from ledger.store.db import Database, Location, locate, upgrade

PG_ENV = "REFLEDGER_TEST_PG_URL"
BACKENDS = ("sqlite", "postgresql")


def pytest_addoption(parser: pytest.Parser) -> None:
    parser.addoption("--update-golden", action="store_true", help="Rewrite tests/golden files.")


@pytest.fixture(scope="session")
def update_golden(request: pytest.FixtureRequest) -> bool:
    return bool(request.config.getoption("--update-golden"))


@pytest.fixture(scope="session")
def sqlite_template(tmp_path_factory: pytest.TempPathFactory) -> Path:
    path = tmp_path_factory.mktemp("template") / "ledger.db"
    upgrade(locate(str(path)), backup=False)
    return path


def _pg_admin_url() -> str | None:
    url = os.environ.get(PG_ENV)
    if not url and os.environ.get("CI"):
        pytest.fail(f"{PG_ENV} is not set: under CI every PostgreSQL test must run (scripts/test starts the server)")
    return url


def _with_db(url: str, name: str) -> str:
    base, _, _ = url.rpartition("/")
    return f"{base}/{name}"


@pytest.fixture(scope="session")
def pg_template() -> Iterator[str | None]:
    url = _pg_admin_url()
    if not url:
        yield None
        return
    from sqlalchemy import create_engine, text

    name = f"ledger_tpl_{uuid.uuid4().hex[:8]}"
    admin = create_engine(url, isolation_level="AUTOCOMMIT")
    with admin.connect() as conn:
        conn.execute(text(f'CREATE DATABASE "{name}"'))
    upgrade(Location(_with_db(url, name), "test"), backup=False)
    yield name
    with admin.connect() as conn:
        conn.execute(text(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)'))
    admin.dispose()


def _fresh_location(backend: str, tmp_path: Path, sqlite_template: Path, pg_template: str | None) -> Iterator[Location]:
    if backend == "sqlite":
        path = tmp_path / "ledger.db"
        shutil.copy(sqlite_template, path)
        yield locate(str(path))
        return
    url = _pg_admin_url()
    if not url or not pg_template:
        pytest.skip(f"PostgreSQL not available (set {PG_ENV})")
    from sqlalchemy import create_engine, text

    name = f"ledger_t_{uuid.uuid4().hex[:10]}"
    admin = create_engine(url, isolation_level="AUTOCOMMIT")
    with admin.connect() as conn:
        conn.execute(text(f'CREATE DATABASE "{name}" TEMPLATE "{pg_template}"'))
    try:
        yield Location(_with_db(url, name), "test")
    finally:
        with admin.connect() as conn:
            conn.execute(text(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)'))
        admin.dispose()


@pytest.fixture(params=BACKENDS)
def location(
    request: pytest.FixtureRequest, tmp_path: Path, sqlite_template: Path, pg_template: str | None
) -> Iterator[Location]:
    """A migrated, empty ledger on each backend."""
    yield from _fresh_location(request.param, tmp_path, sqlite_template, pg_template)


@pytest.fixture
def sqlite_location(tmp_path: Path, sqlite_template: Path) -> Location:
    """A migrated, empty SQLite ledger (for tests that are about the CLI, not the backend)."""
    path = tmp_path / "cli-ledger.db"
    shutil.copy(sqlite_template, path)
    return locate(str(path))


@pytest.fixture
def db(location: Location) -> Iterator[Database]:
    database = Database(location)
    yield database
    database.close()
