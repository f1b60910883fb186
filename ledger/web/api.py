"""The JSON API under /api/: the same data as the CLI's ``--json`` (``ledger.jsontext``), the
same services, and the same roles as the pages. Writes send the session's CSRF token in the
``X-CSRF-Token`` header. Unauthenticated calls get 401, a wrong role 403.
"""

from __future__ import annotations

from typing import Any

from fastapi import APIRouter, Request
from fastapi.responses import HTMLResponse, Response
from pydantic import BaseModel, Field
from starlette.concurrency import run_in_threadpool

from ledger.domain.drafts import EventDraft
from ledger.domain.records import EventKind
from ledger.errors import InputError, LedgerError, NeedsConfirmation, NotFound
from ledger.inputs import parse_day
from ledger.jsontext import dumps
from ledger.services import queries
from ledger.web import security
from ledger.web.app import render, today_utc
from ledger.web.security import Anyone, Office, Reader, Recorder, check_csrf, check_site, db_of

router = APIRouter(prefix="/api")

VISIT_KINDS = ("check", "repair", "add", "follow-up")


def json_response(data: Any, status_code: int = 200) -> Response:
    """JSON in the CLI's ``--json`` contract."""
    return Response(dumps(data, indent=None), media_type="application/json", status_code=status_code)


def _error(exc: LedgerError) -> Response:
    status = 404 if isinstance(exc, NotFound) else 400
    body: dict[str, Any] = {"error": str(exc)}
    if isinstance(exc, InputError):
        body["field"] = exc.field
    part = getattr(exc, "visit_part", None)
    if part is not None:
        body["part"] = part.value
    return json_response(body, status)



@router.get("/docs", include_in_schema=False, response_class=HTMLResponse)
def docs(request: Request) -> Response:
    """The API reference, rendered here from the OpenAPI schema (no script, no CDN)."""
    schema = request.app.openapi()
    operations = [
        {"method": method.upper(), "path": path, "summary": op.get("summary", ""),
         "description": op.get("description", ""),
         "parameters": [(p["name"], p["in"], p.get("required", False)) for p in op.get("parameters", [])],
         "body": "requestBody" in op}
        for path, methods in schema["paths"].items() for method, op in methods.items()
    ]
    return render(request, "api_docs.html", operations=operations, title=schema["info"]["title"])


@router.get("/me", summary="Who is logged in")
def me(session: Anyone) -> Response:
    """The logged-in user: name, role, technician record and sites."""
    u = session.user
    return json_response({"name": u.name, "role": u.role, "technician": u.technician, "sites": list(u.sites)})


@router.get("/sites", summary="Sites (as `site list --json`)")
def sites(request: Request, session: Reader) -> Response:
    """Every site the user may see."""
    return json_response([s for s in queries.sites(db_of(request)) if session.user.may_see_site(s["code"])])


@router.get("/systems", summary="Systems (as `system list --json`)")
def systems(request: Request, session: Reader, site: str | None = None) -> Response:
    """Every system (or one site's) with refrigerant, charge and CO2e today."""
    from ledger.services.estate import systems_overview

    if site:
        check_site(session, site)
    try:
        rows = systems_overview(db_of(request), site_code=site)
    except LedgerError as exc:
        return _error(exc)
    return json_response([r for r in rows if session.user.may_see_site(r["site"])])


@router.get("/systems/{site}/{tag}", summary="One system (as `system show --json`)")
def system(request: Request, session: Reader, site: str, tag: str, as_of: str | None = None) -> Response:
    """Facts, state, tiers, obligations, leak rates and every event of one system."""
    check_site(session, site)
    try:
        day = parse_day(as_of, field="as_of") if as_of else today_utc()
        return json_response(queries.system_view(db_of(request), site_code=site, tag=tag, as_of=day))
    except LedgerError as exc:
        return _error(exc)


class VisitPart(BaseModel):
    """One part of a visit; masses as typed (``2.5 lb``), in recording order."""

    kind: str = Field(description="check, repair, add or follow-up")
    result: str | None = Field(None, description="check: no-leak or leak-found; follow-up: pass or fail")
    where: str | None = None
    method: str | None = None
    mass: str | None = Field(None, description="add: the mass added, e.g. '2.5 lb'")
    cylinder: str | None = None
    before: str | None = Field(None, description="add: cylinder weight before, e.g. '30 lb'")
    after: str | None = Field(None, description="add: cylinder weight after")


class Visit(BaseModel):
    """A visit: the day, the technician and its parts; ``confirm`` records a likely duplicate."""

    on: str = Field(description="YYYY-MM-DD, site-local")
    tech: str | None = None
    note: str = ""
    confirm: bool = False
    parts: list[VisitPart]


def _part_draft(part: VisitPart, *, on: Any, tech: str | None, by: str, note: str) -> EventDraft:
    from ledger.units import parse_mass_ng

    if part.kind not in VISIT_KINDS:
        raise InputError("kind", part.kind, f"is not one of {', '.join(VISIT_KINDS)}")

    def mass(text: str | None, field: str) -> int | None:
        return parse_mass_ng(text, field=field) if text else None

    return EventDraft(
        kind=EventKind(part.kind), performed_on=on, technician=tech, recorded_by=by, note=note,
        result=part.result, location=part.where, method=part.method, mass_ng=mass(part.mass, "--mass"),
        cylinder_code=part.cylinder, cylinder_before_ng=mass(part.before, "--before"),
        cylinder_after_ng=mass(part.after, "--after"),
    )


@router.post("/systems/{site}/{tag}/visit", summary="Record a visit (one transaction)")
async def visit(request: Request, session: Recorder, site: str, tag: str, body: Visit) -> Response:
    """Record the parts of a visit as events, all or nothing; 409 asks for ``confirm``."""
    from ledger.services.recording import record_visit

    check_csrf(session, request.headers.get(security.CSRF_HEADER))
    check_site(session, site)
    tech = session.user.technician if session.user.role == "technician" and session.user.technician else body.tech
    try:
        on = parse_day(body.on, field="--on")
        drafts = [_part_draft(p, on=on, tech=tech, by=session.user.name, note=body.note) for p in body.parts]
        logged = await run_in_threadpool(
            lambda: record_visit(db_of(request), site_code=site, tag=tag, drafts=drafts, confirm=body.confirm))
    except NeedsConfirmation as exc:
        return json_response({"error": str(exc), "needs_confirmation": list(exc.reasons)}, 409)
    except LedgerError as exc:
        return _error(exc)
    next_due = await run_in_threadpool(lambda: queries.next_due(db_of(request), site_code=site, tag=tag))
    return json_response({
        "events": [{"id": x.event_id, "chain_hash": x.chain_hash, "warnings": [w.message for w in x.warnings]}
                   for x in logged],
        "next": next_due,
    }, 201)


@router.get("/due", summary="Due list (as `due --json`)")
def due(request: Request, session: Office, as_of: str | None = None, within: int | None = None,
        site: str | None = None, regime: str | None = None, kind: str | None = None,
        overdue: bool = False) -> Response:
    """Open and overdue obligations, earliest first, with the `due` command's filters."""
    from ledger.services.obligations import due as compute_due

    try:
        day = parse_day(as_of, field="--as-of") if as_of else today_utc()
        if within is not None and within < 0:
            raise InputError("--within", within, "must be zero or more days")
        listing = compute_due(db_of(request), as_of=day, within_days=within, site_code=site, overdue_only=overdue,
                              regime=regime, kind=kind)
    except LedgerError as exc:
        return _error(exc)
    return json_response(listing.rows)


@router.get("/annual", summary="Annual loss summary (as `report annual --json`)")
def annual(request: Request, session: Office, year: int, site: str | None = None,
           basis: str | None = None) -> Response:
    """The annual loss summary of the estate or one site."""
    from ledger.services.reporting import annual_summary

    try:
        return json_response(annual_summary(db_of(request), year=year, site_code=site, basis=basis))
    except LedgerError as exc:
        return _error(exc)


@router.get("/logbook/{site}/{tag}", summary="A system's logbook (as `report logbook --json`)")
def logbook(request: Request, session: Office, site: str, tag: str, from_on: str | None = None,
            to_on: str | None = None) -> Response:
    """Every event (voided ones marked), obligations and the chain head of one system."""
    from ledger.services.reporting import logbook as build

    try:
        first = parse_day(from_on, field="--from") if from_on else None
        last = parse_day(to_on, field="--to") if to_on else None
        return json_response(build(db_of(request), site_code=site, tag=tag, from_on=first, to_on=last))
    except LedgerError as exc:
        return _error(exc)


@router.get("/verify", summary="Verify the hash chains (as `verify --json`)")
def verify(request: Request, session: Office, site: str | None = None) -> Response:
    """Recompute every chain; ``ok`` false names each first altered event."""
    from ledger.services.integrity import verification_json
    from ledger.services.integrity import verify as run_verify

    try:
        return json_response(verification_json(run_verify(db_of(request), site_code=site)))
    except LedgerError as exc:
        return _error(exc)
