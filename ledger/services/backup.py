"""Export the whole ledger as plain files, and restore it into an empty database of either kind.

Layout of an export folder:
* ``<table>.jsonl``: one JSON object per row, every column, in primary-key order; dates as
  ``YYYY-MM-DD``, times as ISO 8601 UTC, masses as integers (ng);
* ``manifest.json``: format version, schema revision, export time, and per table the row
  count and the SHA-256 of its file, plus the digest of all chain heads.

This is also the way from the embedded SQLite file to a PostgreSQL server.

Not exported, on purpose: kept results (derived; recomputed on the next run) and the web
accounts tables (`ACCOUNTS_NOT_EXPORTED`): users, sessions and failed logins belong to one
installation, and an export folder must never carry password hashes. After a restore, add the
users again with `refledger user add`.
"""

from __future__ import annotations

import hashlib
import json
from dataclasses import dataclass
from datetime import UTC, date, datetime
from decimal import Decimal
from pathlib import Path
from typing import Any

from ledger.errors import Conflict, LedgerError
from ledger.store.db import HEAD_REVISION, Database, Location, upgrade

FORMAT_VERSION = 1
# Parents before children, so foreign keys hold while loading.
TABLE_ORDER = (
    "site",
    "company",
    "company_certificate",
    "technician",
    "certificate",
    "cylinder",
    "system",
    "event",
    "detector_channel",
    "detector_episode",
    "report_run",
    "filing",
    "record_version",
    "checkpoint",
)
# Web accounts: never exported (password hashes stay in the database they were made in).
ACCOUNTS_NOT_EXPORTED = ("app_user", "web_session", "login_failure")


@dataclass(frozen=True, slots=True)
class BackupResult:
    """What an export or restore moved."""

    folder: Path
    counts: dict[str, int]
    heads_digest: str


def _plain(value: Any) -> Any:
    if isinstance(value, datetime):
        aware = value.replace(tzinfo=UTC) if value.tzinfo is None else value.astimezone(UTC)
        return aware.isoformat()
    if isinstance(value, date):
        return value.isoformat()
    return value


def _tables():
    from ledger.store.tables import metadata

    return [metadata.tables[name] for name in TABLE_ORDER]


def export_ledger(db: Database, folder: Path) -> BackupResult:
    """Write every table and a manifest into ``folder`` (created; must be empty)."""
    from sqlalchemy import select

    from ledger.services.integrity import verify

    folder.mkdir(parents=True, exist_ok=True)
    if any(folder.iterdir()):
        raise Conflict(f"DIR: {folder} is not empty")
    counts: dict[str, int] = {}
    digests: dict[str, str] = {}
    with db.read() as conn:
        for table in _tables():
            path = folder / f"{table.name}.jsonl"
            sha = hashlib.sha256()
            n = 0
            with path.open("w", encoding="utf-8", newline="\n") as fh:
                for row in conn.execute(select(table).order_by(*table.primary_key.columns)).mappings():
                    line = (
                        json.dumps(
                            {k: _plain(v) for k, v in row.items()},
                            ensure_ascii=False,
                            sort_keys=True,
                            separators=(",", ":"),
                        )
                        + "\n"
                    )
                    fh.write(line)
                    sha.update(line.encode())
                    n += 1
            counts[table.name] = n
            digests[table.name] = sha.hexdigest()
    heads = verify(db).digest
    manifest = {
        "format": FORMAT_VERSION,
        "schema_revision": HEAD_REVISION,
        "exported_at": datetime.now(UTC).isoformat(),
        "tables": {name: {"rows": counts[name], "sha256": digests[name]} for name in counts},
        "chain_heads_digest": heads,
    }
    (folder / "manifest.json").write_text(json.dumps(manifest, indent=2) + "\n", encoding="utf-8")
    return BackupResult(folder, counts, heads)


def _typed(table, row: dict[str, Any]) -> dict[str, Any]:
    from sqlalchemy import Date, DateTime

    out = {}
    for key, value in row.items():
        column = table.c[key]
        if value is not None and isinstance(column.type, DateTime):
            value = datetime.fromisoformat(value)
        elif value is not None and isinstance(column.type, Date):
            value = date.fromisoformat(value)
        out[key] = value
    return out


def restore_ledger(folder: Path, location: Location) -> BackupResult:
    """Load an export into an empty database (created or migrated to head), then verify it.

    Raises:
        Conflict: the target already holds records.
        LedgerError: a file is missing or does not match the manifest; the chains do not verify.
    """
    from sqlalchemy import func, insert, select, text

    from ledger.services.integrity import verify

    manifest_path = folder / "manifest.json"
    if not manifest_path.exists():
        raise LedgerError(f"DIR: {folder} has no manifest.json (not a refledger export)")
    manifest = json.loads(manifest_path.read_text(encoding="utf-8"))
    if manifest.get("format") != FORMAT_VERSION or manifest.get("schema_revision") != HEAD_REVISION:
        raise LedgerError(
            f"DIR: export format {manifest.get('format')} / schema {manifest.get('schema_revision')} "
            f"cannot be restored by this version (needs {FORMAT_VERSION} / {HEAD_REVISION})"
        )
    upgrade(location, backup=False)
    db = Database(location)
    try:
        with db.write() as conn:
            for table in _tables():
                if conn.execute(select(func.count()).select_from(table)).scalar_one():
                    raise Conflict(f"--db: {location.url} is not empty ({table.name} has rows)")
            counts: dict[str, int] = {}
            for table in _tables():
                entry = manifest["tables"].get(table.name)
                path = folder / f"{table.name}.jsonl"
                if entry is None or not path.exists():
                    raise LedgerError(f"DIR: {path.name} is missing")
                data = path.read_bytes()
                if hashlib.sha256(data).hexdigest() != entry["sha256"]:
                    raise LedgerError(f"DIR: {path.name} does not match the manifest's digest")
                rows = [_typed(table, json.loads(line)) for line in data.decode("utf-8").splitlines() if line]
                if len(rows) != entry["rows"]:
                    raise LedgerError(f"DIR: {path.name} has {len(rows)} rows, the manifest says {entry['rows']}")
                for start in range(0, len(rows), 5000):
                    if rows[start : start + 5000]:
                        conn.execute(insert(table), rows[start : start + 5000])
                counts[table.name] = len(rows)
                if conn.dialect.name == "postgresql" and rows:
                    conn.execute(
                        text(
                            f"SELECT setval(pg_get_serial_sequence('{table.name}', 'id'), "
                            f"(SELECT MAX(id) FROM {table.name}))"
                        )
                    )
        checked = verify(db)
        if not checked.ok:
            raise LedgerError(f"restore: the restored ledger does not verify: {checked.problems()[0]}")
        if checked.digest != manifest["chain_heads_digest"]:
            raise LedgerError("restore: chain heads differ from the manifest's digest")
        return BackupResult(folder, counts, checked.digest)
    finally:
        db.close()


# ---- the records as an import workbook ------------------------------------------------------


def _mass_text(ng: int | None) -> str:
    """Exact kg text for a mass (the import parses it back to the same nanogram)."""
    if ng is None:
        return ""
    text = format(Decimal(ng) / 10**12, "f")
    if "." in text:
        text = text.rstrip("0").rstrip(".")
    return f"{text} kg"


def _day(value: date | None) -> str:
    return value.isoformat() if value else ""


def export_workbook(db: Database, path: Path) -> dict[str, int]:
    """Write every record in the import layout (docs/import.md), one sheet per record type.

    Events carry their ``recorded_at`` and voids name the voided event by its chain hash, so
    importing the workbook into an empty ledger reproduces the same chains and chain heads.

    Returns:
        Rows written per sheet.
    """
    from openpyxl import Workbook

    from ledger.domain.records import EventKind
    from ledger.inputs import COLUMNS, ORDER
    from ledger.store import repository as repo

    with db.read() as conn:
        sites = repo.list_sites(conn=conn)
        techs = repo.list_technicians(conn=conn)
        cylinders = repo.list_cylinders(conn=conn)
        histories = repo.load_histories(conn=conn)
    hashes = {e.id: e.chain_hash for h in histories for e in h.events}
    sheets: dict[str, list[dict[str, str]]] = {k: [] for k in ORDER}
    for s in sites:
        sheets["sites"].append({
            "code": s.code, "name": s.name, "country": s.country, "subdivision": s.subdivision or "",
            "timezone": s.timezone, "regimes": " ".join(s.regimes), "leak_rate_method": s.leak_rate_method,
            "unit": s.mass_unit,
        })
    for t in techs:
        for c in t.certificates:
            sheets["technicians"].append({
                "name": t.name, "company": t.company, "scheme": c.scheme, "certificate": c.number,
                "category": c.category, "valid_from": _day(c.valid_from), "valid_to": _day(c.valid_to),
                "scope": c.scope, "issuer": c.issuer,
            })
    for cy in cylinders:
        sheets["cylinders"].append({"id": cy.id, "refrigerant": cy.refrigerant, "kind": cy.kind.value,
                                    "tare": _mass_text(cy.tare_ng)})
    for h in histories:
        placed = next((e for e in h.events if e.kind is EventKind.IN_SERVICE), None)
        if placed is None:
            continue
        sy = h.system
        sheets["systems"].append({
            "site": h.site.code, "tag": sy.tag, "refrigerant": placed.refrigerant or "",
            "charge": _mass_text(placed.charge_ng), "application": sy.application.value,
            "in_service": placed.performed_on.isoformat(), "form": sy.equipment_form.value,
            "description": sy.description, "hermetic": "yes" if sy.hermetic else "no",
            "residential": "yes" if sy.residential else "no", "detection_system": "no",
            "location": sy.location, "maker": sy.maker, "model": sy.model, "serial": sy.serial,
            "defrost_every_hours": "" if sy.defrost_every_hours is None else f"{sy.defrost_every_hours:g}",
            "tech": placed.technician or "", "by": placed.recorded_by or "",
            "recorded_at": placed.recorded_at.isoformat() if placed.recorded_at else "",
        })
        for e in sorted(h.events, key=lambda e: e.id):
            if e.kind is EventKind.IN_SERVICE:
                continue
            weighed = e.cylinder_before_ng is not None and e.cylinder_after_ng is not None
            sheets["events"].append({
                "site": h.site.code, "tag": sy.tag, "kind": e.kind.value, "on": e.performed_on.isoformat(),
                "mass": "" if weighed else _mass_text(e.mass_ng),
                "cylinder": e.cylinder_id or "",
                "before": _mass_text(e.cylinder_before_ng) if weighed else "",
                "after": _mass_text(e.cylinder_after_ng) if weighed else "",
                "refrigerant": e.refrigerant or "", "charge": _mass_text(e.charge_ng),
                "result": e.result or "", "where": e.location or "", "method": e.method or "",
                "destination": e.destination or "", "reclaimed": "yes" if e.reclaimed else "",
                "tech": e.technician or "", "by": e.recorded_by or "", "note": e.note,
                "recorded_at": e.recorded_at.isoformat() if e.recorded_at else "",
                "attachments": " ".join(e.attachments),
                "voids": (hashes.get(e.voids_id) or "") if e.voids_id else "", "reason": e.reason or "",
                "facility": e.facility or "", "facility_certificate": e.facility_certificate or "",
            })
    book = Workbook()
    book.remove(book.active)
    counts = {}
    for kind in ORDER:
        sheet = book.create_sheet(kind)
        required, optional = COLUMNS[kind]
        names = sorted(required) + sorted(optional)
        sheet.append(names)
        for row in sheets[kind]:
            sheet.append([row.get(n, "") or None for n in names])
        for cells in sheet.iter_rows(min_row=2):
            for cell in cells:
                if cell.value is not None:
                    cell.data_type = "s"  # all text: formulas never run, dates never reinterpreted
        sheet.freeze_panes = "A2"
        counts[kind] = len(sheets[kind])
    book.save(path)
    return counts
