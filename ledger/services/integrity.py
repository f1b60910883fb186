"""Verify the ledger: recompute every hash chain, compare the records with their chained
versions, check the database guards and the kept results, and (given one) a signed checkpoint.

What a break of an event chain means (for the first bad event of a system):
* ``edited``: the row's content no longer hashes to its stored ``chain_hash``;
* ``missing``: the row links to a hash no event of the system has (an event before it was
  removed);
* ``reordered``: the row links to another event of the system than the one before it;
* ``inserted``: the row neither matches its own hash nor links to its predecessor (a row
  written outside the ledger).
A row appended at the very end with a correctly computed hash, or the newest row removed,
cannot be told from the real history by the chain alone: a signed checkpoint tells
(``check_checkpoint``; docs/integrity.md, "Threat model").

One digest definition (``heads_digest``) serves `verify`, every report and the backup manifest.
"""

from __future__ import annotations

import hashlib
import json
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from datetime import UTC, datetime
from typing import Any

from ledger.store import chain
from ledger.store.db import Database

STREAM_ROWS = 20_000  # rows fetched at a time (a server-side cursor on PostgreSQL)
RECORDS = "records"  # the record chain's name in heads and checkpoints (no "/": never a system)

# The database guards `verify` expects, by engine: (trigger name, table, text its body must hold).
# Append-only guards refuse changes; the site-revision triggers keep kept results honest.
_SQLITE_REFUSE = "RAISE(ABORT"
_PG_REFUSE = "RAISE EXCEPTION"
APPEND_ONLY_TABLES = ("event", "filing", "record_version", "checkpoint")
REVISION_TRIGGERS = (
    ("site_gets_revision", "site"),
    ("event_raises_site_revision", "event"),
    ("system_raises_site_revision", "system"),
    ("filing_raises_site_revision", "filing"),
    ("episode_in_raises_site_revision", "detector_episode"),
    ("episode_out_raises_site_revision", "detector_episode"),
)


def expected_guards(dialect: str) -> list[tuple[str, str, str | None]]:
    """(trigger, table, required body text or None) the migrations install on this engine."""
    found: list[tuple[str, str, str | None]] = []
    for table in APPEND_ONLY_TABLES:
        if dialect == "sqlite":
            found += [(f"{table}_no_update", table, _SQLITE_REFUSE), (f"{table}_no_delete", table, _SQLITE_REFUSE)]
        else:
            found.append((f"{table}_append_only", table, _PG_REFUSE))
            if table != "filing":  # migration 0002 guards filings against UPDATE and DELETE only
                found.append((f"{table}_no_truncate", table, _PG_REFUSE))
    found += [(name, table, None) for name, table in REVISION_TRIGGERS]
    return found


@dataclass(frozen=True, slots=True)
class Break:
    """The first event of a system whose chain does not hold."""

    site: str
    system: str
    event_id: int
    what: str  # edited, missing, inserted, reordered
    detail: str


@dataclass(frozen=True, slots=True)
class RecordBreak:
    """A record (site, system, technician, ...) that does not match the record chain."""

    table: str
    key: str  # natural key, e.g. "DE-LEJ/RACK-1" or "Jana Köhler"
    row_id: int
    what: str  # changed, unrecorded, removed, edited, missing, inserted, reordered
    detail: str
    site: str | None = None  # the site it belongs to, if any


@dataclass(frozen=True, slots=True)
class CheckpointBreak:
    """A chain that no longer holds what a signed checkpoint says it held."""

    chain: str  # "SITE/TAG" or "records"
    what: str  # removed, changed, inserted, back-dated
    detail: str


@dataclass(slots=True)
class Verification:
    """The result of `verify`: counts, breaks, guards and the chain heads."""

    systems: int = 0
    events: int = 0
    breaks: list[Break] = field(default_factory=list)
    heads: dict[str, str] = field(default_factory=dict)  # "SITE/TAG" -> chain head
    lengths: dict[str, int] = field(default_factory=dict)  # "SITE/TAG" -> events in its chain
    records_head: str = chain.GENESIS
    record_versions: int = 0
    record_breaks: list[RecordBreak] = field(default_factory=list)
    guards: list[str] = field(default_factory=list)  # one sentence per missing or altered guard
    kept: list[str] = field(default_factory=list)  # one sentence per altered kept result
    checkpoint_breaks: list[CheckpointBreak] = field(default_factory=list)

    @property
    def ok(self) -> bool:
        return not (self.breaks or self.record_breaks or self.guards or self.kept or self.checkpoint_breaks)

    @property
    def digest(self) -> str:
        """One SHA-256 over all chain heads: a single figure to print on a report."""
        return heads_digest(self.heads)

    def problems(self) -> list[str]:
        """Every finding as one line, events first."""
        out = [f"{b.site}/{b.system}: event {b.event_id} {b.what}: {b.detail}" for b in self.breaks]
        out += [f"{b.table} {b.key}: {b.what}: {b.detail}" for b in self.record_breaks]
        out += [f"checkpoint, {b.chain}: {b.what}: {b.detail}" for b in self.checkpoint_breaks]
        out += [f"guard: {g}" for g in self.guards]
        out += [f"kept results: {k}" for k in self.kept]
        return out


def heads_digest(heads: Mapping[str, str]) -> str:
    """SHA-256 over ``SITE/TAG=head`` lines in sorted order (the one digest every report prints)."""
    body = "\n".join(f"{k}={v}" for k, v in sorted(heads.items()))
    return hashlib.sha256(body.encode()).hexdigest()


def check_chain(
    rows: list[dict[str, Any]], link: Callable[[str, dict[str, Any]], str] = chain.link
) -> tuple[str, str, int] | None:
    """Check one chain's rows (in id order); return (what, detail, row id) of the first break.

    Args:
        rows: rows with ``id``, ``prev_hash``, ``chain_hash`` and what ``link`` hashes.
        link: the chain's hash of a row following a hash (events: ``chain.link``).
    """
    expected = chain.GENESIS
    known = {r["chain_hash"] for r in rows}
    position = {r["chain_hash"]: i for i, r in enumerate(rows)}
    for i, row in enumerate(rows):
        recomputed = link(row["prev_hash"], row)
        self_ok = recomputed == row["chain_hash"]
        link_ok = row["prev_hash"] == expected
        if not self_ok and not link_ok:
            return "inserted", "neither its content nor its link match the chain", row["id"]
        if not self_ok:
            return "edited", "its content no longer matches the hash recorded with it", row["id"]
        if not link_ok:
            if row["prev_hash"] in known:
                j = position[row["prev_hash"]]
                return (
                    "reordered",
                    f"it follows row {rows[j]['id']} in the chain, not row {rows[i - 1]['id'] if i else '(start)'}",
                    row["id"],
                )
            return "missing", "the row it follows in the chain is no longer in the ledger", row["id"]
        expected = row["chain_hash"]
    return None


def _record_link(prev: str, row: dict[str, Any]) -> str:
    from ledger.store.records import link

    return link(prev, row["body"])


def _aware(value: datetime) -> datetime:
    return value.replace(tzinfo=UTC) if value.tzinfo is None else value


def _against_checkpoint(name: str, rows: list[dict[str, Any]], entry: Mapping[str, Any] | None,
                        made_at: datetime, unit: str) -> list[CheckpointBreak]:
    """How one chain's rows compare with what a checkpoint recorded for it."""
    out: list[CheckpointBreak] = []
    covered = 0
    if entry is not None:
        n, want = int(entry["length"]), entry["head"]
        covered = n
        if len(rows) < n:
            out.append(CheckpointBreak(name, "removed", f"the checkpoint covers {n} {unit}, the chain now holds "
                                                        f"{len(rows)}: covered {unit} were removed"))
            covered = len(rows)
        elif n and rows[n - 1]["chain_hash"] != want:
            at = next((i for i, r in enumerate(rows) if r["chain_hash"] == want), None)
            if at is not None:
                out.append(CheckpointBreak(name, "inserted", f"{at + 1 - n:+d} {unit} before the checkpoint's head "
                                                             f"(it was number {n}, it is now number {at + 1})"))
            else:
                out.append(CheckpointBreak(name, "changed", f"the checkpoint's head is no longer in the chain: "
                                                            f"{unit} it covers were changed, removed or rewritten"))
    for r in rows[covered:]:
        stamp = r.get("recorded_at")
        if stamp is not None and _aware(stamp) < made_at:
            out.append(CheckpointBreak(name, "back-dated", f"row {r['id']} says it was recorded at "
                                                           f"{_aware(stamp).isoformat(timespec='seconds')}, before the "
                                                           "checkpoint, which does not cover it"))
            break
    return out


def verify(
    db: Database,
    *,
    site_code: str | None = None,
    system_ids: list[int] | None = None,
    checkpoint: Mapping[str, Any] | None = None,
    deep: bool = True,
    kept: bool = True,
) -> Verification:
    """Recompute every chain (or one site's, or some systems') and check what surrounds them.

    Args:
        site_code: only this site's event chains (and records of that site or of no site).
        system_ids: only these systems' event chains.
        checkpoint: a checkpoint statement (signature already checked): also prove that every
            chain holds what it recorded, none removed, none inserted before it.
        deep: also check the record chain and the database guards.
        kept: also check the kept results against their digests.
    """
    from ledger.store.repository import events_with_keys
    from ledger.store.tables import event, site

    result = Verification()
    stmt = events_with_keys().order_by(event.c.system_id, event.c.id)
    if site_code:
        stmt = stmt.where(site.c.code == site_code)
    if system_ids is not None:
        stmt = stmt.where(event.c.system_id.in_(system_ids or [-1]))
    made_at = datetime.fromisoformat(checkpoint["made_at"]) if checkpoint else None
    chains = dict(checkpoint["chains"]) if checkpoint else {}
    # Rows arrive system by system (ordered by system id), so each chain is checked as soon as
    # its last row is read and only one system's rows are held: at a million events, holding
    # them all as dicts took about 2.5 kB per event.
    current: tuple[str, str] | None = None
    rows: list[dict[str, Any]] = []

    def check(key: tuple[str, str], rows: list[dict[str, Any]]) -> None:
        s, t = key
        name = f"{s}/{t}"
        result.systems += 1
        result.events += len(rows)
        result.heads[name] = rows[-1]["chain_hash"]
        result.lengths[name] = len(rows)
        broken = check_chain(rows)
        if broken:
            what, detail, event_id = broken
            result.breaks.append(Break(s, t, event_id, what, detail.replace("row", "event")))
        if made_at is not None:
            result.checkpoint_breaks += _against_checkpoint(name, rows, chains.pop(name, None), made_at, "events")

    with db.read() as conn:
        if site_code:
            from ledger.store.repository import get_site

            get_site(site_code, conn=conn)
        for row in conn.execute(stmt.execution_options(yield_per=STREAM_ROWS)).mappings():
            key = (row["site_code"], row["tag"])
            if key != current:
                if rows and current is not None:  # rows are only ever held under a key
                    check(current, rows)
                current, rows = key, []
            rows.append(dict(row))
        if rows and current is not None:
            check(current, rows)
        if made_at is not None:
            for name, entry in sorted(chains.items()):
                in_scope = system_ids is None and (site_code is None or name.startswith(f"{site_code}/"))
                if in_scope and int(entry["length"]):
                    result.checkpoint_breaks.append(CheckpointBreak(
                        name, "removed", f"the checkpoint covers {entry['length']} events of this system; "
                                         "it is no longer in the ledger"))
        if deep:
            _check_records(conn, result, site_code, checkpoint, made_at)
            result.guards = check_guards(conn)
        if kept:
            result.kept = check_kept(conn)
    return result


def _check_records(conn: Any, result: Verification, site_code: str | None,
                   checkpoint: Mapping[str, Any] | None, made_at: datetime | None) -> None:
    """The record chain, and every live record against its newest chained version."""
    from sqlalchemy import select

    from ledger.store import records
    from ledger.store.tables import metadata, record_version

    versions = [dict(r) for r in conn.execute(select(record_version).order_by(record_version.c.id)).mappings()]
    result.record_versions = len(versions)
    result.records_head = versions[-1]["chain_hash"] if versions else chain.GENESIS
    breaks: list[RecordBreak] = []
    broken = check_chain(versions, _record_link)
    if broken:
        what, detail, vid = broken
        v = next(r for r in versions if r["id"] == vid)
        body = _body(v)
        breaks.append(RecordBreak(v["table_name"], body.get("key", "?"), v["row_id"], what,
                                  f"version {vid}: {detail}", records.site_of(v["table_name"], body.get("fields", {}))))
    if made_at is not None and checkpoint is not None:
        result.checkpoint_breaks += _against_checkpoint(RECORDS, versions, checkpoint.get("records"), made_at,
                                                        "record versions")
    newest: dict[tuple[str, int], dict[str, Any]] = {}
    for v in versions:
        newest[(v["table_name"], v["row_id"])] = v
    refs = {next(iter(c.foreign_keys)).column.table.name
            for name in records.RECORD_TABLES for c in metadata.tables[name].columns if c.foreign_keys}
    keys = records.key_maps(conn, refs)
    for name in records.RECORD_TABLES:
        table = metadata.tables[name]
        for row in conn.execute(select(table).order_by(table.c.id)).mappings():
            fields = json.loads(json.dumps(records.fields_of(table, row, keys)))
            key = records.natural_key(name, fields, row["id"])
            version = newest.pop((name, row["id"]), None)
            if version is None:
                breaks.append(RecordBreak(name, key, row["id"], "unrecorded",
                                          "the row is in no version of the record chain: written outside the ledger",
                                          records.site_of(name, fields)))
                continue
            chained = _body(version).get("fields", {})
            if chained != fields:
                changes = [f"{k} {chained.get(k)!r} -> {fields.get(k)!r}"
                           for k in sorted(set(chained) | set(fields)) if chained.get(k) != fields.get(k)]
                breaks.append(RecordBreak(name, key, row["id"], "changed",
                                          f"{'; '.join(changes)} (live row against its newest chained version "
                                          f"{version['id']}): changed outside the ledger",
                                          records.site_of(name, fields)))
    for (name, row_id), v in sorted(newest.items()):
        body = _body(v)
        breaks.append(RecordBreak(name, body.get("key", "?"), row_id, "removed",
                                  "the record chain holds it, the table no longer does",
                                  records.site_of(name, body.get("fields", {}))))
    if site_code is not None:
        breaks = [b for b in breaks if b.site in (None, site_code)]
    result.record_breaks = breaks


def _body(version: Mapping[str, Any]) -> dict[str, Any]:
    try:
        body = json.loads(version["body"])
    except (TypeError, ValueError):
        return {}
    return body if isinstance(body, dict) else {}


def check_guards(conn: Any) -> list[str]:
    """One sentence per append-only or site-revision trigger that is missing, disabled or no
    longer refuses; and (PostgreSQL) per rule on a guarded table."""
    from sqlalchemy import text

    dialect = conn.dialect.name
    problems: list[str] = []
    if dialect == "sqlite":
        present = {name: (sql or "", True) for name, sql in
                   conn.execute(text("SELECT name, sql FROM sqlite_master WHERE type = 'trigger'"))}
    else:
        present = {
            name: (src or "", enabled != "D")
            for name, src, enabled in conn.execute(text(
                "SELECT t.tgname, p.prosrc, t.tgenabled FROM pg_trigger t JOIN pg_proc p ON p.oid = t.tgfoid "
                "WHERE NOT t.tgisinternal"))
        }
        for table, rule in conn.execute(text(
                "SELECT tablename, rulename FROM pg_rules WHERE schemaname = current_schema()")):
            if table in APPEND_ONLY_TABLES or table in {t for _, t in REVISION_TRIGGERS}:
                problems.append(f"rule {rule} on table {table} may rewrite or silence writes to it")
    for name, table, refuse in expected_guards(dialect):
        if name not in present:
            problems.append(f"trigger {name} on table {table} is missing")
            continue
        body, enabled = present[name]
        if not enabled:
            problems.append(f"trigger {name} on table {table} is disabled")
        elif refuse is not None and refuse not in body:
            problems.append(f"trigger {name} on table {table} no longer refuses changes")
    return problems


def check_kept(conn: Any) -> list[str]:
    """One sentence per site whose kept results do not match the digest kept with them (rows
    removed or altered): `due` and the summary compute such a site again."""
    from ledger.services.kept import kept_annual_mismatches, kept_mismatches

    return kept_mismatches(conn) + kept_annual_mismatches(conn)


def verification_json(result: Verification, found: Any = None, signed: Any = None) -> dict[str, Any]:
    """A verification as the `verify --json` contract (and the web API) has it; ``found`` and
    ``signed`` are the checkpoint checked against and its signature check, if one was given."""
    return {
        "ok": result.ok and (signed is None or signed.ok),
        "systems": result.systems,
        "events": result.events,
        "heads_digest": result.digest,
        "heads": result.heads,
        "records": {"head": result.records_head, "versions": result.record_versions},
        "breaks": [
            {"site": b.site, "system": b.system, "event": b.event_id, "what": b.what, "detail": b.detail}
            for b in result.breaks
        ],
        "record_breaks": [
            {"table": b.table, "key": b.key, "row": b.row_id, "what": b.what, "detail": b.detail}
            for b in result.record_breaks
        ],
        "guards": result.guards,
        "kept": result.kept,
        "checkpoint": None if found is None else {
            "id": found.id, "made_at": found.made_at, "key_id": found.key_id,
            "signature_ok": signed.ok, "checked_against": signed.key_source,
            "signature_problems": list(signed.problems),
            "breaks": [{"chain": b.chain, "what": b.what, "detail": b.detail}
                       for b in result.checkpoint_breaks],
        },
    }
