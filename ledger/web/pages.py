"""The HTML pages: login, technician (find, system, visit), officer (due list, annual summary,
import), auditor (history, logbooks, verify) and admin (users). Roles are checked by a
dependency on every route; every write also checks the form's CSRF token.
"""

from __future__ import annotations

import tempfile
from collections.abc import Callable
from datetime import date
from decimal import ROUND_HALF_UP, Decimal
from pathlib import Path
from typing import Annotated, Any
from urllib.parse import quote, unquote

from fastapi import APIRouter, Query, Request
from fastapi.responses import FileResponse, RedirectResponse, Response
from starlette.concurrency import run_in_threadpool

from ledger.errors import InputError, LedgerError, NeedsConfirmation
from ledger.inputs import parse_day
from ledger.services import accounts, queries
from ledger.services.accounts import RECORDING_ROLES, Session
from ledger.web import security
from ledger.web.app import TEMPLATES, error_response, render, today_utc
from ledger.web.forms import VisitForm, drafts_from, form_values, place_error
from ledger.web.security import Admin, Anyone, Office, Officer, Reader, Recorder, check_csrf, check_site, db_of

router = APIRouter()


HOME_OF = {"technician": "/find", "officer": "/due", "auditor": "/find", "admin": "/users"}
PAGE_SIZES = (25, 50, 100)
SORT_KEYS = ("due_on", "site", "kind", "regime", "status")
MAX_IMPORT_BYTES = 20 * 1024 * 1024
IMPORT_SUFFIXES = (".csv", ".xlsx")
KG_PER_LB = Decimal("0.45359237")  # exact, by the 1959 definition of the pound



def mass_text(kg: Any, unit: str, places: int = 2) -> str:
    """A mass (exact kg from the JSON contract) in the site's unit."""
    if kg is None:
        return ""
    value = Decimal(kg) / KG_PER_LB if unit == "lb" else Decimal(kg)
    return f"{value.quantize(Decimal(1).scaleb(-places), rounding=ROUND_HALF_UP)} {unit}"


def safety_note(safety_class: str | None) -> str | None:
    """The caution a refrigerant's ASHRAE 34 safety class calls for (None for A1 or unknown)."""
    if not safety_class or safety_class.upper().startswith("A1"):
        return None
    cls = safety_class.upper()
    parts = []
    if cls.startswith("B"):
        parts.append("toxic (higher toxicity, class B)")
    if "2L" in cls:
        parts.append("mildly flammable (class 2L)")
    elif cls.endswith("2"):
        parts.append("flammable (class 2)")
    elif cls.endswith("3"):
        parts.append("highly flammable (class 3)")
    return (f"Safety class {safety_class}: {' and '.join(parts) or 'see its data sheet'}. Work only as local "
            "codes and standards (e.g. EN 378, ISO 5149, ASHRAE 15) require: ventilation, gas detection, no "
            "ignition sources, charge limits, certified personnel.")


TEMPLATES.env.filters["mass"] = mass_text
TEMPLATES.env.globals["safety_note"] = safety_note


def _day(text: str | None, field: str = "as_of") -> date:
    return parse_day(text, field=field) if text else today_utc()


# ---- login ---------------------------------------------------------------------------------


@router.get("/login", include_in_schema=False)
def login_page(request: Request, next: str = "/") -> Response:  # noqa: A002 - the query name
    token = security.login_csrf(request)
    response = render(request, "login.html", login_csrf=token, next=_safe_next(next))
    security.set_cookie(response, request, security.LOGIN_CSRF_COOKIE, token, max_age=3600)
    return response


def _safe_next(target: str) -> str:
    target = unquote(target or "/")
    return target if target.startswith("/") and not target.startswith("//") else "/"


@router.post("/login", include_in_schema=False)
async def login(request: Request) -> Response:
    form = await request.form()
    name, password = str(form.get("name", "")), str(form.get("password", ""))
    target = _safe_next(str(form.get("next", "/")))
    cookie = request.cookies.get(security.LOGIN_CSRF_COOKIE)
    if not cookie or not accounts.same_token(cookie, str(form.get(security.CSRF_FIELD, ""))):
        raise security.BadCsrf()
    try:
        token, _ = await run_in_threadpool(accounts.login, db_of(request), name=name, password=password)
    except accounts.LoginRefused as exc:
        return render(request, "login.html", status_code=401, login_csrf=cookie, next=target,
                      error=str(exc), name=name)
    response = RedirectResponse(target, status_code=303)
    security.set_cookie(response, request, security.SESSION_COOKIE, token)
    response.delete_cookie(security.LOGIN_CSRF_COOKIE, path="/")
    return response


@router.post("/logout", include_in_schema=False)
async def logout(request: Request, session: Anyone) -> Response:
    form = await request.form()
    check_csrf(session, str(form.get(security.CSRF_FIELD, "")))
    await run_in_threadpool(accounts.logout, db_of(request), request.cookies.get(security.SESSION_COOKIE))
    response = RedirectResponse("/login", status_code=303)
    response.delete_cookie(security.SESSION_COOKIE, path="/")
    return response


@router.get("/", include_in_schema=False)
def home(session: Anyone) -> Response:
    return RedirectResponse(HOME_OF[session.user.role], status_code=303)


# ---- finding and reading systems -----------------------------------------------------------


@router.get("/find", include_in_schema=False)
def find(request: Request, session: Reader, q: str = "") -> Response:
    text = q.strip()
    if "/" in text:
        site, _, tag = text.partition("/")
        found = queries.find_systems(db_of(request), text=text, sites=_scope(session),
                                     exact=(site.strip(), tag.strip()))
        if len(found) == 1:
            return RedirectResponse(system_url(found[0]["site"], found[0]["tag"]), status_code=303)
    rows = queries.find_systems(db_of(request), text=text, sites=_scope(session)) if text else []
    return render(request, "find.html", q=text, rows=rows, searched=bool(text))


def _scope(session: Session) -> tuple[str, ...] | None:
    return None if session.user.role in ("officer", "auditor") or not session.user.sites else session.user.sites


def system_url(site: str, tag: str, suffix: str = "") -> str:
    """The page of a system (what a label's QR code opens)."""
    return f"/systems/{quote(site, safe='')}/{quote(tag, safe='')}{suffix}"


TEMPLATES.env.globals["system_url"] = system_url


@router.get("/systems/{site}/{tag}", include_in_schema=False)
def system_page(request: Request, session: Reader, site: str, tag: str, as_of: str | None = None) -> Response:
    check_site(session, site)
    try:
        day = _day(as_of)
        view = queries.system_view(db_of(request), site_code=site, tag=tag, as_of=day)
    except LedgerError as exc:
        return error_response(request, exc, 404 if "not" in str(exc) else 400)
    return render(request, "system.html", view=view, as_of=day,
                  may_record=session.user.role in RECORDING_ROLES,
                  may_download=session.user.role in ("officer", "auditor"))


@router.get("/systems/{site}/{tag}/logbook.{fmt}", include_in_schema=False)
def logbook_file(request: Request, session: Office, site: str, tag: str, fmt: str) -> Response:
    from ledger.services import reporting
    from ledger.services.samples import file_stem

    if fmt not in ("pdf", "xlsx"):
        return error_response(request, InputError("format", fmt, "is not one of pdf, xlsx"), 404)
    try:
        book = reporting.logbook(db_of(request), site_code=site, tag=tag, from_on=None, to_on=None)
    except LedgerError as exc:
        return error_response(request, exc, 404)
    return _file(book, fmt, file_stem("logbook", site, tag), "logbook")


def _file(data: Any, fmt: str, stem: str, what: str) -> Response:
    """Write a report into a temporary folder and send it."""
    folder = Path(tempfile.mkdtemp(prefix="refledger-web-"))
    path = folder / f"{stem}.{fmt}"
    writer: Callable[[Path, Any], Path]
    if what == "logbook":
        if fmt == "pdf":
            from ledger.exports.pdf import write_logbook_pdf as writer
        else:
            from ledger.exports.xlsx import write_logbook_xlsx as writer
    elif fmt == "pdf":
        from ledger.exports.pdf import write_annual_pdf as writer
    elif fmt == "xlsx":
        from ledger.exports.xlsx import write_annual_xlsx as writer
    else:
        from ledger.exports.csv import write_annual_csv as writer
    writer(path, data)
    media = {"pdf": "application/pdf", "csv": "text/csv",
             "xlsx": "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet"}[fmt]
    from starlette.background import BackgroundTask

    return FileResponse(path, media_type=media, filename=path.name,
                        background=BackgroundTask(_remove, folder))


def _remove(folder: Path) -> None:
    import shutil

    shutil.rmtree(folder, ignore_errors=True)


@router.get("/attachments/{digest}", include_in_schema=False)
def attachment(request: Request, session: Office, digest: str) -> Response:
    from ledger.services.attachments import media_type, path_of

    path = path_of(request.app.state.attachments, digest)
    if path is None:
        return error_response(request, LedgerError(f"attachment: {digest[:64]!r} is not stored here"), 404)
    with path.open("rb") as fh:
        kind = media_type(fh.read(16)) or "application/octet-stream"
    return FileResponse(path, media_type=kind, headers={"Content-Disposition": "attachment"})


# ---- the visit form ------------------------------------------------------------------------


def _visit_context(request: Request, session: Session, site: str, tag: str) -> dict[str, Any]:
    from ledger.services.recording import site_today

    db = db_of(request)
    view = queries.system_view(db, site_code=site, tag=tag, as_of=today_utc())
    with db.read() as conn:
        from ledger.store import repository as repo

        the_site = repo.get_site(site, conn=conn)
    cylinders = [c for c in queries.cylinders(db) if c["refrigerant"] == view["refrigerant"]]
    fixed = session.user.technician if session.user.role == "technician" and session.user.technician else None
    techs = [fixed] if fixed else [t["name"] for t in queries.technicians(db)]
    return {"view": view, "cylinders": cylinders, "techs": techs, "fixed_tech": fixed,
            "site_today": site_today(the_site.timezone), "unit": view["unit"]}


@router.get("/systems/{site}/{tag}/visit", include_in_schema=False)
def visit_page(request: Request, session: Recorder, site: str, tag: str) -> Response:
    check_site(session, site)
    try:
        ctx = _visit_context(request, session, site, tag)
    except LedgerError as exc:
        return error_response(request, exc, 404)
    values = {"on": ctx["site_today"].isoformat(), "tech": ctx["fixed_tech"] or session.user.technician or ""}
    return render(request, "visit.html", form=VisitForm(values), **ctx)


@router.post("/systems/{site}/{tag}/visit", include_in_schema=False)
async def visit_submit(request: Request, session: Recorder, site: str, tag: str) -> Response:
    from ledger.services.attachments import MAX_ATTACHMENT_BYTES
    from ledger.services.recording import record_visit

    data = await request.form()
    check_csrf(session, str(data.get(security.CSRF_FIELD, "")))
    check_site(session, site)
    try:
        ctx = await run_in_threadpool(_visit_context, request, session, site, tag)
    except LedgerError as exc:
        return error_response(request, exc, 404)
    form = VisitForm(form_values(data))
    tech = ctx["fixed_tech"] or form.get("tech") or None
    if tech and tech not in ctx["techs"]:
        form.errors["tech"] = f"--tech: {tech!r} is not a technician in the ledger"
    files: list[tuple[str, bytes]] = []
    for upload in data.getlist("files"):
        if isinstance(upload, str) or not getattr(upload, "filename", ""):
            continue
        body = await upload.read(MAX_ATTACHMENT_BYTES + 1)
        files.append((str(upload.filename)[:200], body))
    digests = _check_files(form, files)
    drafts = drafts_from(form, unit=ctx["unit"], technician=tech, recorded_by=session.user.name,
                         attachments=tuple(digests))
    reasons: tuple[str, ...] = ()
    if not form.errors:
        try:
            logged = await run_in_threadpool(
                lambda: record_visit(db_of(request), site_code=site, tag=tag, drafts=drafts,
                                     confirm=bool(form.get("confirm"))))
        except NeedsConfirmation as exc:
            reasons = exc.reasons
        except LedgerError as exc:
            place_error(form, exc, getattr(exc, "visit_part", None))
        else:
            _keep_files(request, files)
            ids = ",".join(str(x.event_id) for x in logged)
            return RedirectResponse(system_url(site, tag, f"/visit/done?ids={ids}"), status_code=303)
    status = 409 if reasons else 400
    return render(request, "visit.html", status_code=status, form=form, reasons=reasons, **ctx)


def _check_files(form: VisitForm, files: list[tuple[str, bytes]]) -> list[str]:
    import hashlib

    from ledger.services.attachments import MAX_ATTACHMENT_BYTES, media_type

    digests = []
    for name, body in files:
        if len(body) > MAX_ATTACHMENT_BYTES:
            form.errors["files"] = f"attachment: {name!r} is larger than {MAX_ATTACHMENT_BYTES // 2**20} MB"
        elif media_type(body) is None:
            form.errors["files"] = f"attachment: {name!r} is not a JPEG, PNG, WebP or PDF file"
        else:
            digests.append(hashlib.sha256(body).hexdigest())
    return digests


def _keep_files(request: Request, files: list[tuple[str, bytes]]) -> None:
    from ledger.services.attachments import store

    for name, body in files:
        store(request.app.state.attachments, body, name=name)


@router.get("/systems/{site}/{tag}/visit/done", include_in_schema=False)
def visit_done(request: Request, session: Recorder, site: str, tag: str, ids: str = "") -> Response:
    check_site(session, site)
    wanted = {int(x) for x in ids.split(",") if x.strip().isdigit()}
    try:
        view = queries.system_view(db_of(request), site_code=site, tag=tag, as_of=today_utc())
    except LedgerError as exc:
        return error_response(request, exc, 404)
    events = [e for e in view["events"] if e["id"] in wanted]
    rates = [r for r in view["leak_rates"] if r["event_id"] in wanted]
    pending = [o for o in view["obligations"] if o["status"] != "met"]
    return render(request, "visit_done.html", view=view, events=events, rates=rates, pending=pending)


# ---- officer -------------------------------------------------------------------------------


def due_rows(request: Request, *, as_of: date, site: str | None, regime: str | None, kind: str | None,
             overdue: bool, within: int | None) -> list[dict[str, Any]]:
    """The filtered due list (the service call the page wraps)."""
    from ledger.services.obligations import due

    return due(db_of(request), as_of=as_of, within_days=within, site_code=site, overdue_only=overdue,
               regime=regime, kind=kind).rows


@router.get("/due", include_in_schema=False)
def due_page(
    request: Request, session: Office, site: str = "", regime: str = "", kind: str = "", overdue: str = "",
    within: str = "", as_of: str = "", sort: str = "due_on", order: str = "asc",
    page: Annotated[int, Query(ge=1)] = 1, per: int = 50,
) -> Response:
    from ledger.domain.records import ObligationKind
    from ledger.rules import REGIMES

    filters = {"site": site, "regime": regime, "kind": kind, "overdue": overdue, "within": within, "as_of": as_of,
               "sort": sort, "order": order, "per": per}
    error = None
    rows: list[dict[str, Any]] = []
    day = today_utc()
    try:
        day = _day(as_of)
        if within and not within.isdigit():
            raise InputError("--within", within, "must be a whole number of days")
        rows = due_rows(request, as_of=day, site=site or None, regime=regime or None, kind=kind or None,
                        overdue=bool(overdue), within=int(within) if within else None)
    except LedgerError as exc:
        error = str(exc)
    key = sort if sort in SORT_KEYS else "due_on"
    if key != "due_on":  # the service's own order is by due day already
        rows = sorted(rows, key=lambda r: (str(r[key] or ""), r["due_on"]))
    if order == "desc":
        rows = rows[::-1]
    per = per if per in PAGE_SIZES else 50
    pages = max(1, -(-len(rows) // per))
    page = min(page, pages)
    shown = rows[(page - 1) * per: page * per]
    return render(request, "due.html", rows=shown, total=len(rows), page=page, pages=pages, f=filters,
                  as_of=day, error=error, sites=queries.site_codes(db_of(request)), regimes=list(REGIMES),
                  kinds=[k.value for k in ObligationKind], sort_keys=SORT_KEYS, page_sizes=PAGE_SIZES,
                  overdue_count=sum(1 for r in rows if r["status"] == "overdue"))


def _annual(request: Request, year: int | None, site: str, basis: str) -> dict[str, Any]:
    from ledger.services.reporting import annual_summary

    return annual_summary(db_of(request), year=year or today_utc().year - 1, site_code=site or None,
                          basis=basis or None)


@router.get("/annual", include_in_schema=False)
def annual_page(request: Request, session: Office, year: int | None = None, site: str = "",
                basis: str = "") -> Response:
    year = year or today_utc().year - 1
    try:
        summary = _annual(request, year, site, basis)
    except LedgerError as exc:
        return error_response(request, exc)
    return render(request, "annual.html", s=summary, year=year, site=site, basis=basis,
                  sites=queries.site_codes(db_of(request)), as_of=summary["as_of"],
                  query=f"year={year}&site={quote(site)}&basis={quote(basis)}")


@router.get("/annual/chart/{name}.png", include_in_schema=False)
def annual_chart(request: Request, session: Office, name: str, year: int | None = None, site: str = "",
                 basis: str = "") -> Response:
    from ledger.exports import charts

    try:
        s = _annual(request, year, site, basis)
    except LedgerError as exc:
        return error_response(request, exc)
    if name == "sites":
        png = charts.ranked_bars([r["site"] for r in s["sites"]], [float(r["service_added_kg"]) for r in s["sites"]],
                                 "Added by site (kg, excl. initial charges)")
    elif name == "refrigerants":
        png = charts.ranked_bars([r["refrigerant"] for r in s["refrigerants"]],
                                 [float(r["co2e_t"]) for r in s["refrigerants"]],
                                 f"CO2e of additions by refrigerant (t, {s['basis']})")
    elif name == "years":
        png = charts.trend_line([str(t["year"]) for t in s["trend"]], [float(t["co2e_t"]) for t in s["trend"]],
                                f"CO2e of additions by year (t, {s['basis']})")
    else:
        return error_response(request, LedgerError(f"chart: {name!r} is not one of sites, refrigerants, years"), 404)
    return Response(png, media_type="image/png")


@router.get("/annual/download.{fmt}", include_in_schema=False)
def annual_download(request: Request, session: Office, fmt: str, year: int | None = None, site: str = "",
                    basis: str = "") -> Response:
    from ledger.services.samples import file_stem

    if fmt not in ("xlsx", "pdf", "csv"):
        return error_response(request, InputError("format", fmt, "is not one of xlsx, pdf, csv"), 404)
    try:
        s = _annual(request, year, site, basis)
    except LedgerError as exc:
        return error_response(request, exc)
    return _file(s, fmt, file_stem("annual", str(s["year"]), site or "estate"), "annual")


@router.get("/import", include_in_schema=False)
def import_page(request: Request, session: Officer) -> Response:
    return render(request, "import.html", result=None)


@router.get("/import/template.xlsx", include_in_schema=False)
def import_template(request: Request, session: Officer) -> Response:
    from ledger.exports.template import write_template

    folder = Path(tempfile.mkdtemp(prefix="refledger-web-"))
    path = folder / "refledger-import-template.xlsx"
    write_template(path)
    from starlette.background import BackgroundTask

    return FileResponse(path, filename="refledger-import-template.xlsx", background=BackgroundTask(_remove, folder),
                        media_type="application/vnd.openxmlformats-officedocument.spreadsheetml.sheet")


@router.post("/import", include_in_schema=False)
async def import_submit(request: Request, session: Officer) -> Response:
    import re

    from ledger.services.importing import import_files

    data = await request.form()
    check_csrf(session, str(data.get(security.CSRF_FIELD, "")))
    folder = Path(tempfile.mkdtemp(prefix="refledger-import-"))
    problems: list[str] = []
    paths: list[Path] = []
    try:
        for upload in data.getlist("files"):
            if isinstance(upload, str) or not getattr(upload, "filename", ""):
                continue
            name = Path(str(upload.filename)).name
            if not re.fullmatch(r"[A-Za-z0-9_. -]{1,100}", name) or not name.lower().endswith(IMPORT_SUFFIXES):
                problems.append(f"{name[:100]}: only .csv and .xlsx files with plain names are taken")
                continue
            body = await upload.read(MAX_IMPORT_BYTES + 1)
            if len(body) > MAX_IMPORT_BYTES:
                problems.append(f"{name}: larger than {MAX_IMPORT_BYTES // 2**20} MB")
                continue
            path = folder / name
            path.write_bytes(body)
            paths.append(path)
        if not paths and not problems:
            problems.append("files: choose at least one .csv or .xlsx file")
        summary = None
        if not problems:
            dry = bool(data.get("dry_run"))
            try:
                summary = await run_in_threadpool(lambda: import_files(db_of(request), paths, dry_run=dry))
            except LedgerError as exc:
                problems.append(str(exc))
    finally:
        _remove(folder)
    status = 400 if problems or (summary and summary.problems) else 200
    return render(request, "import.html", status_code=status, result=summary, problems=problems)


# ---- auditor -------------------------------------------------------------------------------


@router.get("/verify", include_in_schema=False)
def verify_page(request: Request, session: Office, site: str = "") -> Response:
    from ledger.services.integrity import verification_json, verify

    try:
        result = verification_json(verify(db_of(request), site_code=site or None))
    except LedgerError as exc:
        return error_response(request, exc)
    return render(request, "verify.html", result=result, site=site)


# ---- admin ---------------------------------------------------------------------------------


@router.get("/users", include_in_schema=False)
def users_page(request: Request, session: Admin) -> Response:
    return _users(request)


def _users(request: Request, status_code: int = 200, **ctx: Any) -> Response:
    db = db_of(request)
    return render(request, "users.html", status_code=status_code, users=accounts.list_users(db),
                  techs=[t["name"] for t in queries.technicians(db)], roles=accounts.ROLES,
                  sites=queries.site_codes(db), **ctx)


@router.post("/users", include_in_schema=False)
async def users_add(request: Request, session: Admin) -> Response:
    data = await request.form()
    check_csrf(session, str(data.get(security.CSRF_FIELD, "")))
    password = str(data.get("password") or "") or accounts.new_password()
    try:
        user = await run_in_threadpool(lambda: accounts.add_user(
            db_of(request), name=str(data.get("name", "")), role=str(data.get("role", "")), password=password,
            technician=str(data.get("tech") or "") or None, sites=[str(s) for s in data.getlist("sites") if s]))
    except LedgerError as exc:
        return _users(request, 400, error=str(exc), values=form_values(data))
    shown = password if not data.get("password") else None
    return _users(request, added=user.name, password=shown)


@router.post("/users/{name}/{action}", include_in_schema=False)
async def users_switch(request: Request, session: Admin, name: str, action: str) -> Response:
    data = await request.form()
    check_csrf(session, str(data.get(security.CSRF_FIELD, "")))
    if action not in ("disable", "enable"):
        return error_response(request, InputError("action", action, "is not one of disable, enable"), 404)
    if name == session.user.name and action == "disable":
        return _users(request, 400, error="user: you cannot disable yourself")
    try:
        await run_in_threadpool(lambda: accounts.set_disabled(db_of(request), name=name, disabled=action == "disable"))
    except LedgerError as exc:
        return _users(request, 404, error=str(exc))
    return RedirectResponse("/users", status_code=303)
