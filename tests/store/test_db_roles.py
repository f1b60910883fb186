"""`db roles` on a real PostgreSQL server: the writer appends events but cannot change them; the
auditor only reads (and not the accounts). SQLite is refused with a clear error."""

from __future__ import annotations

import uuid
from datetime import date

import pytest
from sqlalchemy import create_engine, text
from sqlalchemy.exc import ProgrammingError
from typer.testing import CliRunner

from ledger.cli.main import app as cli_app
from ledger.domain.drafts import EventDraft
from ledger.domain.records import EventKind
from ledger.errors import LedgerError
from ledger.services.dbroles import make_roles
from ledger.services.recording import add_site, add_system, log_event
from ledger.store.db import Database, Location
from ledger.units import parse_mass_ng


def _as(location: Location, login: str) -> str:
    head, _, rest = location.url.partition("://")
    return f"{head}://{login}@{rest.split('@', 1)[1]}"


def test_sqlite_has_no_roles(sqlite_location: Location) -> None:
    with pytest.raises(LedgerError, match="needs a PostgreSQL ledger"):
        make_roles(Database(sqlite_location))
    done = CliRunner().invoke(cli_app, ["--db", sqlite_location.url, "db", "roles"])
    assert done.exit_code == 2 and "needs a PostgreSQL ledger" in done.stderr


def test_writer_appends_but_never_changes_and_auditor_only_reads(location: Location) -> None:
    if location.is_sqlite:
        pytest.skip("roles exist on PostgreSQL only")
    tag = uuid.uuid4().hex[:8]
    writer, auditor, w_login, a_login = (f"{p}_{tag}" for p in ("rw", "ro", "app", "audit"))
    admin = create_engine(location.url, isolation_level="AUTOCOMMIT")
    with admin.connect() as conn:
        conn.execute(text(f"CREATE ROLE {w_login} LOGIN"))
        conn.execute(text(f"CREATE ROLE {a_login} LOGIN"))
    db = Database(location)
    try:
        add_site(db, code="DE-1", name="Store", country="DE")
        add_system(db, site_code="DE-1", tag="RACK", refrigerant="R-404A", charge_ng=parse_mass_ng("20 kg"),
                   application="commercial-refrigeration", in_service_on=date(2022, 4, 1))
        done = CliRunner().invoke(cli_app, ["--db", location.url, "db", "roles", "--writer", writer, "--auditor",
                                            auditor, "--grant-writer", w_login, "--grant-auditor", a_login])
        assert done.exit_code == 0, done.output
        make_roles(db, writer=writer, auditor=auditor)  # running it again is harmless

        as_writer = Database(Location(_as(location, w_login), "test"))
        log_event(as_writer, site_code="DE-1", tag="RACK",
                  draft=EventDraft(kind=EventKind.ADD, performed_on=date(2024, 3, 1), mass_ng=parse_mass_ng("1 kg")))
        for sql in ("UPDATE event SET note = 'changed'", "DELETE FROM event", "TRUNCATE event",
                    "UPDATE alembic_version SET version_num = 'x'"):
            with pytest.raises(ProgrammingError, match="permission denied"), as_writer.engine.begin() as conn:
                conn.execute(text(sql))
        as_writer.close()

        as_auditor = Database(Location(_as(location, a_login), "test"))
        with as_auditor.engine.begin() as conn:
            assert conn.execute(text("SELECT count(*) FROM event")).scalar_one() == 2
        insert = "INSERT INTO site (code, name, country, timezone, created_at) VALUES ('X', 'x', 'DE', 'UTC', now())"
        for sql in (insert, "SELECT * FROM app_user", "SELECT * FROM web_session"):
            with pytest.raises(ProgrammingError, match="permission denied"), as_auditor.engine.begin() as conn:
                conn.execute(text(sql))
        as_auditor.close()
    finally:
        db.close()
        owner = create_engine(location.url, isolation_level="AUTOCOMMIT")
        with owner.connect() as conn:
            for role in (w_login, a_login, writer, auditor):
                conn.execute(text(f"DROP OWNED BY {role}"))
                conn.execute(text(f"DROP ROLE {role}"))
        owner.dispose()
        admin.dispose()
