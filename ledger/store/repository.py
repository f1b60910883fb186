"""Row <-> record mapping and the queries services use.

Every function takes the connection keyword-only (``*, conn``); the service that calls it
owns the transaction. Estate-wide loads are a fixed number of set-based queries, never one
query per system.
"""

from __future__ import annotations

import gc
from collections import defaultdict
from collections.abc import Callable, Iterable, Iterator, Mapping, Sequence
from contextlib import contextmanager
from datetime import UTC, date, datetime
from typing import Any

from sqlalchemy import Connection, and_, func, insert, select, type_coerce
from sqlalchemy.types import NullType

from ledger.domain.records import (
    Application,
    Certificate,
    CompanyCertificate,
    Cylinder,
    CylinderKind,
    EquipmentForm,
    Event,
    EventKind,
    Filing,
    Site,
    System,
    SystemHistory,
    Technician,
)
from ledger.errors import Conflict, NotFound
from ledger.store import chain
from ledger.store.records import seal
from ledger.store.results import inserted_id, tuples
from ledger.store.tables import (
    certificate,
    company,
    company_certificate,
    cylinder,
    event,
    filing,
    kept_annual,
    kept_finding,
    kept_obligation,
    kept_site,
    site,
    site_revision,
    system,
    technician,
)


@contextmanager
def gc_paused() -> Iterator[None]:
    """Pause Python's cyclic garbage collector while an estate's records are built and used.

    A loaded estate is a million long-lived records without reference cycles; every full
    collection walks all of them again (about twenty times in one `due` of 1 000 sites, some
    8 % of its time) and finds nothing. Reference counting still frees everything as usual;
    the collector is resumed (if it was running) when the block ends.
    """
    was_enabled = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if was_enabled:
            gc.enable()


def now_utc() -> datetime:
    """The time the ledger records things at (services and store only; never rules)."""
    return datetime.now(UTC)


# ---- sites --------------------------------------------------------------------------------


def _site_record(row: Any) -> Site:
    return Site(
        id=row.id,
        code=row.code,
        name=row.name,
        country=row.country,
        subdivision=row.subdivision,
        timezone=row.timezone,
        regimes=tuple(r for r in row.regimes.split(",") if r),
        leak_rate_method=row.leak_rate_method,
        mass_unit=row.mass_unit,
    )


def insert_site(*, conn: Connection, values: Mapping[str, Any]) -> int:
    """Add a site; a duplicate code is a Conflict."""
    if conn.execute(select(site.c.id).where(site.c.code == values["code"])).first():
        raise Conflict(f"site: {values['code']!r} already exists")
    site_id = inserted_id(conn, insert(site).values(**values, created_at=now_utc()))
    seal("site", [site_id], conn=conn)
    return site_id


def get_site(code: str, *, conn: Connection) -> Site:
    """The site with this code, or NotFound."""
    row = conn.execute(select(site).where(site.c.code == code)).first()
    if row is None:
        raise NotFound(f"site: {code!r} is not in the ledger (see `refledger site list`)")
    return _site_record(row)


def list_sites(*, conn: Connection) -> list[Site]:
    """Every site, by code."""
    return [_site_record(r) for r in conn.execute(select(site).order_by(site.c.code))]


# ---- systems ------------------------------------------------------------------------------


def _system_record(row: Any, site_code: str) -> System:
    return System(
        id=row.id,
        site_code=site_code,
        tag=row.tag,
        description=row.description,
        application=Application(row.application),
        equipment_form=EquipmentForm(row.equipment_form),
        hermetic=bool(row.hermetic),
        residential=bool(row.residential),
        location=row.location,
        maker=row.maker,
        model=row.model,
        serial=row.serial,
        defrost_every_hours=row.defrost_every_hours,
    )


def insert_system(*, conn: Connection, site_id: int, values: Mapping[str, Any]) -> int:
    """Add a system to a site; a duplicate tag within the site is a Conflict."""
    exists = conn.execute(
        select(system.c.id).where(and_(system.c.site_id == site_id, system.c.tag == values["tag"]))
    ).first()
    if exists:
        raise Conflict(f"system: {values['tag']!r} already exists at this site")
    stmt = insert(system).values(**values, site_id=site_id, created_at=now_utc())
    system_id = inserted_id(conn, stmt)
    seal("system", [system_id], conn=conn)
    return system_id


def get_system(site_code: str, tag: str, *, conn: Connection) -> tuple[Site, System]:
    """The site and system for ``SITE/TAG``, or NotFound naming which part is unknown."""
    the_site = get_site(site_code, conn=conn)
    row = conn.execute(select(system).where(and_(system.c.site_id == the_site.id, system.c.tag == tag))).first()
    if row is None:
        raise NotFound(f"system: {site_code}/{tag!r} is not in the ledger")
    return the_site, _system_record(row, site_code)


def list_systems(site_code: str | None = None, *, conn: Connection) -> list[System]:
    """Systems of one site or of the estate, by site and tag."""
    stmt = select(system, site.c.code.label("site_code")).join(site, site.c.id == system.c.site_id)
    if site_code:
        stmt = stmt.where(site.c.code == site_code)
    rows = conn.execute(stmt.order_by(site.c.code, system.c.tag))
    return [_system_record(r, r.site_code) for r in rows]


# ---- people -------------------------------------------------------------------------------


def company_id(name: str, *, conn: Connection) -> int:
    """The id of a company, adding it on first mention."""
    found = conn.execute(select(company.c.id).where(company.c.name == name)).scalar()
    if found is not None:
        return found
    cid = inserted_id(conn, insert(company).values(name=name))
    seal("company", [cid], conn=conn)
    return cid


def insert_technician(
    *, conn: Connection, name: str, company_name: str | None, certificates: Sequence[Certificate]
) -> int:
    """Add a technician with certificates; a duplicate name or certificate is a Conflict."""
    if conn.execute(select(technician.c.id).where(technician.c.name == name)).first():
        raise Conflict(f"tech: {name!r} already exists")
    cid = company_id(company_name, conn=conn) if company_name else None
    tid = inserted_id(conn, insert(technician).values(name=name, company_id=cid, created_at=now_utc()))
    seal("technician", [tid], conn=conn)
    for cert in certificates:
        add_certificate(conn=conn, technician_id=tid, cert=cert)
    return tid


def add_certificate(*, conn: Connection, technician_id: int, cert: Certificate) -> int:
    """Register a certificate for a technician; the same scheme and number twice is a Conflict."""
    clash = conn.execute(
        select(certificate.c.id).where(and_(certificate.c.scheme == cert.scheme, certificate.c.number == cert.number))
    ).first()
    if clash:
        raise Conflict(f"certificate: {cert.scheme} {cert.number!r} is already registered")
    stmt = insert(certificate).values(
        technician_id=technician_id,
        scheme=cert.scheme,
        number=cert.number,
        category=cert.category,
        valid_from=cert.valid_from,
        valid_to=cert.valid_to,
        scope=cert.scope or None,  # NULL when not recorded, as the rows 0007 found
        issuer=cert.issuer or None,
    )
    cert_id = inserted_id(conn, stmt)
    seal("certificate", [cert_id], conn=conn)
    return cert_id


def add_company_certificate(*, conn: Connection, cert: CompanyCertificate) -> int:
    """Register a company certificate (the company is added on first mention); a repeat is a Conflict."""
    clash = conn.execute(select(company_certificate.c.id).where(and_(
        company_certificate.c.scope == cert.scope, company_certificate.c.number == cert.number))).first()
    if clash:
        raise Conflict(f"certificate: {cert.scope} {cert.number!r} is already registered")
    cert_id = inserted_id(conn, insert(company_certificate).values(
        company_id=company_id(cert.company, conn=conn), scope=cert.scope, number=cert.number, issuer=cert.issuer,
        valid_from=cert.valid_from, valid_to=cert.valid_to))
    seal("company_certificate", [cert_id], conn=conn)
    return cert_id


def hermetic_flags(*, conn: Connection) -> dict[int, bool]:
    """System id -> hermetically sealed flag, for every system (one narrow query)."""
    return {r.id: bool(r.hermetic) for r in conn.execute(select(system.c.id, system.c.hermetic))}


def company_certificates(*, conn: Connection) -> list[CompanyCertificate]:
    """Every company certificate, by company and validity."""
    rows = conn.execute(
        select(company.c.name, company_certificate)
        .join(company, company.c.id == company_certificate.c.company_id)
        .order_by(company.c.name, company_certificate.c.valid_from, company_certificate.c.id)
    ).all()
    return [CompanyCertificate(r.name, r.scope, r.number, r.issuer, r.valid_from, r.valid_to) for r in rows]


def _certificate(c: Any) -> Certificate:
    return Certificate(c.scheme, c.number, c.category, c.valid_from, c.valid_to, c.scope or "", c.issuer or "")


def get_technician(name: str, *, conn: Connection) -> tuple[Technician, dict[str, int]]:
    """A technician and a map from certificate number to certificate row id."""
    row = conn.execute(
        select(technician, company.c.name.label("company_name"))
        .outerjoin(company, company.c.id == technician.c.company_id)
        .where(technician.c.name == name)
    ).first()
    if row is None:
        raise NotFound(f"tech: {name!r} is not in the ledger (see `refledger tech list`)")
    certs = conn.execute(
        select(certificate).where(certificate.c.technician_id == row.id).order_by(certificate.c.id)
    ).all()
    record = Technician(
        id=row.id,
        name=row.name,
        company=row.company_name or "",
        certificates=tuple(_certificate(c) for c in certs),
    )
    return record, {c.number: c.id for c in certs}


def list_technicians(*, conn: Connection) -> list[Technician]:
    """Every technician with certificates, by name (two queries)."""
    rows = conn.execute(
        select(technician, company.c.name.label("company_name"))
        .outerjoin(company, company.c.id == technician.c.company_id)
        .order_by(technician.c.name)
    ).all()
    certs: dict[int, list[Certificate]] = defaultdict(list)
    for c in conn.execute(select(certificate).order_by(certificate.c.id)):
        certs[c.technician_id].append(_certificate(c))
    return [Technician(r.id, r.name, r.company_name or "", tuple(certs[r.id])) for r in rows]


# ---- cylinders ----------------------------------------------------------------------------


def insert_cylinder(*, conn: Connection, values: Mapping[str, Any]) -> int:
    """Add a cylinder; a duplicate id is a Conflict."""
    if conn.execute(select(cylinder.c.id).where(cylinder.c.code == values["code"])).first():
        raise Conflict(f"cylinder: {values['code']!r} already exists")
    stmt = insert(cylinder).values(**values, created_at=now_utc())
    cylinder_id = inserted_id(conn, stmt)
    seal("cylinder", [cylinder_id], conn=conn)
    return cylinder_id


def get_cylinder(code: str, *, conn: Connection) -> tuple[int, Cylinder]:
    """The row id and record of a cylinder, or NotFound."""
    row = conn.execute(select(cylinder).where(cylinder.c.code == code)).first()
    if row is None:
        raise NotFound(f"cylinder: {code!r} is not in the ledger (see `refledger cylinder list`)")
    return row.id, Cylinder(row.code, row.refrigerant, CylinderKind(row.kind), row.tare_ng)


def list_cylinders(*, conn: Connection) -> list[Cylinder]:
    """Every cylinder, by id."""
    rows = conn.execute(select(cylinder).order_by(cylinder.c.code))
    return [Cylinder(r.code, r.refrigerant, CylinderKind(r.kind), r.tare_ng) for r in rows]


# ---- events -------------------------------------------------------------------------------


def chain_head(system_id: int, *, conn: Connection) -> str:
    """Lock the system's chain and return its head hash (GENESIS for a new system).

    On PostgreSQL the system row is locked FOR UPDATE so concurrent writers to the same
    system queue; on SQLite the write transaction already holds the database lock.
    """
    if conn.dialect.name != "sqlite":
        conn.execute(select(system.c.id).where(system.c.id == system_id).with_for_update())
    head = conn.execute(
        select(event.c.chain_hash).where(event.c.system_id == system_id).order_by(event.c.id.desc()).limit(1)
    ).scalar()
    return head or chain.GENESIS


def lock_systems(system_ids: Iterable[int], *, conn: Connection) -> None:
    """Lock many systems' chains at once, for a bulk write (``chain_head`` locks one).

    On PostgreSQL the rows are locked FOR UPDATE in id order, so two bulk writers queue instead
    of deadlocking; on SQLite the write transaction already holds the database lock. Once
    locked, the chain heads are the last events a load in the same transaction returns.
    """
    if conn.dialect.name == "sqlite":
        return
    ids = sorted(set(system_ids))
    sites: set[int] = set()
    for i in range(0, len(ids), _IN_CHUNK):
        rows = conn.execute(
            select(system.c.id, system.c.site_id)
            .where(system.c.id.in_(ids[i : i + _IN_CHUNK]))
            .order_by(system.c.id)
            .with_for_update()
        )
        sites.update(site_id for _, site_id in tuples(rows))
    # The insert triggers raise each site's revision: take those rows now, in site order, so
    # two bulk writers touching the same sites queue here rather than deadlock there.
    order = sorted(sites)
    for i in range(0, len(order), _IN_CHUNK):
        conn.execute(
            select(site_revision.c.site_id)
            .where(site_revision.c.site_id.in_(order[i : i + _IN_CHUNK]))
            .order_by(site_revision.c.site_id)
            .with_for_update()
        ).all()


def natural_keys(values: Mapping[str, Any], *, conn: Connection) -> dict[str, Any]:
    """The natural keys the chain hashes (``chain.CANONICAL_FIELDS``) for an event's row ids."""
    keys: dict[str, Any] = {"system": None, "technician": None, "certificate": None, "cylinder": None, "voids": None}
    row = conn.execute(
        select(site.c.code, system.c.tag).join(site, site.c.id == system.c.site_id)
        .where(system.c.id == values["system_id"])
    ).first()
    if row is not None:
        keys["system"] = f"{row.code}/{row.tag}"
    if values.get("technician_id") is not None:
        keys["technician"] = conn.execute(
            select(technician.c.name).where(technician.c.id == values["technician_id"])).scalar()
    if values.get("certificate_id") is not None:
        cert = conn.execute(
            select(certificate.c.scheme, certificate.c.number).where(certificate.c.id == values["certificate_id"])
        ).first()
        keys["certificate"] = f"{cert.scheme}|{cert.number}" if cert else None
    if values.get("cylinder_id") is not None:
        keys["cylinder"] = conn.execute(select(cylinder.c.code).where(cylinder.c.id == values["cylinder_id"])).scalar()
    if values.get("voids_id") is not None:
        keys["voids"] = conn.execute(select(event.c.chain_hash).where(event.c.id == values["voids_id"])).scalar()
    return keys


def events_with_keys():
    """SELECT of event rows with the natural keys the chain hashes, labelled as in CANONICAL_FIELDS."""
    voided = event.alias("voided")
    return (
        select(
            event,
            (site.c.code + "/" + system.c.tag).label("system"),
            site.c.code.label("site_code"),
            system.c.tag.label("tag"),
            technician.c.name.label("technician"),
            (certificate.c.scheme + "|" + certificate.c.number).label("certificate"),
            cylinder.c.code.label("cylinder"),
            voided.c.chain_hash.label("voids"),
        )
        .join(system, system.c.id == event.c.system_id)
        .join(site, site.c.id == system.c.site_id)
        .outerjoin(technician, technician.c.id == event.c.technician_id)
        .outerjoin(certificate, certificate.c.id == event.c.certificate_id)
        .outerjoin(cylinder, cylinder.c.id == event.c.cylinder_id)
        .outerjoin(voided, voided.c.id == event.c.voids_id)
    )


def append_event(*, conn: Connection, values: Mapping[str, Any]) -> tuple[int, str]:
    """Append one event to its system's chain.

    Args:
        conn: a write transaction.
        values: event columns (without id, recorded_at and the chain columns).
    Returns:
        The new event id and its chain hash.
    """
    row = {**values, "recorded_at": values.get("recorded_at") or now_utc()}
    row.setdefault("note", "")
    row.setdefault("attachments", "")
    row.setdefault("reclaimed", False)
    prev = chain_head(row["system_id"], conn=conn)
    row["prev_hash"] = prev
    row["chain_hash"] = chain.link(prev, {**row, **natural_keys(row, conn=conn)})
    event_id = inserted_id(conn, insert(event).values(**row))
    return event_id, row["chain_hash"]


def event_system(event_id: int, *, conn: Connection) -> tuple[int, str, str]:
    """(system id, kind, site/tag) of an event, or NotFound."""
    row = conn.execute(
        select(event.c.system_id, event.c.kind, site.c.code, system.c.tag)
        .join(system, system.c.id == event.c.system_id)
        .join(site, site.c.id == system.c.site_id)
        .where(event.c.id == event_id)
    ).first()
    if row is None:
        raise NotFound(f"event: {event_id} is not in the ledger")
    return row.system_id, row.kind, f"{row.code}/{row.tag}"


# Estate-wide loads read a million events: SQLAlchemy's per-value result processing and row
# objects would cost several times the query itself, so the event columns are read as the
# driver returns them (``type_coerce(..., NullType())``: text dates on SQLite, typed values on
# PostgreSQL) and converted once here; repeated strings (names, results, methods) are shared
# between records instead of held once per event.
_EVENT_BATCH = 20_000  # rows per fetch; bounds the driver-side buffer (server cursor on PostgreSQL)
_IN_CHUNK = 10_000  # system ids per IN (...) list: SQLite allows at most 32 766 bound parameters


def _raw(column: Any, name: str) -> Any:
    return type_coerce(column, NullType()).label(name)


def _events_query():
    # Columns in ``Event`` field order (the certificate as its three parts); ``_event_records``
    # relies on this order.
    return (
        select(
            _raw(event.c.id, "id"),
            _raw(event.c.system_id, "system_id"),
            _raw(event.c.kind, "kind"),
            _raw(event.c.performed_on, "performed_on"),
            _raw(event.c.recorded_at, "recorded_at"),
            _raw(event.c.mass_ng, "mass_ng"),
            _raw(event.c.refrigerant, "refrigerant"),
            _raw(event.c.charge_ng, "charge_ng"),
            _raw(event.c.result, "result"),
            _raw(event.c.location, "location"),
            _raw(event.c.method, "method"),
            _raw(event.c.destination, "destination"),
            _raw(cylinder.c.code, "cylinder_code"),
            _raw(event.c.cylinder_before_ng, "cylinder_before_ng"),
            _raw(event.c.cylinder_after_ng, "cylinder_after_ng"),
            _raw(technician.c.name, "tech_name"),
            _raw(company.c.name, "company_name"),
            _raw(certificate.c.scheme, "cert_scheme"),
            _raw(certificate.c.number, "cert_number"),
            _raw(certificate.c.category, "cert_category"),
            _raw(event.c.recorded_by, "recorded_by"),
            _raw(event.c.note, "note"),
            _raw(event.c.voids_id, "voids_id"),
            _raw(event.c.reason, "reason"),
            _raw(event.c.attachments, "attachments"),
            _raw(event.c.reclaimed, "reclaimed"),
            _raw(event.c.chain_hash, "chain_hash"),
            _raw(event.c.facility, "facility"),
            _raw(event.c.facility_certificate, "facility_certificate"),
        )
        .outerjoin(technician, technician.c.id == event.c.technician_id)
        .outerjoin(company, company.c.id == technician.c.company_id)
        .outerjoin(certificate, certificate.c.id == event.c.certificate_id)
        .outerjoin(cylinder, cylinder.c.id == event.c.cylinder_id)
    )


_KINDS: Mapping[str, EventKind] = {k.value: k for k in EventKind}


def _event_records(rows: Iterable[Sequence[Any]], into: dict[int, list[Event]], shared: dict[Any, Any]) -> None:
    """Map raw event rows (``_events_query`` order) to records, appending them per system.

    Args:
        rows: driver values: dates and times as ISO text (SQLite) or as objects (PostgreSQL).
        into: system id -> its records so far.
        shared: one instance per distinct value (strings, days, certificate labels).
    """
    same = shared.setdefault
    kinds = _KINDS
    for (
        id_, system_id, kind, on, recorded, mass, refrigerant, charge, result, location, method,
        destination, cylinder_code, before, after, tech, company_name, scheme, number, category,
        recorded_by, note, voids, reason, attachments, reclaimed, chain_hash, facility, facility_certificate,
    ) in rows:
        day = shared.get(on)
        if day is None:
            day = same(on, date.fromisoformat(on) if isinstance(on, str) else on)
        if isinstance(recorded, str):
            recorded = datetime.fromisoformat(recorded)
        if recorded is not None and recorded.tzinfo is None:
            recorded = recorded.replace(tzinfo=UTC)
        cert = None
        if number:
            key = (scheme, number, category)
            cert = shared.get(key)
            if cert is None:
                cert = same(key, f"{scheme} {number}" + (f" ({category})" if category else ""))
        into[system_id].append(
            Event(
                id_,
                system_id,
                kinds[kind],
                day,
                recorded,
                mass,
                same(refrigerant, refrigerant),
                charge,
                same(result, result),
                same(location, location),
                same(method, method),
                same(destination, destination),
                same(cylinder_code, cylinder_code),
                before,
                after,
                same(tech, tech),
                same(company_name, company_name),
                cert,
                same(recorded_by, recorded_by),
                same(note, note) if note else "",
                voids,
                reason,
                tuple(attachments.split()) if attachments else (),
                bool(reclaimed),
                chain_hash,
                number is not None,
                same(facility, facility),
                same(facility_certificate, facility_certificate),
            )
        )


def load_events(system_ids: Iterable[int] | None = None, *, conn: Connection) -> dict[int, tuple[Event, ...]]:
    """Events grouped by system, in recording order (one query; one per 10 000 systems asked for).

    Args:
        system_ids: restrict to these systems; None loads the estate.
    """
    grouped: dict[int, list[Event]] = defaultdict(list)
    shared: dict[Any, Any] = {}
    order = (event.c.system_id, event.c.id)
    if system_ids is None:
        statements = [_events_query().order_by(*order)]
    else:
        ids = sorted(set(system_ids))
        statements = [
            _events_query().where(event.c.system_id.in_(ids[i : i + _IN_CHUNK])).order_by(*order)
            for i in range(0, len(ids), _IN_CHUNK)
        ]
    for stmt in statements:
        result = conn.execute(stmt.execution_options(yield_per=_EVENT_BATCH))
        for rows in result.partitions():
            _event_records(rows, grouped, shared)
    return {k: tuple(v) for k, v in grouped.items()}


def load_histories(
    site_code: str | None = None,
    *,
    conn: Connection,
    system_id: int | None = None,
    site_ids: Sequence[int] | None = None,
    system_ids: Sequence[int] | None = None,
) -> list[SystemHistory]:
    """Site, system and events of every system (or one site / one system / some sites or
    systems): three queries (more for thousands of ids)."""
    stmt = select(system)
    everything = False
    if system_id is not None:
        stmt = stmt.where(system.c.id == system_id)
    elif site_code is not None:
        stmt = stmt.where(system.c.site_id == get_site(site_code, conn=conn).id)
    elif site_ids is not None:
        stmt = stmt.where(system.c.site_id.in_(sorted(set(site_ids)) or [-1]))
    elif system_ids is not None:
        stmt = stmt.where(system.c.id.in_(sorted(set(system_ids)) or [-1]))
    else:
        everything = True
    rows = conn.execute(stmt.order_by(system.c.site_id, system.c.tag)).all()
    if everything:
        sites = {s.id: s for s in list_sites(conn=conn)}
    else:  # only the sites of these systems (a technician's `log` must not read a 1 000-site estate)
        needed = sorted({r.site_id for r in rows})
        found: Iterable[Any] = conn.execute(select(site).where(site.c.id.in_(needed))) if needed else []
        sites = {r.id: _site_record(r) for r in found}
    ids = [r.id for r in rows]
    events = load_events(None if everything else ids, conn=conn) if ids else {}
    return [
        SystemHistory(
            site=sites[r.site_id],
            system=_system_record(r, sites[r.site_id].code),
            events=events.get(r.id, ()),
        )
        for r in rows
    ]


# ---- filings ------------------------------------------------------------------------------


def insert_filing(*, conn: Connection, site_id: int, values: Mapping[str, Any]) -> int:
    """Record that a report was filed (append-only)."""
    stmt = insert(filing).values(**values, site_id=site_id, recorded_at=now_utc())
    filing_id = inserted_id(conn, stmt)
    seal("filing", [filing_id], conn=conn)
    return filing_id


def load_filings(site_code: str | None = None, *, conn: Connection) -> list[Filing]:
    """Every filing (or one site's), oldest first."""
    stmt = select(filing, site.c.code.label("site_code")).join(site, site.c.id == filing.c.site_id)
    if site_code:
        stmt = stmt.where(site.c.code == site_code)
    return [
        Filing(r.site_code, r.regime, r.period_year, r.filed_on, r.system_id, r.reference, r.recorded_by)
        for r in conn.execute(stmt.order_by(filing.c.id))
    ]


# ---- kept obligations (derived data; see tables.kept_site) ----------------------------------


def site_revisions(site_code: str | None = None, *, conn: Connection) -> dict[int, tuple[str, int, bool]]:
    """Site id -> (code, revision, has systems) of every site (or one): one small query.

    The revision rises with every event, system, filing or detector episode added to the site
    (triggers, migration 0003): kept results of the site are current while it is the one kept.
    """
    has_systems = select(system.c.id).where(system.c.site_id == site.c.id).exists()
    stmt = (
        select(site.c.id, site.c.code, func.coalesce(site_revision.c.n, -1), has_systems)
        .select_from(site)
        .outerjoin(site_revision, site_revision.c.site_id == site.c.id)
    )
    if site_code is not None:
        stmt = stmt.where(site.c.code == site_code)
    return {sid: (code, int(n), bool(any_)) for sid, code, n, any_ in tuples(conn.execute(stmt))}


def system_places(site_code: str | None = None, *, conn: Connection) -> dict[int, tuple[str, str, str]]:
    """System id -> (site code, tag, site time zone) of every system (or one site's)."""
    stmt = select(system.c.id, site.c.code, system.c.tag, site.c.timezone).join(site, site.c.id == system.c.site_id)
    if site_code is not None:
        stmt = stmt.where(site.c.code == site_code)
    return {sid: (code, tag, tz) for sid, code, tag, tz in tuples(conn.execute(stmt))}


def load_kept_sites(site_ids: Iterable[int] | None = None, *, conn: Connection) -> dict[int, Any]:
    """Site id -> its `kept_site` row (as_of, fresh_until, rules_key, revision)."""
    stmt = select(kept_site)
    if site_ids is not None:
        stmt = stmt.where(kept_site.c.site_id.in_(sorted(set(site_ids)) or [-1]))
    return {r.site_id: r for r in conn.execute(stmt)}


def load_kept(site_ids: Sequence[int], *, conn: Connection, everything: bool = False
              ) -> tuple[Sequence[Any], Sequence[Any]]:
    """The kept obligation rows and finding rows of some sites (or all with ``everything``),
    in the order they were kept."""
    if not site_ids and not everything:
        return [], []
    ob_cols = [c for c in kept_obligation.c if c.name != "id"]
    obs = select(*ob_cols).order_by(kept_obligation.c.id)
    fins = select(kept_finding).order_by(kept_finding.c.id)
    if everything:
        return conn.execute(obs).all(), conn.execute(fins).all()
    ob_rows: list[Any] = []
    fin_rows: list[Any] = []
    ids = sorted(set(site_ids))
    for i in range(0, len(ids), _IN_CHUNK):
        chunk = ids[i : i + _IN_CHUNK]
        ob_rows.extend(conn.execute(obs.where(kept_obligation.c.site_id.in_(chunk))))
        fin_rows.extend(conn.execute(fins.where(kept_finding.c.site_id.in_(chunk))))
    return ob_rows, fin_rows


def _lock_sites(site_ids: Iterable[int], *, conn: Connection) -> list[int]:
    """Lock these sites' rows (PostgreSQL: FOR UPDATE, in id order) and return the ids sorted:
    two writers replacing the same sites' kept rows then queue instead of both inserting."""
    ids = sorted(set(site_ids))
    for i in range(0, len(ids), _IN_CHUNK):
        chunk = ids[i : i + _IN_CHUNK]
        conn.execute(select(site.c.id).where(site.c.id.in_(chunk)).order_by(site.c.id).with_for_update()).all()
    return ids


def replace_kept(
    *,
    conn: Connection,
    sites: Sequence[Mapping[str, Any]],
    obligations: Sequence[Mapping[str, Any]],
    findings: Sequence[Mapping[str, Any]],
) -> None:
    """Replace the kept obligations of some sites (rows as `kept_site`, `kept_obligation` and
    `kept_finding` take them). The sites' rows are locked first, so two writers keeping the
    same site one after the other cannot leave both sets behind."""
    ids = _lock_sites({s["site_id"] for s in sites}, conn=conn)
    for i in range(0, len(ids), _IN_CHUNK):
        chunk = ids[i : i + _IN_CHUNK]
        for table in (kept_obligation, kept_finding, kept_site):
            conn.execute(table.delete().where(table.c.site_id.in_(chunk)))
    if sites:
        conn.execute(insert(kept_site), list(sites))
    if obligations:
        conn.execute(insert(kept_obligation), list(obligations))
    if findings:
        conn.execute(insert(kept_finding), list(findings))


# --- import fast paths ---
# A bulk import checks every row against its system's state before it writes anything, so it
# reads the touched systems once, set-based, and only what those checks and the chain need.


def system_ids_by_key(*, conn: Connection) -> dict[tuple[str, str], int]:
    """(site code, tag) -> system id of every system: one query, no records built."""
    stmt = select(site.c.code, system.c.tag, system.c.id).join(site, site.c.id == system.c.site_id)
    return {(code, tag): sid for code, tag, sid in tuples(conn.execute(stmt))}


def certificate_ids(*, conn: Connection) -> dict[int, dict[str, int]]:
    """Technician id -> {certificate number: certificate row id} (as ``get_technician`` maps
    them, for every technician in one query)."""
    found: dict[int, dict[str, int]] = defaultdict(dict)
    stmt = select(certificate.c.technician_id, certificate.c.number, certificate.c.id).order_by(certificate.c.id)
    for tid, number, cid in tuples(conn.execute(stmt)):
        found[tid][number] = cid
    return dict(found)


def chain_heads(system_ids: Iterable[int], *, conn: Connection) -> dict[int, str]:
    """System id -> the chain hash of its newest event, for those of these systems that have
    events (one indexed look-up per system; lock the chains first, see ``lock_systems``)."""
    newest = (
        select(event.c.chain_hash)
        .where(event.c.system_id == system.c.id)
        .order_by(event.c.id.desc())
        .limit(1)
        .scalar_subquery()
    )
    heads: dict[int, str] = {}
    ids = sorted(set(system_ids))
    for i in range(0, len(ids), _IN_CHUNK):
        stmt = select(system.c.id, newest).where(system.c.id.in_(ids[i : i + _IN_CHUNK]))
        heads.update((sid, head) for sid, head in tuples(conn.execute(stmt)) if head is not None)
    return heads


def load_events_of_kinds(
    system_ids: Iterable[int], kinds: Iterable[EventKind], *, conn: Connection
) -> dict[int, list[Event]]:
    """The events of these kinds of these systems, grouped by system in recording order,
    holding id, system, kind, day, refrigerant, charge and voided event (the rest at defaults).

    The (kind, day) index finds them, so this reads a few rows per system rather than all of
    their events.
    """
    columns = (
        event.c.id, event.c.system_id, event.c.kind, event.c.performed_on, event.c.refrigerant,
        event.c.charge_ng, event.c.voids_id,
    )
    wanted = sorted(k.value for k in kinds)
    grouped: dict[int, list[Event]] = defaultdict(list)
    days: dict[Any, date] = {}
    ids = sorted(set(system_ids))
    for i in range(0, len(ids), _IN_CHUNK):
        stmt = (
            select(*(_raw(c, c.name) for c in columns))
            .where(event.c.system_id.in_(ids[i : i + _IN_CHUNK]), event.c.kind.in_(wanted))
            .order_by(event.c.system_id, event.c.id)
        )
        for id_, system_id, kind, on, refrigerant, charge, voids in tuples(conn.execute(stmt)):
            day = days.get(on)
            if day is None:
                day = days[on] = date.fromisoformat(on) if isinstance(on, str) else on
            grouped[system_id].append(
                Event(id_, system_id, _KINDS[kind], day, refrigerant=refrigerant, charge_ng=charge, voids_id=voids)
            )
    return dict(grouped)


def content_keys_present(keys: Iterable[str], *, conn: Connection) -> set[str]:
    """Those of these import content keys that events in the ledger already carry.

    The statement is written for the driver: tens of thousands of keys are looked up by
    index, and building the SQL through the expression language was then most of the cost.
    """
    wanted = sorted(set(keys))
    found: set[str] = set()
    for i in range(0, len(wanted), _IN_CHUNK):
        chunk = wanted[i : i + _IN_CHUNK]
        if conn.dialect.name == "postgresql":  # one array parameter rather than 10 000
            rows = conn.exec_driver_sql("SELECT content_key FROM event WHERE content_key = ANY(%s)", (chunk,))
        else:
            marks = _marks(conn, len(chunk))
            rows = conn.exec_driver_sql(f"SELECT content_key FROM event WHERE content_key IN ({marks})", tuple(chunk))
        found.update(k for (k,) in tuples(rows))
    return found


def events_by_chain_hash(hashes: Iterable[str], *, conn: Connection) -> dict[str, tuple[int, int, EventKind]]:
    """Chain hash -> (event id, system id, kind) of the events carrying these hashes (by index)."""
    wanted = sorted(set(hashes))
    found: dict[str, tuple[int, int, EventKind]] = {}
    for i in range(0, len(wanted), _IN_CHUNK):
        stmt = select(event.c.chain_hash, event.c.id, event.c.system_id, event.c.kind).where(
            event.c.chain_hash.in_(wanted[i : i + _IN_CHUNK])
        )
        found.update((h, (id_, sid, _KINDS[kind])) for h, id_, sid, kind in tuples(conn.execute(stmt)))
    return found


def voiding_events(event_ids: Iterable[int], *, conn: Connection) -> list[tuple[int, int]]:
    """(system id, voided event id) of every event that names one of these events as the one
    it voids (a scan of the event table: for the few events an import's void rows name)."""
    wanted = sorted(set(event_ids))
    found: list[tuple[int, int]] = []
    for i in range(0, len(wanted), _IN_CHUNK):
        stmt = select(event.c.system_id, event.c.voids_id).where(event.c.voids_id.in_(wanted[i : i + _IN_CHUNK]))
        found.extend((sid, vid) for sid, vid in tuples(conn.execute(stmt)))
    return found


def insert_event_rows(columns: Sequence[str], rows: Sequence[Sequence[Any]], *, conn: Connection) -> None:
    """Insert event rows given as plain tuples in ``columns`` order: one ``executemany``, or
    one ``COPY`` on PostgreSQL (with psycopg), which the server takes in a third of the time.

    Each value is converted as SQLAlchemy would bind it for its column (the dialect's own
    bind processor: dates as ISO text on SQLite, for instance), so the stored rows are the
    ones ``insert(event)`` with dictionaries stores, without its per-row parameter handling.
    """
    if not rows:
        return
    dialect = conn.dialect
    processors = [event.c[name].type.dialect_impl(dialect).bind_processor(dialect) for name in columns]
    convert: list[tuple[int, Callable[[Any], Any], dict[Any, Any]]] = [
        (i, p, {}) for i, p in enumerate(processors) if p is not None
    ]
    if convert:  # each distinct value once: an import's rows share a few days and one time
        converted = []
        for row in rows:
            out = list(row)
            for i, p, done in convert:
                value = out[i]
                # equal times in other zones, or True and 1, are not the same value to bind
                key = (value.__class__, value, getattr(value, "tzinfo", None))
                bound = done.get(key, _UNBOUND)
                if bound is _UNBOUND:
                    bound = done[key] = p(value)
                out[i] = bound
            converted.append(tuple(out))
        rows = converted
    if conn.dialect.name == "postgresql" and conn.dialect.driver == "psycopg":
        import psycopg  # already loaded: it is this dialect's driver

        driver = conn.connection.driver_connection  # in the transaction this connection is in
        if not isinstance(driver, psycopg.Connection):  # None once the pool has invalidated it
            raise TypeError(f"no psycopg connection under this one: {driver!r}")
        with driver.cursor() as cursor, cursor.copy(f"COPY event ({', '.join(columns)}) FROM STDIN") as copy:
            for row in rows:
                copy.write_row(row)
        return
    conn.exec_driver_sql(f"INSERT INTO event ({', '.join(columns)}) VALUES ({_marks(conn, len(columns))})", list(rows))


_UNBOUND = object()


def _marks(conn: Connection, n: int) -> str:
    """``n`` positional parameter markers for ``exec_driver_sql`` on this connection's driver."""
    return ", ".join(["?" if conn.dialect.paramstyle == "qmark" else "%s"] * n)


@contextmanager
def roomy_page_cache(*, conn: Connection, mib: int = 64) -> Iterator[None]:
    """Let SQLite keep up to ``mib`` MiB of pages for this connection inside the block.

    A bulk insert updates every index of the event table at scattered places (the chain hash
    index alone is about 100 MiB at a million events); with SQLite's default 2 MiB cache most
    of those pages are read back and spilled again several times. The previous size is set
    again at the end, as the connection goes back to the pool. Other databases: nothing.
    """
    if conn.dialect.name != "sqlite":
        yield
        return
    before = int(conn.exec_driver_sql("PRAGMA cache_size").scalar_one())
    conn.exec_driver_sql(f"PRAGMA cache_size = {-1024 * mib}")
    try:
        yield
    except BaseException:
        from contextlib import suppress

        with suppress(Exception):  # the error that ended the block is the one to report
            conn.exec_driver_sql(f"PRAGMA cache_size = {before}")
        raise
    conn.exec_driver_sql(f"PRAGMA cache_size = {before}")


def load_kept_annual(
    year: int, basis: str, site_ids: Sequence[int] | None = None, *, conn: Connection
) -> dict[int, Any]:
    """Site id -> its kept annual part row for a year and basis (every site, or some)."""
    stmt = select(kept_annual).where(kept_annual.c.year == year, kept_annual.c.basis == basis)
    if site_ids is None:
        return {r.site_id: r for r in conn.execute(stmt)}
    found: dict[int, Any] = {}
    ids = sorted(set(site_ids))
    for i in range(0, len(ids), _IN_CHUNK):
        chunk = stmt.where(kept_annual.c.site_id.in_(ids[i : i + _IN_CHUNK]))
        found.update((r.site_id, r) for r in conn.execute(chunk))
    return found


def replace_kept_annual(*, conn: Connection, rows: Sequence[Mapping[str, Any]]) -> None:
    """Replace sites' kept annual parts (one per site, year and basis); sites locked first."""
    _lock_sites({r["site_id"] for r in rows}, conn=conn)
    for year, basis in sorted({(r["year"], r["basis"]) for r in rows}):
        mine = sorted({r["site_id"] for r in rows if (r["year"], r["basis"]) == (year, basis)})
        for i in range(0, len(mine), _IN_CHUNK):
            conn.execute(kept_annual.delete().where(
                kept_annual.c.year == year, kept_annual.c.basis == basis,
                kept_annual.c.site_id.in_(mine[i : i + _IN_CHUNK])))
    if rows:
        conn.execute(insert(kept_annual), list(rows))

