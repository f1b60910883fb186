"""Bulk import of sites, technicians, cylinders, systems and events from CSV or XLSX.

The column layout is documented in docs/import.md. The whole input is read and checked
first; all problems are collected (file, row, column, value); nothing is written unless
everything is valid, and then everything is written in one transaction. Rows already in the
ledger are skipped, so a file can be sent again safely.
"""

from __future__ import annotations

import csv
import hashlib
import io
import json
from collections import defaultdict
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, field, replace
from datetime import UTC, date, datetime
from pathlib import Path
from typing import Any

from ledger.domain.drafts import EventDraft, cylinder_mass_mg, validate_event
from ledger.domain.records import (
    Application,
    Certificate,
    Cylinder,
    CylinderKind,
    EquipmentForm,
    Event,
    EventKind,
    Finding,
    Severity,
    Technician,
)
from ledger.domain.state import state_of
from ledger.errors import LedgerError
from ledger.reference import load_reference
from ledger.store import chain
from ledger.store import repository as repo
from ledger.store.db import Database
from ledger.units import parse_mass_mg

ORDER = ("sites", "technicians", "cylinders", "systems", "events")

COLUMNS: dict[str, tuple[frozenset[str], frozenset[str]]] = {
    # record type: (required columns, optional columns)
    "sites": (
        frozenset({"code", "name", "country"}),
        frozenset({"subdivision", "timezone", "regimes", "leak_rate_method", "unit"}),
    ),
    "technicians": (
        frozenset({"name", "scheme", "certificate"}),
        frozenset({"company", "category", "valid_from", "valid_to"}),
    ),
    "cylinders": (frozenset({"id", "refrigerant", "kind"}), frozenset({"tare"})),
    "systems": (
        frozenset({"site", "tag", "refrigerant", "charge", "application", "in_service"}),
        frozenset(
            {
                "form",
                "description",
                "hermetic",
                "residential",
                "detection_system",
                "location",
                "maker",
                "model",
                "serial",
                "defrost_every_hours",
                "tech",
                "by",
                "recorded_at",
            }
        ),
    ),
    "events": (
        frozenset({"site", "tag", "kind", "on"}),
        frozenset(
            {
                "mass",
                "cylinder",
                "before",
                "after",
                "refrigerant",
                "charge",
                "result",
                "where",
                "method",
                "destination",
                "reclaimed",
                "tech",
                "by",
                "note",
                "recorded_at",
                "attachments",
                "voids",
                "reason",
            }
        ),
    ),
}

# Event kinds an import may carry (placing in service comes from the systems sheet). A void
# names the voided event by its chain hash, so it can refer to a row of the same input.
IMPORT_KINDS = frozenset(EventKind) - {EventKind.IN_SERVICE}
HASH_LENGTH = 64
TRUE = frozenset({"yes", "y", "true", "1", "x"})
FALSE = frozenset({"no", "n", "false", "0", ""})
MAX_CELL = 10_000  # characters; longer cells are refused rather than stored


@dataclass(frozen=True, slots=True)
class Row:
    """One input row: where it came from and its cells (all text, stripped)."""

    source: str  # "events.csv row 12" or "book.xlsx:events row 12"
    cells: dict[str, str]


@dataclass(slots=True)
class ImportSummary:
    """What an import did (or would do, with --dry-run)."""

    added: dict[str, int] = field(default_factory=lambda: dict.fromkeys(ORDER, 0))
    skipped: dict[str, int] = field(default_factory=lambda: dict.fromkeys(ORDER, 0))
    problems: list[str] = field(default_factory=list)
    warnings: list[str] = field(default_factory=list)
    dry_run: bool = False

    @property
    def ok(self) -> bool:
        return not self.problems


class _Invalid(LedgerError):
    """Internal: roll back the import transaction because problems were found."""


class _Problems:
    def __init__(self) -> None:
        self.items: list[str] = []

    def add(self, row: Row, column: str, problem: str) -> None:
        value = row.cells.get(column, "")
        shown = value if len(value) <= 60 else value[:57] + "..."
        self.items.append(f"{row.source} column {column}: {shown!r}: {problem}")


# ---- reading ------------------------------------------------------------------------------


def _kind_of(name: str) -> str | None:
    stem = name.lower().rsplit(".", 1)[0].strip()
    return stem if stem in COLUMNS else None


def _text(value: Any) -> str:
    if value is None:
        return ""
    if isinstance(value, datetime):
        return value.date().isoformat() if value.time() == datetime.min.time() else value.isoformat()
    if isinstance(value, date):
        return value.isoformat()
    if isinstance(value, float) and value.is_integer():
        return str(int(value))
    return str(value).strip()


def _rows_from_records(label: str, records: Iterable[Sequence[Any]], problems: list[str]) -> list[Row]:
    it = iter(records)
    header = next(it, None)
    if header is None:
        problems.append(f"{label}: is empty (no header row)")
        return []
    names = [_text(h).lower() for h in header]
    rows = []
    for number, values in enumerate(it, start=2):
        texts = [_text(v) for v in values]
        if not any(texts):
            continue
        if len(texts) > len(names) and any(texts[len(names) :]):
            problems.append(f"{label} row {number}: has more cells than the header has columns")
            continue
        cells = {n: (texts[i] if i < len(texts) else "") for i, n in enumerate(names) if n}
        rows.append(Row(f"{label} row {number}", cells))
    return rows


def _check_header(kind: str, label: str, rows: list[Row], header: Sequence[str], problems: list[str]) -> None:
    required, optional = COLUMNS[kind]
    names = {h for h in header if h}
    missing = sorted(required - names)
    unknown = sorted(names - required - optional)
    if missing:
        problems.append(f"{label}: missing column(s) {', '.join(missing)}")
    if unknown:
        problems.append(f"{label}: unknown column(s) {', '.join(unknown)} (see docs/import.md)")


def read_inputs(paths: Sequence[Path]) -> tuple[dict[str, list[Row]], list[str]]:
    """Read CSV files and XLSX workbooks into rows per record type.

    Returns:
        Rows grouped by record type, and the problems found while reading.
    """
    grouped: dict[str, list[Row]] = defaultdict(list)
    problems: list[str] = []
    for path in paths:
        if not path.exists():
            problems.append(f"{path}: no such file")
            continue
        if path.suffix.lower() in (".xlsx", ".xlsm"):
            _read_xlsx(path, grouped, problems)
        elif path.suffix.lower() in (".csv", ".txt"):
            kind = _kind_of(path.name)
            if kind is None:
                problems.append(f"{path.name}: name it after its record type ({', '.join(ORDER)}).csv")
                continue
            try:
                text = path.read_bytes().decode("utf-8-sig")
            except UnicodeDecodeError:
                problems.append(f"{path.name}: is not UTF-8 text")
                continue
            try:
                records = list(csv.reader(io.StringIO(text, newline="")))
            except csv.Error as exc:
                problems.append(f"{path.name}: is not valid CSV ({exc})")
                continue
            header = [h.strip().lower() for h in records[0]] if records else []
            rows = _rows_from_records(path.name, records, problems)
            if records:
                _check_header(kind, path.name, rows, header, problems)
            grouped[kind].extend(rows)
        else:
            problems.append(f"{path.name}: only .csv and .xlsx files can be imported")
    return grouped, problems


def _read_xlsx(path: Path, grouped: dict[str, list[Row]], problems: list[str]) -> None:
    from openpyxl import load_workbook

    try:
        book = load_workbook(path, read_only=True, data_only=True)
    except Exception as exc:  # openpyxl raises many types for a damaged file
        problems.append(f"{path.name}: cannot be read as a workbook ({type(exc).__name__})")
        return
    try:
        for sheet in book.worksheets:
            kind = _kind_of(sheet.title)
            if kind is None:
                continue
            label = f"{path.name}:{sheet.title}"
            records = list(sheet.iter_rows(values_only=True))
            header = [_text(h).lower() for h in records[0]] if records else []
            rows = _rows_from_records(label, records, problems)
            if records:
                _check_header(kind, label, rows, header, problems)
            grouped[kind].extend(rows)
    finally:
        book.close()


# ---- cell parsing -------------------------------------------------------------------------


class _Cells:
    """Typed access to one row's cells; problems are recorded, not raised."""

    def __init__(self, row: Row, problems: _Problems, dayfirst: bool) -> None:
        self.row, self.problems, self.dayfirst = row, problems, dayfirst
        self.bad = False

    def fail(self, column: str, problem: str) -> None:
        self.problems.add(self.row, column, problem)
        self.bad = True

    def text(self, column: str, *, required: bool = False) -> str:
        value = self.row.cells.get(column, "")
        if required and not value:
            self.fail(column, "is required")
        if len(value) > MAX_CELL:
            self.fail(column, f"is longer than {MAX_CELL} characters")
        if "\x00" in value:
            self.fail(column, "contains a NUL character")
        return value

    def day(self, column: str, *, required: bool = False) -> date | None:
        value = self.text(column, required=required)
        if not value:
            return None
        parsed = parse_import_day(value, dayfirst=self.dayfirst)
        if parsed is None:
            hint = "" if self.dayfirst else " (use YYYY-MM-DD, or --dayfirst for DD/MM/YYYY)"
            self.fail(column, f"is not a date{hint}")
        return parsed

    def mass(self, column: str, *, required: bool = False, allow_zero: bool = False) -> int | None:
        value = self.text(column, required=required)
        if not value:
            return None
        try:
            return parse_mass_mg(value, field=column, allow_zero=allow_zero)
        except LedgerError as exc:
            self.fail(column, str(exc).split(": ", 1)[-1].replace(repr(value) + " ", ""))
            return None

    def moment(self, column: str, *, now: datetime) -> datetime | None:
        """An ISO 8601 time with a UTC offset (when the ledger recorded an event)."""
        value = self.text(column)
        if not value:
            return None
        try:
            parsed = datetime.fromisoformat(value.replace("Z", "+00:00"))
        except ValueError:
            self.fail(column, "is not an ISO 8601 time, e.g. 2025-03-14T09:30:00+00:00")
            return None
        if parsed.tzinfo is None:
            self.fail(column, "needs a UTC offset, e.g. +00:00")
            return None
        if parsed > now:
            self.fail(column, "is in the future")
            return None
        return parsed.astimezone(UTC)

    def flag(self, column: str) -> bool:
        value = self.text(column).lower()
        if value in TRUE:
            return True
        if value not in FALSE:
            self.fail(column, "is not yes or no")
        return False

    def choice(
        self, column: str, allowed: Iterable[str], *, required: bool = False, default: str | None = None
    ) -> str | None:
        value = self.text(column, required=required) or default
        options = list(allowed)
        if value is not None and value not in options:
            self.fail(column, f"is not one of {', '.join(options)}")
            return None
        return value

    def refrigerant(self, column: str, *, required: bool = True) -> str | None:
        value = self.text(column, required=required)
        if not value:
            return None
        try:
            return load_reference().lookup(value).designation
        except LedgerError as exc:
            self.fail(column, str(exc).split(" is ", 1)[-1])
            return None


def parse_import_day(value: str, *, dayfirst: bool) -> date | None:
    """ISO dates always; DD/MM/YYYY, DD.MM.YYYY, DD-MM-YYYY only with ``dayfirst``."""
    value = value.strip()
    head = value[:10]
    if len(value) in (10, 19) and head[4:5] == "-" and head[7:8] == "-":
        try:
            return date.fromisoformat(head)
        except ValueError:
            return None
    if not dayfirst:
        return None
    for sep in "/.-":
        parts = value.split(sep)
        if len(parts) == 3 and all(p.isdigit() for p in parts) and len(parts[2]) == 4:
            try:
                return date(int(parts[2]), int(parts[1]), int(parts[0]))
            except ValueError:
                return None
    return None


def content_key(kind: str, cells: dict[str, str]) -> str:
    """SHA-256 over a row's normalised cells: the same row imported twice has one key."""
    body = json.dumps(
        [kind, sorted((k, v.strip()) for k, v in cells.items() if v.strip())], ensure_ascii=False, separators=(",", ":")
    )
    return hashlib.sha256(body.encode()).hexdigest()


# ---- the import ---------------------------------------------------------------------------

ProgressFn = Callable[[int, int], None]


def import_files(
    db: Database,
    paths: Sequence[Path],
    *,
    dayfirst: bool = False,
    dry_run: bool = False,
    progress: ProgressFn | None = None,
) -> ImportSummary:
    """Validate and import records; all or nothing.

    Args:
        db: the open ledger.
        paths: CSV files named after their record type, or XLSX workbooks.
        dayfirst: accept DD/MM/YYYY dates.
        dry_run: check everything and report, but write nothing.
        progress: called as progress(done, total) while events are processed.
    Returns:
        The summary; ``problems`` non-empty means nothing was written.
    """
    grouped, read_problems = read_inputs(paths)
    summary = ImportSummary(dry_run=dry_run)
    if read_problems:
        summary.problems = read_problems
        return summary
    try:
        with db.write() as conn, repo.gc_paused():
            job = _Job(conn, dayfirst, summary, progress)
            job.run(grouped)
            if job.problems.items:
                summary.problems = job.problems.items
                raise _Invalid("import has problems")
            if dry_run:
                raise _Invalid("dry run")
    except _Invalid:
        pass
    return summary


class _Job:
    """One import inside one write transaction."""

    def __init__(self, conn: Any, dayfirst: bool, summary: ImportSummary, progress: ProgressFn | None) -> None:
        self.conn, self.dayfirst, self.summary, self.progress = conn, dayfirst, summary, progress
        self.problems = _Problems()
        self.now = repo.now_utc()  # one recording time for every row that does not bring its own

    def cells(self, row: Row) -> _Cells:
        return _Cells(row, self.problems, self.dayfirst)

    def run(self, grouped: dict[str, list[Row]]) -> None:
        self.sites(grouped.get("sites", []))
        self.technicians(grouped.get("technicians", []))
        self.cylinders(grouped.get("cylinders", []))
        self.systems(grouped.get("systems", []))
        self.events(grouped.get("events", []))

    # -- sites --
    def sites(self, rows: list[Row]) -> None:
        from ledger.services.recording import site_values

        existing = {s.code: s for s in repo.list_sites(conn=self.conn)}
        seen: set[str] = set()
        for row in rows:
            c = self.cells(row)
            code = c.text("code", required=True)
            name = c.text("name", required=True)
            country = c.text("country", required=True)
            if c.bad:
                continue
            if code in seen:
                c.fail("code", "appears twice in the input")
                continue
            seen.add(code)
            try:
                values = site_values(
                    code=code,
                    name=name,
                    country=country,
                    subdivision=c.text("subdivision") or None,
                    timezone=c.text("timezone") or None,
                    regimes=tuple(c.text("regimes").replace(",", " ").split()),
                    leak_rate_method=c.text("leak_rate_method") or None,
                    mass_unit=c.text("unit") or None,
                )
            except LedgerError as exc:
                column = getattr(exc, "field", "code").lstrip("-").replace("-", "_")
                c.fail(column if column in row.cells else "code", str(exc))
                continue
            if code in existing:
                self.summary.skipped["sites"] += 1
                continue
            repo.insert_site(conn=self.conn, values=values)
            self.summary.added["sites"] += 1

    # -- technicians --
    def technicians(self, rows: list[Row]) -> None:
        from sqlalchemy import select

        from ledger.store.tables import certificate, technician

        tech_ids = {r.name: r.id for r in self.conn.execute(select(technician.c.name, technician.c.id))}
        certs = {(r.scheme, r.number) for r in self.conn.execute(select(certificate.c.scheme, certificate.c.number))}
        for row in rows:
            c = self.cells(row)
            name = c.text("name", required=True)
            scheme = c.text("scheme", required=True)
            number = c.text("certificate", required=True)
            valid_from, valid_to = c.day("valid_from"), c.day("valid_to")
            if valid_from and valid_to and valid_to < valid_from:
                c.fail("valid_to", "is before valid_from")
            if c.bad:
                continue
            if (scheme, number) in certs:
                self.summary.skipped["technicians"] += 1
                continue
            cert = Certificate(scheme, number, c.text("category"), valid_from, valid_to)
            if name not in tech_ids:
                tech_ids[name] = repo.insert_technician(
                    conn=self.conn, name=name, company_name=c.text("company") or None, certificates=[cert]
                )
            else:
                repo.add_certificate(conn=self.conn, technician_id=tech_ids[name], cert=cert)
            certs.add((scheme, number))
            self.summary.added["technicians"] += 1

    # -- cylinders --
    def cylinders(self, rows: list[Row]) -> None:
        known = {cy.id: cy for cy in repo.list_cylinders(conn=self.conn)}
        for row in rows:
            c = self.cells(row)
            code = c.text("id", required=True)
            refrigerant = c.refrigerant("refrigerant")
            kind = c.choice("kind", [k.value for k in CylinderKind], required=True)
            tare = c.mass("tare")
            if c.bad:
                continue
            if code in known:
                if known[code].refrigerant != refrigerant:
                    c.fail("refrigerant", f"cylinder {code} is already in the ledger holding {known[code].refrigerant}")
                else:
                    self.summary.skipped["cylinders"] += 1
                continue
            repo.insert_cylinder(
                conn=self.conn, values={"code": code, "refrigerant": refrigerant, "kind": kind, "tare_mg": tare}
            )
            known[code] = Cylinder(code, refrigerant or "", CylinderKind(kind or "virgin"), tare)
            self.summary.added["cylinders"] += 1

    # -- systems --
    def systems(self, rows: list[Row]) -> None:
        sites = {s.code: s for s in repo.list_sites(conn=self.conn)}
        existing = {(s.site_code, s.tag) for s in repo.list_systems(conn=self.conn)}
        techs = self._technicians()
        for row in rows:
            c = self.cells(row)
            site_code, tag = c.text("site", required=True), c.text("tag", required=True)
            refrigerant = c.refrigerant("refrigerant")
            charge = c.mass("charge", required=True)
            application = c.choice("application", [a.value for a in Application], required=True)
            form = c.choice("form", [f.value for f in EquipmentForm], default="other")
            in_service = c.day("in_service", required=True)
            flags = {k: c.flag(k) for k in ("hermetic", "residential", "detection_system")}
            defrost = c.text("defrost_every_hours")
            tech_name = c.text("tech")
            recorded_by = c.text("by") or tech_name or None
            recorded_at = c.moment("recorded_at", now=self.now)
            if site_code and site_code not in sites:
                c.fail("site", "is not a site in the ledger or the input")
            if tech_name and tech_name not in techs:
                c.fail("tech", "is not a technician in the ledger or the input")
            defrost_h = None
            if defrost:
                try:
                    defrost_h = float(defrost)
                    if not 0 < defrost_h <= 168:
                        raise ValueError
                except ValueError:
                    c.fail("defrost_every_hours", "is not a number of hours between 0 and 168")
            if in_service and site_code in sites:
                from ledger.services.recording import site_today

                if in_service > site_today(sites[site_code].timezone):
                    c.fail("in_service", "is in the future")
            if c.bad:
                continue
            if (site_code, tag) in existing:
                self.summary.skipped["systems"] += 1
                continue
            existing.add((site_code, tag))
            system_id = repo.insert_system(
                conn=self.conn,
                site_id=sites[site_code].id,
                values={
                    "tag": tag,
                    "description": c.text("description"),
                    "application": application,
                    "equipment_form": form,
                    "hermetic": flags["hermetic"],
                    "residential": flags["residential"],
                    "location": c.text("location"),
                    "maker": c.text("maker"),
                    "model": c.text("model"),
                    "serial": c.text("serial"),
                    "defrost_every_hours": defrost_h,
                },
            )
            tech_id, cert_id = self._tech_ids(techs, tech_name, in_service)
            common = {
                "system_id": system_id,
                "performed_on": in_service,
                "technician_id": tech_id,
                "certificate_id": cert_id,
                "recorded_by": recorded_by,
                "recorded_at": recorded_at or self.now,
            }
            repo.append_event(
                conn=self.conn, values={**common, "kind": "in-service", "refrigerant": refrigerant, "charge_mg": charge}
            )
            if flags["detection_system"]:
                repo.append_event(conn=self.conn, values={**common, "kind": "detection-on"})
            self.summary.added["systems"] += 1

    def _technicians(self) -> dict[str, tuple[Technician, dict[str, int]]]:
        return {t.name: repo.get_technician(t.name, conn=self.conn) for t in repo.list_technicians(conn=self.conn)}

    @staticmethod
    def _certificate_key(techs: dict[str, tuple[Technician, dict[str, int]]], name: str, on: date) -> str | None:
        """The natural key (``scheme|number``) of the certificate ``_tech_ids`` picks."""
        if not name or name not in techs:
            return None
        valid = [cert for cert in techs[name][0].certificates if cert.valid_on(on)]
        return f"{valid[0].scheme}|{valid[0].number}" if valid else None

    @staticmethod
    def _tech_ids(
        techs: dict[str, tuple[Technician, dict[str, int]]], name: str, on: date | None
    ) -> tuple[int | None, int | None]:
        if not name or name not in techs or on is None:
            return None, None
        tech, cert_ids = techs[name]
        valid = [cert for cert in tech.certificates if cert.valid_on(on)]
        return tech.id, (cert_ids[valid[0].number] if valid else None)

    # -- events --
    def events(self, rows: list[Row]) -> None:
        from ledger.services.recording import placed_on, site_today

        if not rows:
            return
        systems = {(s.site_code, s.tag): s for s in repo.list_systems(conn=self.conn)}
        sites = {s.code: s for s in repo.list_sites(conn=self.conn)}
        cylinders = {cy.id: cy for cy in repo.list_cylinders(conn=self.conn)}
        cylinder_ids = self._cylinder_ids()
        techs = self._technicians()
        touched = {
            systems[k].id for k in {(r.cells.get("site", ""), r.cells.get("tag", "")) for r in rows} if k in systems
        }
        # Lock the touched chains first, then read them: their heads are then the last events
        # loaded (one query, not one per system), and no other writer can extend them meanwhile.
        repo.lock_systems(touched, conn=self.conn)
        history: dict[int, list[Event]] = defaultdict(list)
        for sid, evs in repo.load_event_outlines(touched, conn=self.conn).items():
            history[sid].extend(evs)
        # A row's key holds its site and tag, so a key already in the ledger is on that system:
        # looking the input's keys up in their index reads far less than the touched systems' rows.
        row_keys = [content_key("events", r.cells) for r in rows]
        keys = repo.existing_content_keys(row_keys, conn=self.conn)
        heads: dict[int, str] = {sid: evs[-1].chain_hash or chain.GENESIS for sid, evs in history.items() if evs}
        # chain hash -> (event id, system id, kind); negative ids are rows of this input
        by_hash = _HashIndex(history)
        voided_ids = {e.voids_id for evs in history.values() for e in evs if e.voids_id is not None}
        pending: list[dict[str, Any]] = []
        total = len(rows)
        today_by_site = {code: site_today(s.timezone) for code, s in sites.items()}
        next_temp_id = -1
        for number, row in enumerate(rows, start=1):
            if self.progress and number % 1000 == 0:
                self.progress(number, total)
            c = self.cells(row)
            site_code, tag = c.text("site", required=True), c.text("tag", required=True)
            kind_text = c.choice("kind", sorted(k.value for k in IMPORT_KINDS), required=True)
            on = c.day("on", required=True)
            sys_ = systems.get((site_code, tag))
            if site_code and tag and sys_ is None:
                c.fail("tag", f"{site_code}/{tag} is not a system in the ledger or the input")
            if c.bad or sys_ is None or on is None or kind_text is None:
                continue
            key = row_keys[number - 1]
            if key in keys:
                self.summary.skipped["events"] += 1
                continue
            kind = EventKind(kind_text)
            recorded_at = c.moment("recorded_at", now=self.now) or self.now
            voids_id = None
            target_hash = (c.text("voids") or "").lower() or None
            if kind is EventKind.VOID:
                voids_id = self._void_target(c, target_hash, sys_.id, by_hash, voided_ids)
                if c.bad:
                    continue
            elif target_hash:
                c.fail("voids", "applies only to kind void")
            attachments = c.text("attachments").split()
            if any(len(a) != HASH_LENGTH or any(ch not in "0123456789abcdef" for ch in a) for a in attachments):
                c.fail("attachments", "must be SHA-256 digests (64 hex digits) separated by spaces")
            draft = EventDraft(
                kind=kind,
                performed_on=on,
                mass_mg=c.mass("mass", allow_zero=kind is EventKind.RETIRE),
                refrigerant=c.refrigerant("refrigerant", required=kind is EventKind.RETROFIT),
                charge_mg=c.mass("charge", required=kind in (EventKind.RETROFIT, EventKind.CHARGE_REVISED)),
                result=c.text("result") or None,
                location=c.text("where") or None,
                method=c.text("method") or None,
                destination=c.text("destination") or None,
                cylinder_code=c.text("cylinder") or None,
                cylinder_before_mg=c.mass("before"),
                cylinder_after_mg=c.mass("after"),
                technician=c.text("tech") or None,
                recorded_by=c.text("by") or c.text("tech") or None,
                note=c.text("note"),
                reclaimed=c.flag("reclaimed"),
                voids_id=voids_id,
                reason=c.text("reason") or None,
            )
            if draft.technician and draft.technician not in techs:
                c.fail("tech", "is not a technician in the ledger or the input")
            cylinder = cylinders.get(draft.cylinder_code) if draft.cylinder_code else None
            if draft.cylinder_code and cylinder is None:
                c.fail("cylinder", "is not a cylinder in the ledger or the input")
            if c.bad:
                continue
            mass, weight_findings = cylinder_mass_mg(draft)
            draft = replace(draft, mass_mg=mass)
            state = state_of(history[sys_.id], on)
            tech = techs[draft.technician][0] if draft.technician else None
            findings = weight_findings + validate_event(
                draft,
                state,
                today=today_by_site[site_code],
                same_refrigerant=None
                if not draft.refrigerant or kind is EventKind.RETROFIT
                else draft.refrigerant == state.refrigerant,
                cylinder=cylinder,
                cylinder_matches=None if cylinder is None else cylinder.refrigerant == state.refrigerant,
                technician=tech,
                placed_on=placed_on(history[sys_.id]),
            )
            errors = [f for f in findings if f.severity is Severity.ERROR]
            for f in errors:
                column = _column_for(f)
                c.fail(column, f.message.split(": ", 1)[-1])
            if errors:
                continue
            self.summary.warnings.extend(
                f"{row.source}: {f.message}" for f in findings if f.severity is Severity.WARNING
            )
            tech_id, cert_id = self._tech_ids(techs, draft.technician or "", on)
            values = {
                "system_id": sys_.id,
                "kind": kind.value,
                "performed_on": on,
                "mass_mg": draft.mass_mg,
                "refrigerant": draft.refrigerant if kind is EventKind.RETROFIT else None,
                "charge_mg": draft.charge_mg,
                "result": draft.result,
                "location": draft.location,
                "method": draft.method,
                "destination": draft.destination,
                "cylinder_id": cylinder_ids.get(draft.cylinder_code or ""),
                "cylinder_before_mg": draft.cylinder_before_mg,
                "cylinder_after_mg": draft.cylinder_after_mg,
                "technician_id": tech_id,
                "certificate_id": cert_id,
                "recorded_by": draft.recorded_by,
                "note": draft.note,
                "attachments": " ".join(attachments),
                "reclaimed": draft.reclaimed or (cylinder is not None and cylinder.kind is CylinderKind.RECLAIMED),
                "content_key": key,
                "voids_id": voids_id,
                "reason": draft.reason,
                "recorded_at": recorded_at,
            }
            if sys_.id not in heads:  # a system with no event yet
                heads[sys_.id] = chain.GENESIS
            natural = {
                "system": f"{site_code}/{tag}",
                "technician": draft.technician,
                "certificate": self._certificate_key(techs, draft.technician or "", on),
                "cylinder": draft.cylinder_code,
                "voids": target_hash if kind is EventKind.VOID else None,
            }
            values["prev_hash"] = heads[sys_.id]
            values["chain_hash"] = heads[sys_.id] = chain.link(heads[sys_.id], {**values, **natural})
            pending.append(values)
            keys.add(key)
            by_hash.add(values["chain_hash"], (next_temp_id, sys_.id, kind))
            if voids_id is not None:
                voided_ids.add(voids_id)
            history[sys_.id].append(
                Event(
                    id=next_temp_id,
                    system_id=sys_.id,
                    kind=kind,
                    performed_on=on,
                    mass_mg=draft.mass_mg,
                    refrigerant=values["refrigerant"],
                    charge_mg=draft.charge_mg,
                    result=draft.result,
                    voids_id=voids_id,
                )
            )
            next_temp_id -= 1
        if self.problems.items or not pending:
            return
        self._write_events(pending)
        self.summary.added["events"] += len(pending)
        if self.progress:
            self.progress(total, total)

    def _cylinder_ids(self) -> dict[str, int]:
        from sqlalchemy import select

        from ledger.store.tables import cylinder

        return {r.code: r.id for r in self.conn.execute(select(cylinder.c.code, cylinder.c.id))}

    def _void_target(
        self,
        c: _Cells,
        target_hash: str | None,
        system_id: int,
        by_hash: _HashIndex,
        voided_ids: set[int],
    ) -> int | None:
        """The (possibly provisional, negative) id of the event a void row names; else a problem."""
        if not target_hash:
            c.fail("voids", "is required for kind void: the chain hash of the voided event")
            return None
        if not c.text("reason"):
            c.fail("reason", "is required for kind void")
        found = by_hash.get(target_hash)
        if found is None:
            c.fail("voids", "is not the chain hash of an event in the ledger or earlier in the input")
            return None
        event_id, owner, kind = found
        if owner != system_id:
            c.fail("voids", "names an event of another system")
        elif kind in (EventKind.VOID, EventKind.IN_SERVICE):
            c.fail("voids", f"names a {kind.value} event, which cannot be voided")
        elif event_id in voided_ids:
            c.fail("voids", "names an event that is already voided")
        return event_id

    def _write_events(self, pending: list[dict[str, Any]]) -> None:
        """Insert in input order; a void of a row of this input gets that row's real id."""
        from sqlalchemy import insert, select

        from ledger.store.tables import event as event_table

        hash_of = {-(i + 1): v["chain_hash"] for i, v in enumerate(pending)}
        batch: list[dict[str, Any]] = []
        for values in pending:
            target = values["voids_id"]
            if target is not None and target < 0:
                if batch:
                    self.conn.execute(insert(event_table), batch)
                    batch = []
                values["voids_id"] = self.conn.execute(
                    select(event_table.c.id).where(event_table.c.chain_hash == hash_of[target])
                ).scalar_one()
            batch.append(values)
        if batch:
            self.conn.execute(insert(event_table), batch)


class _HashIndex:
    """Chain hash -> (event id, system id, kind) over the loaded events and this input's rows.

    Only void rows look events up, so the index of the loaded events (a million at estate
    scale) is built on the first lookup; rows accepted before it are kept in order meanwhile.
    """

    def __init__(self, history: dict[int, list[Event]]) -> None:
        # Rows of this input are appended to the history without a chain hash (theirs come
        # with add()), so indexing the events that carry one indexes the loaded events.
        self._history = history
        self._index: dict[str, tuple[int, int, EventKind]] | None = None
        self._added: list[tuple[str, tuple[int, int, EventKind]]] = []

    def add(self, chain_hash: str, entry: tuple[int, int, EventKind]) -> None:
        if self._index is None:
            self._added.append((chain_hash, entry))
        else:
            self._index[chain_hash] = entry

    def get(self, chain_hash: str) -> tuple[int, int, EventKind] | None:
        if self._index is None:
            self._index = {
                e.chain_hash: (e.id, sid, e.kind) for sid, evs in self._history.items() for e in evs if e.chain_hash
            }
            self._index.update(self._added)
            self._added = []
        return self._index.get(chain_hash)


def _column_for(f: Finding) -> str:
    name = (f.field or "").lstrip("-")
    mapping = {
        "on": "on",
        "system": "tag",
        "mass": "mass",
        "recovered": "mass",
        "before": "before",
        "after": "after",
        "before/after": "before",
        "cylinder": "cylinder",
        "result": "result",
        "refrigerant": "refrigerant",
        "destination": "destination",
        "tech": "tech",
    }
    return mapping.get(name, name or "kind")
