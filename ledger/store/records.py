"""The record chain: a hash chain over every version of the facts that are not events.

Sites (their regimes), systems (hermetic flag, application, ...), companies, technicians,
certificates, cylinders, detector channels and report filings bear on obligations but are
rows that a command may change. Every time the ledger writes one of them it appends a
*version* of the row to ``record_version``, hashed into one chain:

    body       = compact JSON, sorted keys, UTF-8 (no ASCII escaping) of
                 {"table": name, "key": natural key, "at": recorded UTC time, "fields": {...}, "v": 1}
    chain_hash = SHA-256(prev_hash + "\\n" + body)      (prev_hash of the first version: 64 zeros)

``fields`` is generic over the table's columns: every column except the surrogate ``id``,
each included only when it is not null (so a nullable column added later leaves existing
hashes valid), a foreign key written as the natural key of the row it names (``site_id`` ->
``"site": "DE-LEJ"``, ``system_id`` -> ``"system": "DE-LEJ/RACK-1"``) so a version holds in
any database the ledger is restored into. Values are written as the event chain writes them
(dates ``YYYY-MM-DD``, times ISO 8601 UTC with microseconds, booleans 0/1).

`verify` recomputes the chain and compares every live row with its newest version: a row
changed directly in the database is named as a mismatch between the two.

Migration 0006 holds its own copy of these definitions (migrations never import app code).
"""

from __future__ import annotations

import hashlib
import json
from collections.abc import Iterable, Mapping, Sequence
from datetime import UTC, datetime
from typing import Any

from sqlalchemy import Connection, Table, func, insert, select

from ledger.store import chain
from ledger.store.results import tuples
from ledger.store.tables import (
    certificate,
    company,
    cylinder,
    metadata,
    record_version,
    site,
    system,
    technician,
)

RECORD_VERSION = 1  # the "v" of a version body; bump when its form changes (needs a migration)

# The tables whose rows the chain covers, parents first (the order versions are first built in).
RECORD_TABLES: tuple[str, ...] = (
    "site",
    "company",
    "company_certificate",
    "technician",
    "certificate",
    "cylinder",
    "system",
    "detector_channel",
    "filing",
)

# PostgreSQL: one advisory lock serialises appends to the record chain (SQLite's write
# transaction already holds the database lock). Any constant will do; this one spells "rec".
PG_LOCK_KEY = 0x726563

_IN_CHUNK = 10_000


def natural_key(table_name: str, fields: Mapping[str, Any], row_id: int) -> str:
    """The name a person reads for a record, from its version fields."""
    if table_name == "site":
        return str(fields.get("code"))
    if table_name in ("company", "technician"):
        return str(fields.get("name"))
    if table_name == "certificate":
        return f"{fields.get('scheme')}|{fields.get('number')}"
    if table_name == "company_certificate":
        return f"{fields.get('company')}: {fields.get('scope')}|{fields.get('number')}"
    if table_name == "cylinder":
        return str(fields.get("code"))
    if table_name == "system":
        return f"{fields.get('site')}/{fields.get('tag')}"
    if table_name == "detector_channel":
        return f"{fields.get('site')}/{fields.get('code')}"
    if table_name == "filing":
        return f"{fields.get('site')} {fields.get('regime')} {fields.get('period_year')} (filing {row_id})"
    return f"{table_name} {row_id}"


def site_of(table_name: str, fields: Mapping[str, Any]) -> str | None:
    """The site a record belongs to (None for people, companies and cylinders)."""
    if table_name == "site":
        return fields.get("code")
    value = fields.get("site")
    return str(value) if value is not None else None


def fields_of(table: Table, row: Mapping[Any, Any], keys: Mapping[str, Mapping[int, str]]) -> dict[str, Any]:
    """A row's version fields: every non-null column but ``id``, foreign keys as natural keys.

    Args:
        table: the table the row is from.
        row: its column values by column name (a `RowMapping` or a dict).
        keys: referenced table name -> {row id: natural key}.
    """
    out: dict[str, Any] = {}
    for col in table.columns:
        if col.name == "id":
            continue
        value = row[col.name]
        if value is None:
            continue
        fks = list(col.foreign_keys)
        if fks:
            ref = fks[0].column.table.name
            out[col.name.removesuffix("_id")] = keys.get(ref, {}).get(value, f"#{value}")
        else:
            out[col.name] = chain._plain(value)
    return out


def body_of(table_name: str, row_id: int, at: datetime, fields: Mapping[str, Any]) -> str:
    """The canonical text of one version (what the chain hashes)."""
    doc = {"table": table_name, "key": natural_key(table_name, fields, row_id), "at": chain._plain(at),
           "fields": dict(fields), "v": RECORD_VERSION}
    return json.dumps(doc, sort_keys=True, separators=(",", ":"), ensure_ascii=False)


def link(prev_hash: str, body: str) -> str:
    """The chain hash of a version body following ``prev_hash``."""
    return hashlib.sha256(prev_hash.encode() + b"\n" + body.encode()).hexdigest()


def key_maps(conn: Connection, tables: Iterable[str], ids: Mapping[str, set[int]] | None = None
             ) -> dict[str, dict[int, str]]:
    """Natural keys of the rows foreign keys point at: table -> {id: key}.

    Args:
        tables: referenced table names.
        ids: only these ids per table (None: every row).
    """
    queries = {
        "site": (site.c.id, select(site.c.id, site.c.code).select_from(site)),
        "system": (system.c.id, select(system.c.id, site.c.code + "/" + system.c.tag)
                   .join(site, site.c.id == system.c.site_id)),
        "company": (company.c.id, select(company.c.id, company.c.name)),
        "technician": (technician.c.id, select(technician.c.id, technician.c.name)),
        "cylinder": (cylinder.c.id, select(cylinder.c.id, cylinder.c.code)),
        "certificate": (certificate.c.id, select(certificate.c.id, certificate.c.scheme + "|" + certificate.c.number)),
    }
    out: dict[str, dict[int, str]] = {}
    for name in set(tables):
        if name not in queries:
            continue
        id_col, stmt = queries[name]
        found: dict[int, str] = {}
        if ids is None:
            found.update((i, k) for i, k in tuples(conn.execute(stmt)))
        else:
            wanted = sorted(ids.get(name, set()))
            for i in range(0, len(wanted), _IN_CHUNK):
                found.update((a, k) for a, k in tuples(conn.execute(stmt.where(id_col.in_(wanted[i : i + _IN_CHUNK])))))
        out[name] = found
    return out


def _referenced(table: Table) -> dict[str, str]:
    """Column name -> referenced table name, for the table's foreign keys."""
    return {c.name: next(iter(c.foreign_keys)).column.table.name for c in table.columns if c.foreign_keys}


def newest_fields(conn: Connection, table_name: str, row_ids: Sequence[int] | None = None) -> dict[int, dict[str, Any]]:
    """Row id -> the fields of its newest version (every row of the table, or some)."""

    def newest(where: Any) -> Any:
        inner = (select(func.max(record_version.c.id)).where(record_version.c.table_name == table_name, where)
                 .group_by(record_version.c.row_id))
        return select(record_version.c.row_id, record_version.c.body).where(record_version.c.id.in_(inner))

    if row_ids is None:
        rows: list[Any] = list(conn.execute(newest(True)))
    else:
        wanted = sorted(set(row_ids))
        rows = [r for i in range(0, len(wanted), _IN_CHUNK)
                for r in conn.execute(newest(record_version.c.row_id.in_(wanted[i : i + _IN_CHUNK])))]
    return {row_id: json.loads(body)["fields"] for row_id, body in rows}


def head(conn: Connection) -> str:
    """The hash of the newest version (GENESIS for an empty chain)."""
    found = conn.execute(
        select(record_version.c.chain_hash).order_by(record_version.c.id.desc()).limit(1)
    ).scalar()
    return found or chain.GENESIS


def seal(table_name: str, row_ids: Iterable[int], *, conn: Connection) -> int:
    """Append a version of each of these rows whose fields differ from its newest version.

    Called by every write to a record table, in the same transaction. Only the rows the
    writer names are sealed: a row changed behind the ledger's back stays a mismatch.

    Returns:
        How many versions were appended.
    """
    ids = sorted(set(row_ids))
    if not ids:
        return 0
    table = metadata.tables[table_name]
    rows = [r for i in range(0, len(ids), _IN_CHUNK)
            for r in conn.execute(select(table).where(table.c.id.in_(ids[i : i + _IN_CHUNK])).order_by(table.c.id))
            .mappings()]
    refs = _referenced(table)
    wanted: dict[str, set[int]] = {}
    for r in rows:
        for col, ref in refs.items():
            if r[col] is not None:
                wanted.setdefault(ref, set()).add(r[col])
    keys = key_maps(conn, refs.values(), wanted)
    before = newest_fields(conn, table_name, ids)
    if conn.dialect.name == "postgresql":
        conn.exec_driver_sql(f"SELECT pg_advisory_xact_lock({PG_LOCK_KEY})")
    prev = head(conn)
    at = datetime.now(UTC)
    out = []
    for r in rows:
        fields = fields_of(table, r, keys)
        if before.get(r["id"]) == json.loads(json.dumps(fields)):
            continue
        body = body_of(table_name, r["id"], at, fields)
        prev_hash, prev = prev, link(prev, body)
        out.append({"table_name": table_name, "row_id": r["id"], "body": body, "recorded_at": at,
                    "prev_hash": prev_hash, "chain_hash": prev})
    if out:
        conn.execute(insert(record_version), out)
    return len(out)
