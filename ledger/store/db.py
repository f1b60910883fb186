"""Engine and connections: which database, SQLite pragmas, write transactions, schema checks.

The database is chosen by ``--db`` (a file path or an SQLAlchemy URL), else the
``REFLEDGER_DB`` environment variable, else a per-user data file.

SQLite runs in WAL mode with a busy timeout; write transactions start with
``BEGIN IMMEDIATE`` so two writers queue for the lock up front instead of failing half-way.
"""

from __future__ import annotations

import os
import shutil
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING

from ledger.errors import LedgerError, SchemaOutOfDate

if TYPE_CHECKING:
    from sqlalchemy import Connection, Engine

ENV_VAR = "REFLEDGER_DB"
READINGS_ENV_VAR = "REFLEDGER_READINGS"
# Newest migration revision; tests assert it equals Alembic's script head, so every
# command can check the schema with one SELECT instead of importing Alembic.
HEAD_REVISION = "0007"
SQLITE_BUSY_TIMEOUT_MS = 30_000  # concurrent loggers wait this long for the write lock


@dataclass(frozen=True, slots=True)
class Location:
    """Where the database is and why that one was chosen."""

    url: str
    source: str  # "--db", "REFLEDGER_DB" or "default"

    @property
    def is_sqlite(self) -> bool:
        return self.url.startswith("sqlite")

    @property
    def sqlite_path(self) -> Path | None:
        if not self.is_sqlite:
            return None
        raw = self.url.split("///", 1)[1] if "///" in self.url else ""
        return Path(raw) if raw and raw != ":memory:" else None

    @property
    def readings_root(self) -> Path:
        """Where detector readings are kept: $REFLEDGER_READINGS, else beside an SQLite file
        (``<name>-readings/``), else in the per-user data folder."""
        env = os.environ.get(READINGS_ENV_VAR)
        if env:
            return Path(env).expanduser()
        path = self.sqlite_path
        if path is not None:
            return path.with_name(path.stem + "-readings")
        return default_path().parent / "readings"


ATTACHMENTS_ENV_VAR = "REFLEDGER_ATTACHMENTS"


def attachments_root(location: Location) -> Path:
    """Where attached files (photos, service reports) are kept, each named by its SHA-256:
    $REFLEDGER_ATTACHMENTS, else beside an SQLite file (``<name>-attachments/``), else in the
    per-user data folder."""
    env = os.environ.get(ATTACHMENTS_ENV_VAR)
    if env:
        return Path(env).expanduser()
    path = location.sqlite_path
    if path is not None:
        return path.with_name(path.stem + "-attachments")
    return default_path().parent / "attachments"


def default_path() -> Path:
    """The per-user data file used when no database is named."""
    base = os.environ.get("XDG_DATA_HOME") or str(Path.home() / ".local" / "share")
    return Path(base) / "refledger" / "ledger.db"


def to_url(value: str) -> str:
    """Turn a ``--db`` value (path or URL) into an SQLAlchemy URL."""
    if "://" in value:
        if value.startswith("postgresql://") or value.startswith("postgres://"):
            return "postgresql+psycopg://" + value.split("://", 1)[1]
        return value
    return "sqlite:///" + str(Path(value).expanduser().resolve())


def locate(db: str | None) -> Location:
    """Decide which database to use.

    Args:
        db: the ``--db`` option, or None.
    Returns:
        The Location with its URL and the reason it was chosen.
    """
    if db:
        return Location(to_url(db), "--db")
    env = os.environ.get(ENV_VAR)
    if env:
        return Location(to_url(env), ENV_VAR)
    return Location(to_url(str(default_path())), "default")


def make_engine(location: Location) -> Engine:
    """Create an engine with the ledger's connection settings."""
    from sqlalchemy import create_engine, event

    if location.is_sqlite:
        # The file (and its folder) is made only by `create_file` (db init, demo, restore): a
        # read or an ordinary write on a missing file is refused by `check_schema`.
        engine = create_engine(location.url, connect_args={"timeout": SQLITE_BUSY_TIMEOUT_MS / 1000})

        @event.listens_for(engine, "connect")
        def _on_connect(dbapi_conn, _record):
            dbapi_conn.isolation_level = None  # we issue BEGIN ourselves
            cur = dbapi_conn.cursor()
            cur.execute("PRAGMA journal_mode=WAL")
            cur.execute("PRAGMA foreign_keys=ON")
            cur.execute(f"PRAGMA busy_timeout={SQLITE_BUSY_TIMEOUT_MS}")
            cur.execute("PRAGMA synchronous=NORMAL")
            cur.close()

        @event.listens_for(engine, "begin")
        def _on_begin(conn):
            options = conn.get_execution_options()
            if options.get("ledger_nowait", False):
                conn.exec_driver_sql("PRAGMA busy_timeout=0")  # restored by Database.write
            conn.exec_driver_sql("BEGIN IMMEDIATE" if options.get("ledger_write", False) else "BEGIN")

        return engine
    try:
        return create_engine(location.url, pool_pre_ping=False)
    except Exception as exc:  # bad URL, missing driver
        raise LedgerError(f"db: cannot use {location.url!r}: {exc}") from exc


def current_revision(conn: Connection) -> str | None:
    """The revision recorded in the database, or None for an empty database."""
    from sqlalchemy import inspect, text

    if not inspect(conn).has_table("alembic_version"):
        return None
    return conn.execute(text("SELECT version_num FROM alembic_version")).scalar()


class Database:
    """An open ledger database: engine plus the transaction helpers services use."""

    def __init__(self, location: Location) -> None:
        self.location = location
        self.engine = make_engine(location)
        self._checked = False

    def close(self) -> None:
        self.engine.dispose()

    def check_schema(self) -> None:
        """Refuse to work on a database that is not at the migration head."""
        if self._checked:
            return
        missing_file(self.location)
        try:
            with self.engine.connect() as conn:
                revision = current_revision(conn)
        except Exception as exc:
            if _is_driver_error(exc):
                raise LedgerError(f"db: cannot open {self.location.url}: {_first_line(exc)}") from exc
            raise
        if revision is None:
            raise SchemaOutOfDate(f"db: {self.location.url} holds no ledger yet; run `refledger db init`")
        if revision != HEAD_REVISION:
            raise SchemaOutOfDate(
                f"db: schema is at revision {revision}, this refledger needs {HEAD_REVISION}; "
                "run `refledger db upgrade`"
            )
        self._checked = True

    @contextmanager
    def write(self, *, wait: bool = True) -> Iterator[Connection]:
        """One write transaction (BEGIN IMMEDIATE on SQLite); commits or rolls back as a unit.

        Args:
            wait: False for writes that may be skipped (kept results): rather than queue
                behind another writer, fail at once with the driver's "locked" error.
        """
        self.check_schema()
        with self.engine.connect().execution_options(ledger_write=True, ledger_nowait=not wait) as conn:
            try:
                with conn.begin():
                    if not wait and not self.location.is_sqlite:
                        conn.exec_driver_sql("SET LOCAL lock_timeout = '200ms'")
                    yield conn
            finally:
                if not wait and self.location.is_sqlite:
                    conn.exec_driver_sql(f"PRAGMA busy_timeout={SQLITE_BUSY_TIMEOUT_MS}")

    @contextmanager
    def read(self) -> Iterator[Connection]:
        """One read transaction."""
        self.check_schema()
        with self.engine.connect() as conn:
            with conn.begin():
                yield conn


def missing_file(location: Location) -> None:
    """Refuse an SQLite ledger file that is not there (or is a folder) before anything opens it,
    so that asking a missing ledger creates no empty file."""
    path = location.sqlite_path
    if path is None:
        return
    if path.is_dir():
        raise SchemaOutOfDate(f"db: {path} is a folder, not a ledger file (from {location.source})")
    if not path.exists():
        raise SchemaOutOfDate(
            f"db: no ledger at {path} (from {location.source}); run `refledger db init` to create one "
            "there, or name another with --db"
        )


def create_file(location: Location) -> None:
    """Make the folder of a new SQLite ledger file (the commands that create a ledger call this)."""
    path = location.sqlite_path
    if path is None:
        return
    if path.is_dir():
        raise LedgerError(f"db: {path} is a folder, not a ledger file (from {location.source})")
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise LedgerError(f"db: cannot create a ledger at {path}: {exc.strerror or exc}") from None


def _is_driver_error(exc: Exception) -> bool:
    from sqlalchemy.exc import DBAPIError

    return isinstance(exc, DBAPIError)


def _first_line(exc: Exception) -> str:
    text = str(getattr(exc, "orig", exc)) or type(exc).__name__
    return text.strip().splitlines()[0]


# ---- migrations -------------------------------------------------------------------------


def alembic_config(location: Location):
    """An Alembic Config pointing at the packaged migrations and this database."""
    from alembic.config import Config

    cfg = Config()
    cfg.set_main_option("script_location", str(Path(__file__).parent / "migrations"))
    cfg.set_main_option("sqlalchemy.url", location.url.replace("%", "%%"))
    return cfg


def status(location: Location) -> tuple[str | None, list[str]]:
    """The applied revision and the pending ones, without writing anything."""
    from alembic.script import ScriptDirectory

    script = ScriptDirectory.from_config(alembic_config(location))
    path = location.sqlite_path
    if path is not None and not path.exists():  # nothing applied; looking must not create the file
        return None, [rev.revision for rev in reversed(list(script.walk_revisions()))]
    db = Database(location)
    try:
        with db.engine.connect() as conn:
            current = current_revision(conn)
    except Exception as exc:
        if _is_driver_error(exc):
            raise LedgerError(f"db: cannot open {location.url}: {_first_line(exc)}") from exc
        raise
    finally:
        db.close()
    pending = [
        rev.revision
        for rev in reversed(list(script.walk_revisions()))
        if current is None or not _is_applied(script, rev.revision, current)
    ]
    return current, pending


def _is_applied(script, revision: str, current: str) -> bool:
    return any(r.revision == revision for r in script.iterate_revisions(current, "base"))


def upgrade(location: Location, *, backup: bool = True) -> tuple[str | None, str, Path | None]:
    """Apply pending migrations; copy an SQLite file to ``<name>.bak-<revision>`` first.

    Returns:
        (revision before, revision after, backup path or None).
    """
    from alembic import command

    create_file(location)
    before, pending = status(location)
    saved: Path | None = None
    path = location.sqlite_path
    if backup and pending and before is not None and path is not None and path.exists():
        saved = path.with_name(f"{path.name}.bak-{before}")
        shutil.copy2(path, saved)
    if pending:
        command.upgrade(alembic_config(location), "head")
    return before, HEAD_REVISION, saved
