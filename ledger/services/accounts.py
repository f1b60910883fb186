"""Web accounts: users and roles, passwords (argon2id), sessions with an idle timeout, and a
limit on failed logins.

Roles (what the web app lets each do; enforced on the server for every route):

* ``technician``: read the systems of their sites and record events on them;
* ``officer``: everything except managing users (due lists, summaries, imports, recording);
* ``auditor``: read-only: every history, downloads, chain verification;
* ``admin``: manage users.

argon2 is imported inside the functions that hash, so the CLI stays light.
"""

from __future__ import annotations

import hashlib
import hmac
import secrets
from collections.abc import Sequence
from dataclasses import dataclass
from datetime import UTC, datetime, timedelta
from typing import TYPE_CHECKING, Any

from ledger.errors import Conflict, InputError, LedgerError, NotFound
from ledger.store import accounts as store
from ledger.store import repository as repo
from ledger.store.db import Database

if TYPE_CHECKING:
    from sqlalchemy import Connection

ROLES = ("technician", "officer", "auditor", "admin")
# Roles that may append events (the visit form and its API).
RECORDING_ROLES = frozenset({"technician", "officer"})
# Roles that may read records (systems, histories, due lists, downloads).
READING_ROLES = frozenset({"technician", "officer", "auditor"})
MIN_PASSWORD_LENGTH = 10  # long enough to resist guessing at the login limit below
MAX_FAILURES = 5  # failed logins per name within FAILURE_WINDOW before logins are refused
FAILURE_WINDOW = timedelta(minutes=15)
IDLE_TIMEOUT = timedelta(minutes=30)  # a session unused this long has ended
TOUCH_EVERY = timedelta(seconds=60)  # write last_seen_at at most this often (one write a minute)


class LoginRefused(LedgerError):
    """Wrong name or password, a disabled user, or too many failed attempts."""


@dataclass(frozen=True, slots=True)
class User:
    """A person who may log in to the web app."""

    id: int
    name: str
    role: str
    technician: str | None = None  # the technician record they are (their certificates)
    sites: tuple[str, ...] = ()  # empty: every site
    disabled: bool = False

    def may_see_site(self, site_code: str) -> bool:
        """Whether this user may read (and, by role, record on) a site's systems."""
        return self.role in ("officer", "auditor") or not self.sites or site_code in self.sites


@dataclass(frozen=True, slots=True)
class Session:
    """A logged-in browser: the user and the token every form must echo (CSRF)."""

    user: User
    csrf: str


def _user(row) -> User:
    return User(
        id=row.id,
        name=row.name,
        role=row.role,
        technician=row.technician_name,
        sites=tuple(s for s in (row.sites or "").split(",") if s),
        disabled=bool(row.disabled),
    )


def _hasher():
    from argon2 import PasswordHasher

    return PasswordHasher()  # argon2id with the library's RFC 9106 low-memory profile


def hash_password(password: str) -> str:
    """An argon2id hash (PHC string) of a password that meets the length rule."""
    if len(password) < MIN_PASSWORD_LENGTH:
        raise InputError("password", "(hidden)", f"must have at least {MIN_PASSWORD_LENGTH} characters")
    return _hasher().hash(password)


def new_password() -> str:
    """A random password to hand to a new user (about 96 bits)."""
    return secrets.token_urlsafe(12)


def _check_role(role: str) -> str:
    if role not in ROLES:
        raise InputError("--role", role, f"is not one of {', '.join(ROLES)}")
    return role


def add_user(
    db: Database, *, name: str, role: str, password: str, technician: str | None = None, sites: Sequence[str] = ()
) -> User:
    """Add a user; a technician user may be tied to a technician record and to some sites.

    Raises:
        InputError: bad name, role or password; Conflict: the name is taken; NotFound: unknown
            technician or site.
    """
    name = name.strip()
    if not name or len(name) > 100 or any(c.isspace() for c in name):
        raise InputError("NAME", name, "must be 1 to 100 characters without spaces")
    _check_role(role)
    if technician and role != "technician":
        raise InputError("--tech", technician, "applies to technician users only")
    hashed = hash_password(password)
    with db.write() as conn:
        if store.find_user(name, conn=conn) is not None:
            raise Conflict(f"user: {name!r} exists already")
        tech_id = repo.get_technician(technician, conn=conn)[0].id if technician else None
        codes = []
        for code in sites:
            codes.append(repo.get_site(code.strip(), conn=conn).code)
        user_id = store.insert_user(conn=conn, values={
            "name": name, "role": role, "password_hash": hashed, "technician_id": tech_id,
            "sites": ",".join(codes), "disabled": False, "created_at": repo.now_utc(),
        })
        return _user(store.user_by_id(user_id, conn=conn))


def _get(name: str, *, conn: Connection) -> Any:
    """The user row named ``name`` (a Row: its columns as attributes); NotFound if none."""
    row = store.find_user(name, conn=conn)
    if row is None:
        raise NotFound(f"user: {name!r} is not a user (see `refledger user list`)")
    return row


def set_password(db: Database, *, name: str, password: str) -> None:
    """Give a user a new password; their sessions end."""
    hashed = hash_password(password)
    with db.write() as conn:
        row = _get(name, conn=conn)
        store.update_user(row.id, conn=conn, values={"password_hash": hashed})
        store.delete_sessions_of(row.id, conn=conn)


def set_disabled(db: Database, *, name: str, disabled: bool) -> User:
    """Disable (or enable again) a user; a disabled user's sessions end at once."""
    with db.write() as conn:
        row = _get(name, conn=conn)
        store.update_user(row.id, conn=conn, values={"disabled": disabled})
        if disabled:
            store.delete_sessions_of(row.id, conn=conn)
        return _user(store.user_by_id(row.id, conn=conn))


def list_users(db: Database) -> list[User]:
    """Every user, by name."""
    with db.read() as conn:
        return [_user(r) for r in store.list_users(conn=conn)]


def _digest(token: str) -> str:
    return hashlib.sha256(token.encode()).hexdigest()


def login(db: Database, *, name: str, password: str, now: datetime | None = None) -> tuple[str, Session]:
    """Check a name and password and open a session.

    Returns:
        (the token for the cookie, the session).
    Raises:
        LoginRefused: one message for a wrong name or password (it does not say which), or a
            message saying logins are paused after too many failures.
    """
    now = now or datetime.now(UTC)
    name = name.strip()[:100]
    with db.write() as conn:
        failures, first = store.count_failures(name, now - FAILURE_WINDOW, conn=conn)
        if failures >= MAX_FAILURES:
            first = first.replace(tzinfo=UTC) if first and first.tzinfo is None else first
            wait = max(1, int(((first or now) + FAILURE_WINDOW - now).total_seconds() // 60) + 1)
            raise LoginRefused(f"login: too many failed attempts for {name!r}; try again in {wait} minutes")
        row = store.find_user(name, conn=conn)
        ok = False
        if row is not None and not row.disabled:
            ok = _verify(row.password_hash, password)
        else:
            _verify(_DUMMY_HASH(), password)  # spend the same time whether or not the name exists
        if not ok:
            store.add_failure(name, now, conn=conn)
    if not ok or row is None:  # ok only for a row that exists
        raise LoginRefused("login: wrong name or password")
    token = secrets.token_urlsafe(32)
    csrf = secrets.token_urlsafe(32)
    with db.write() as conn:
        store.clear_failures(name, conn=conn)
        store.delete_idle_sessions(now - IDLE_TIMEOUT, conn=conn)
        store.insert_session(conn=conn, values={
            "token_hash": _digest(token), "user_id": row.id, "csrf": csrf, "created_at": now, "last_seen_at": now,
        })
    return token, Session(_user(row), csrf)


_dummy: dict[str, str] = {}


def _DUMMY_HASH() -> str:  # noqa: N802 - a lazily made constant
    if "h" not in _dummy:
        _dummy["h"] = _hasher().hash(secrets.token_urlsafe(16))
    return _dummy["h"]


def _verify(hashed: str, password: str) -> bool:
    from argon2.exceptions import InvalidHashError, VerificationError

    try:
        return bool(_hasher().verify(hashed, password))
    except (VerificationError, InvalidHashError):
        return False


def _aware(moment: datetime) -> datetime:
    return moment.replace(tzinfo=UTC) if moment.tzinfo is None else moment


def session_of(
    db: Database, token: str | None, *, now: datetime | None = None, idle: timedelta = IDLE_TIMEOUT
) -> Session | None:
    """The live session for a cookie token, or None (unknown, idle too long, or user disabled)."""
    if not token:
        return None
    now = now or datetime.now(UTC)
    digest = _digest(token)
    with db.read() as conn:
        row = store.find_session(digest, conn=conn)
    if row is None or row.disabled:
        return None
    seen = _aware(row.last_seen_at)
    if now - seen > idle:
        with db.write() as conn:
            store.delete_session(digest, conn=conn)
        return None
    if now - seen > TOUCH_EVERY:
        with db.write() as conn:
            store.touch_session(row.session_id, now, conn=conn)
    return Session(_user(row), row.csrf)


def logout(db: Database, token: str | None) -> None:
    """End the session of a cookie token (nothing happens for an unknown one)."""
    if token:
        with db.write() as conn:
            store.delete_session(_digest(token), conn=conn)


def same_token(expected: str, given: str | None) -> bool:
    """Constant-time comparison of a CSRF token."""
    return bool(given) and hmac.compare_digest(expected.encode(), (given or "").encode())
