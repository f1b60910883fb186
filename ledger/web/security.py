"""Who is asking, and may they: the session cookie, roles, CSRF tokens, security headers.

* The session cookie holds a random token (only its SHA-256 is stored); HttpOnly, SameSite=Lax
  (a QR code opened from the camera app is a cross-site top-level visit: Strict would drop
  the cookie and show the login page), Secure unless the server is reached on localhost.
* Every form carries the session's CSRF token; every API write sends it as ``X-CSRF-Token``.
  The login form, before any session, uses a double-submit cookie.
* Roles are checked on the server by a dependency on every route (``need``).
"""

from __future__ import annotations

import secrets
from collections.abc import Callable
from typing import Annotated, Any

from fastapi import Depends, Request

from ledger.services import accounts

SESSION_COOKIE = "refledger_session"
LOGIN_CSRF_COOKIE = "refledger_login_csrf"
CSRF_FIELD = "csrf"
CSRF_HEADER = "x-csrf-token"
LOCAL_HOSTS = frozenset({"localhost", "127.0.0.1", "::1", "[::1]"})


class NotLoggedIn(Exception):
    """No live session: pages answer with the login page, the API with 401."""


class Forbidden(Exception):
    """The user's role (or site list) does not allow this: 403, nothing written."""

    def __init__(self, message: str = "your role does not allow this") -> None:
        super().__init__(message)


class BadCsrf(Exception):
    """A write without the session's CSRF token: refused (403), nothing written."""


def is_api(request: Request) -> bool:
    """Whether a request is for the JSON API."""
    return request.url.path.startswith("/api/")


def cookie_secure(request: Request) -> bool:
    """Secure cookies unless the server was reached on localhost (or the app says otherwise)."""
    forced = request.app.state.settings.secure_cookies
    if forced is not None:
        return bool(forced)
    return (request.url.hostname or "") not in LOCAL_HOSTS


def set_cookie(response: Any, request: Request, name: str, value: str, *, max_age: int | None = None) -> None:
    """Set one of our cookies with the flags above."""
    response.set_cookie(name, value, max_age=max_age, httponly=True, samesite="lax",
                        secure=cookie_secure(request), path="/")


def current_session(request: Request) -> accounts.Session:
    """The live session of the request, or NotLoggedIn."""
    cached = getattr(request.state, "session", None)
    if cached is not None:
        return cached
    settings = request.app.state.settings
    found = accounts.session_of(request.app.state.db, request.cookies.get(SESSION_COOKIE), idle=settings.idle)
    if found is None:
        raise NotLoggedIn()
    request.state.session = found
    return found


def need(*roles: str) -> Callable[[Request], accounts.Session]:
    """A dependency: the session, if its user has one of ``roles``; else 401/403."""
    allowed = frozenset(roles)

    def check(request: Request) -> accounts.Session:
        session = current_session(request)
        if session.user.role not in allowed:
            raise Forbidden(f"the {session.user.role} role may not do this")
        return session

    check.__name__ = "need_" + "_".join(sorted(allowed))
    return check


def check_site(session: accounts.Session, site_code: str) -> None:
    """Forbidden unless the user may see this site."""
    if not session.user.may_see_site(site_code):
        raise Forbidden(f"site {site_code} is not one of yours")


def check_csrf(session: accounts.Session, given: str | None) -> None:
    """BadCsrf unless ``given`` is the session's token."""
    if not accounts.same_token(session.csrf, given):
        raise BadCsrf()


def login_csrf(request: Request) -> str:
    """The login form's token (kept in a cookie until a session exists)."""
    return request.cookies.get(LOGIN_CSRF_COOKIE) or secrets.token_urlsafe(32)


HEADERS = {
    "X-Content-Type-Options": "nosniff",
    "X-Frame-Options": "DENY",
    "Referrer-Policy": "same-origin",
    # Everything comes from this server; no inline script.
    "Content-Security-Policy": "default-src 'self'; img-src 'self' data:; style-src 'self'; "
                               "script-src 'self'; frame-ancestors 'none'; form-action 'self'",
    "Cache-Control": "no-store",
}


def db_of(request: Request) -> Any:
    """The app's open ledger database."""
    return request.app.state.db


# Route parameters that check the role (and give the session).
Reader = Annotated[accounts.Session, Depends(need(*accounts.READING_ROLES))]
Recorder = Annotated[accounts.Session, Depends(need(*accounts.RECORDING_ROLES))]
Office = Annotated[accounts.Session, Depends(need("officer", "auditor"))]
Officer = Annotated[accounts.Session, Depends(need("officer"))]
Admin = Annotated[accounts.Session, Depends(need("admin"))]
Anyone = Annotated[accounts.Session, Depends(current_session)]
