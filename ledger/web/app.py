"""The FastAPI application: settings, middleware, error pages, templates and the routers."""

from __future__ import annotations

from dataclasses import dataclass
from datetime import UTC, date, datetime, timedelta
from pathlib import Path
from typing import Any

from fastapi import FastAPI, Request
from fastapi.responses import HTMLResponse, JSONResponse, RedirectResponse, Response
from fastapi.staticfiles import StaticFiles
from fastapi.templating import Jinja2Templates

from ledger.errors import LedgerError
from ledger.exports.common import CAUTION
from ledger.services.accounts import IDLE_TIMEOUT
from ledger.store.db import Database, Location, attachments_root
from ledger.web import security

HERE = Path(__file__).parent
MAX_BODY_BYTES = 25 * 1024 * 1024  # a visit's photos or an import workbook; larger is refused (413)


@dataclass(frozen=True)
class Settings:
    """How one server runs."""

    location: Location
    idle: timedelta = IDLE_TIMEOUT
    secure_cookies: bool | None = None  # None: Secure unless reached on localhost
    max_body: int = MAX_BODY_BYTES


def _templates() -> Jinja2Templates:
    templates = Jinja2Templates(directory=str(HERE / "templates"))  # autoescape on for .html
    templates.env.globals["caution"] = CAUTION
    return templates


TEMPLATES = _templates()


def today_utc() -> date:
    """The server's day (UTC), the default as-of day of pages that span sites."""
    return datetime.now(UTC).date()


def render(request: Request, template: str, status_code: int = 200, **context: Any) -> HTMLResponse:
    """A page: every template gets the session (if any), its CSRF token and the as-of day."""
    session = getattr(request.state, "session", None)
    context.setdefault("as_of", today_utc())
    context.update(request=request, session=session, user=session.user if session else None,
                   csrf=session.csrf if session else "")
    return TEMPLATES.TemplateResponse(request, template, context, status_code=status_code)


def create_app(settings: Settings) -> FastAPI:
    """The web app over one ledger database."""
    from ledger.web import api, pages

    app = FastAPI(title="refledger", version=_version(), docs_url=None, redoc_url=None,
                  openapi_url="/api/openapi.json")
    app.state.settings = settings
    app.state.db = Database(settings.location)
    app.state.attachments = attachments_root(settings.location)
    app.mount("/static", StaticFiles(directory=str(HERE / "static")), name="static")

    @app.middleware("http")
    async def guard(request: Request, call_next):
        length = request.headers.get("content-length")
        if length is not None and (not length.isdigit() or int(length) > settings.max_body):
            return _refuse(request, 413, f"upload: larger than {settings.max_body // (1024 * 1024)} MB")
        response = await call_next(request)
        for key, value in security.HEADERS.items():
            response.headers.setdefault(key, value)
        return response

    @app.exception_handler(security.NotLoggedIn)
    async def not_logged_in(request: Request, _exc: Exception) -> Response:
        if security.is_api(request):
            return JSONResponse({"error": "login: not logged in"}, status_code=401)
        return RedirectResponse(f"/login?next={_next(request)}", status_code=303)

    @app.exception_handler(security.Forbidden)
    async def forbidden(request: Request, exc: Exception) -> Response:
        return _refuse(request, 403, f"forbidden: {exc}")

    @app.exception_handler(security.BadCsrf)
    async def bad_csrf(request: Request, _exc: Exception) -> Response:
        return _refuse(request, 403, "csrf: the form's security token is missing or stale; reload the page")

    app.include_router(pages.router)
    app.include_router(api.router)
    return app


def _next(request: Request) -> str:
    from urllib.parse import quote

    path = request.url.path if request.method == "GET" else "/"
    return quote(path + (f"?{request.url.query}" if request.url.query and request.method == "GET" else ""), safe="")


def _refuse(request: Request, status: int, message: str) -> Response:
    if security.is_api(request):
        return JSONResponse({"error": message}, status_code=status)
    return render(request, "error.html", status_code=status, message=message, status=status)


def error_response(request: Request, exc: LedgerError, status: int = 400) -> Response:
    """A user's mistake as a page or JSON (one line, the CLI's message)."""
    return _refuse(request, status, str(exc))


def _version() -> str:
    from ledger import __version__

    return __version__
