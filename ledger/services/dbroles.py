"""PostgreSQL roles that mirror the ledger's rules in the database itself.

* the **writer** (the application's role, e.g. what `refledger serve` connects as) may read
  every table and INSERT events and filings, but never UPDATE, DELETE or TRUNCATE them (the
  append-only trigger of migration 0001 refuses that too; the privilege makes it a second,
  independent lock). Derived and working tables (kept results, the per-site revision the
  triggers raise, web sessions) stay writable.
* the **auditor** may only SELECT, and not the web accounts tables (password hashes).

Both are created NOLOGIN; give a login role membership (``GRANT refledger_writer TO app``),
or let ``--grant-writer``/``--grant-auditor`` do it. Running it again is harmless.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

from ledger.errors import InputError, LedgerError
from ledger.store.db import Database

# Tables that are append-only records: INSERT, never UPDATE/DELETE/TRUNCATE.
APPEND_ONLY = ("event", "filing")
# Tables the auditor role may not read: accounts and sessions, not records of the ledger.
ACCOUNT_TABLES = ("app_user", "web_session", "login_failure")
# Tables the writer may only read: the schema revision belongs to `refledger db upgrade`.
SCHEMA_TABLES = ("alembic_version",)
ROLE_NAME = re.compile(r"^[a-z_][a-z0-9_]{0,62}$")


@dataclass(frozen=True, slots=True)
class RolesMade:
    """What `db roles` set up."""

    writer: str
    auditor: str
    statements: tuple[str, ...]


def _name(value: str, field: str) -> str:
    if not ROLE_NAME.match(value):
        raise InputError(field, value, "must be a lower-case SQL name (letters, digits, _)")
    return value


def role_statements(tables: list[str], *, writer: str, auditor: str) -> list[str]:
    """The SQL that creates (if missing) and grants the two roles over ``tables``."""
    out: list[str] = []
    for role in (writer, auditor):
        out.append(
            f"DO $$ BEGIN IF NOT EXISTS (SELECT 1 FROM pg_roles WHERE rolname = '{role}') "
            f"THEN CREATE ROLE {role} NOLOGIN; END IF; END $$"
        )
        out.append(f"GRANT USAGE ON SCHEMA public TO {role}")
    for t in tables:
        out.append(f"REVOKE ALL ON TABLE {t} FROM {writer}, {auditor}")
        if t in APPEND_ONLY:
            out.append(f"GRANT SELECT, INSERT ON TABLE {t} TO {writer}")
        elif t in SCHEMA_TABLES:
            out.append(f"GRANT SELECT ON TABLE {t} TO {writer}")
        else:
            out.append(f"GRANT SELECT, INSERT, UPDATE, DELETE ON TABLE {t} TO {writer}")
        if t not in ACCOUNT_TABLES:
            out.append(f"GRANT SELECT ON TABLE {t} TO {auditor}")
    out.append(f"GRANT USAGE, SELECT ON ALL SEQUENCES IN SCHEMA public TO {writer}")
    return out


def make_roles(
    db: Database,
    *,
    writer: str = "refledger_writer",
    auditor: str = "refledger_auditor",
    grant_writer: str | None = None,
    grant_auditor: str | None = None,
) -> RolesMade:
    """Create or refresh the writer and auditor roles on a PostgreSQL ledger (one transaction)."""
    from sqlalchemy import inspect

    writer, auditor = _name(writer, "--writer"), _name(auditor, "--auditor")
    if writer == auditor:
        raise InputError("--auditor", auditor, "must differ from --writer")
    if db.location.is_sqlite:
        raise LedgerError("db roles: needs a PostgreSQL ledger (SQLite has no roles; protect the file instead)")
    done: list[str] = []
    with db.write() as conn:
        tables = sorted(inspect(conn).get_table_names(schema="public"))
        statements = role_statements(tables, writer=writer, auditor=auditor)
        grants = ((grant_writer, writer, "--grant-writer"), (grant_auditor, auditor, "--grant-auditor"))
        for login, role, field in grants:
            if login:
                statements.append(f"GRANT {role} TO {_name(login, field)}")
        for sql in statements:
            conn.exec_driver_sql(sql)
            done.append(sql)
    return RolesMade(writer, auditor, tuple(done))
