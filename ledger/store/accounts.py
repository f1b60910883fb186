"""Rows of the web accounts tables (users, sessions, failed logins) and their queries."""

from __future__ import annotations

from collections.abc import Mapping
from datetime import datetime
from typing import TYPE_CHECKING, Any

from sqlalchemy import delete, func, insert, select, update

from ledger.store.results import inserted_id
from ledger.store.tables import app_user, login_failure, technician, web_session

if TYPE_CHECKING:
    from sqlalchemy import Connection


def _user_query():
    return select(app_user, technician.c.name.label("technician_name")).outerjoin(
        technician, technician.c.id == app_user.c.technician_id
    )


def insert_user(*, conn: Connection, values: Mapping[str, Any]) -> int:
    """Insert a user row; returns its id."""
    return inserted_id(conn, insert(app_user).values(**values))


def find_user(name: str, *, conn: Connection) -> Any | None:
    """The user row named ``name`` (with ``technician_name``), or None."""
    return conn.execute(_user_query().where(app_user.c.name == name)).first()


def user_by_id(user_id: int, *, conn: Connection) -> Any | None:
    """The user row with this id, or None."""
    return conn.execute(_user_query().where(app_user.c.id == user_id)).first()


def list_users(*, conn: Connection) -> list[Any]:
    """Every user row, by name."""
    return list(conn.execute(_user_query().order_by(app_user.c.name)).all())


def update_user(user_id: int, *, conn: Connection, values: Mapping[str, Any]) -> None:
    """Change columns of one user row."""
    conn.execute(update(app_user).where(app_user.c.id == user_id).values(**values))


def insert_session(*, conn: Connection, values: Mapping[str, Any]) -> None:
    """Insert a browser session row."""
    conn.execute(insert(web_session).values(**values))


def find_session(token_hash: str, *, conn: Connection) -> Any | None:
    """The session with this token hash joined to its user's row (one query), or None."""
    return conn.execute(
        _user_query().add_columns(web_session.c.id.label("session_id"), web_session.c.csrf,
                                  web_session.c.last_seen_at)
        .join(web_session, web_session.c.user_id == app_user.c.id)
        .where(web_session.c.token_hash == token_hash)
    ).first()


def touch_session(session_id: int, at: datetime, *, conn: Connection) -> None:
    """Record that a session was used at ``at``."""
    conn.execute(update(web_session).where(web_session.c.id == session_id).values(last_seen_at=at))


def delete_session(token_hash: str, *, conn: Connection) -> None:
    """End one session."""
    conn.execute(delete(web_session).where(web_session.c.token_hash == token_hash))


def delete_sessions_of(user_id: int, *, conn: Connection) -> None:
    """End every session of a user (password changed, user disabled)."""
    conn.execute(delete(web_session).where(web_session.c.user_id == user_id))


def delete_idle_sessions(before: datetime, *, conn: Connection) -> None:
    """Drop sessions not used since ``before``."""
    conn.execute(delete(web_session).where(web_session.c.last_seen_at < before))


def add_failure(name: str, at: datetime, *, conn: Connection) -> None:
    """Record a failed login for ``name``."""
    conn.execute(insert(login_failure).values(name=name, at=at))


def count_failures(name: str, since: datetime, *, conn: Connection) -> tuple[int, datetime | None]:
    """Failed logins for ``name`` since ``since`` and the earliest of them."""
    row = conn.execute(
        select(func.count(), func.min(login_failure.c.at)).where(
            login_failure.c.name == name, login_failure.c.at >= since
        )
    ).one()
    return int(row[0]), row[1]


def clear_failures(name: str, *, conn: Connection) -> None:
    """Forget the failed logins of ``name`` (after a successful one)."""
    conn.execute(delete(login_failure).where(login_failure.c.name == name))
