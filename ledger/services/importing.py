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

from ledger.domain.certificates import WorkFacts, certificate_for
from ledger.domain.drafts import EventDraft, cylinder_mass_ng, validate_event
from ledger.domain.records import (
    Application,
    Cylinder,
    CylinderKind,
    EquipmentForm,
    Event,
    EventKind,
    Finding,
    Severity,
    SystemState,
    Technician,
)
from ledger.domain.state import state_of
from ledger.errors import InputError, LedgerError
from ledger.inputs import COLUMNS, ORDER
from ledger.reference import load_reference
from ledger.rules import site_profile
from ledger.store import chain
from ledger.store import repository as repo
from ledger.store.db import Database
from ledger.units import parse_mass_ng

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
    width = len(names)
    plain_names = all(names)  # no unnamed column: a row of full width maps cell by cell
    rows = []
    for number, values in enumerate(it, start=2):
        # CSV cells are text already (a workbook's may be numbers, dates or None)
        texts = [v.strip() if type(v) is str else _text(v) for v in values]
        if not any(texts):
            continue
        if len(texts) > width and any(texts[width:]):
            problems.append(f"{label} row {number}: has more cells than the header has columns")
            continue
        if plain_names and len(texts) == width:
            cells = dict(zip(names, texts, strict=True))
        else:
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
            return parse_mass_ng(value, field=column, allow_zero=allow_zero)
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


# Every imported row needs two digests of small JSON bodies (its content key and its chain
# hash); json.dumps costs several times as much per call as writing them out here, so they are
# written out, byte for byte as json.dumps(..., ensure_ascii=False) with compact separators
# writes them (tests/services/test_importing_equivalence.py compares the two).
_quote = json.encoder.encode_basestring  # a str as json.dumps(..., ensure_ascii=False) writes it


def content_key(kind: str, cells: dict[str, str]) -> str:
    """SHA-256 over a row's normalised cells: the same row imported twice has one key.

    The digest of ``json.dumps([kind, sorted((column, cell.strip()) for each non-empty cell)],
    ensure_ascii=False, separators=(",", ":"))``.
    """
    items = sorted((k, t) for k, v in cells.items() if (t := v.strip()))
    body = "[" + _quote(kind) + ",[" + ",".join([f"[{_quote(k)},{_quote(t)}]" for k, t in items]) + "]]"
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
        with db.write() as conn, repo.gc_paused(), repo.roomy_page_cache(conn=conn):
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

        if not rows:
            return
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

        if not rows:
            return
        tech_ids = {r.name: r.id for r in self.conn.execute(select(technician.c.name, technician.c.id))}
        certs = {(r.scheme, r.number) for r in self.conn.execute(select(certificate.c.scheme, certificate.c.number))}
        for row in rows:
            c = self.cells(row)
            name = c.text("name", required=True)
            scheme = c.text("scheme", required=True)
            number = c.text("certificate", required=True)
            valid_from, valid_to = c.day("valid_from"), c.day("valid_to")
            cert = None
            if valid_from and valid_to and valid_to < valid_from:
                c.fail("valid_to", "is before valid_from")
            elif number and scheme:
                from ledger.services.recording import certificate_of

                try:
                    cert = certificate_of(number=number, scheme=scheme, scope=c.text("scope"),
                                          category=c.text("category"), valid_from=valid_from, valid_to=valid_to,
                                          issuer=c.text("issuer"))
                except InputError as exc:
                    c.fail(exc.field.lstrip("-"), f"{exc.value!r} {exc.problem}")
            if c.bad or cert is None:
                continue
            if (scheme, number) in certs:
                self.summary.skipped["technicians"] += 1
                continue
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
        if not rows:
            return
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
                conn=self.conn, values={"code": code, "refrigerant": refrigerant, "kind": kind, "tare_ng": tare}
            )
            known[code] = Cylinder(code, refrigerant or "", CylinderKind(kind or "virgin"), tare)
            self.summary.added["cylinders"] += 1

    # -- systems --
    def systems(self, rows: list[Row]) -> None:
        if not rows:
            return
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
            facts = None if in_service is None else WorkFacts(
                EventKind.IN_SERVICE, in_service, sites[site_code].regimes, charge or 0, flags["hermetic"], refrigerant,
                site_profile(sites[site_code].regimes).certificate_scopes)
            tech_id, cert_id, _ = self._tech_ids(techs, tech_name, facts)
            common = {
                "system_id": system_id,
                "performed_on": in_service,
                "technician_id": tech_id,
                "certificate_id": cert_id,
                "recorded_by": recorded_by,
                "recorded_at": recorded_at or self.now,
            }
            repo.append_event(
                conn=self.conn, values={**common, "kind": "in-service", "refrigerant": refrigerant, "charge_ng": charge}
            )
            if flags["detection_system"]:
                repo.append_event(conn=self.conn, values={**common, "kind": "detection-on"})
            self.summary.added["systems"] += 1

    def _technicians(self) -> dict[str, tuple[Technician, dict[str, int]]]:
        """Name -> (technician, certificate number -> certificate row id), as ``get_technician``
        gives them, in two queries."""
        cert_ids = repo.certificate_ids(conn=self.conn)
        return {t.name: (t, cert_ids.get(t.id, {})) for t in repo.list_technicians(conn=self.conn)}

    @staticmethod
    def _tech_ids(
        techs: dict[str, tuple[Technician, dict[str, int]]], name: str, facts: WorkFacts | None
    ) -> tuple[int | None, int | None, str | None]:
        """Technician row id, the row id and natural key (``scheme|number``) of the certificate
        that covers the work (``ledger.domain.certificates``), as ``log`` picks it."""
        if not name or name not in techs or facts is None:
            return None, None, None
        tech, cert_ids = techs[name]
        cert, _ = certificate_for(tech, facts)
        if cert is None:
            return tech.id, None, None
        return tech.id, cert_ids[cert.number], f"{cert.scheme}|{cert.number}"

    # -- events --
    def events(self, rows: list[Row]) -> None:
        from ledger.services.recording import placed_on, site_today

        if not rows:
            return
        conn = self.conn
        systems = repo.system_ids_by_key(conn=conn)
        sites = {s.code: s for s in repo.list_sites(conn=conn)}
        cylinders = {cy.id: cy for cy in repo.list_cylinders(conn=conn)}
        cylinder_ids = self._cylinder_ids()
        techs = self._technicians()
        named = {(r.cells.get("site", ""), r.cells.get("tag", "")) for r in rows}
        touched = {systems[k] for k in named if k in systems}
        # Lock the touched chains first, then read them: their heads are then the newest events,
        # and no other writer can extend them meanwhile.
        repo.lock_systems(touched, conn=conn)
        heads = repo.chain_heads(touched, conn=conn)
        # What validate_event needs of a system's state on a day is its refrigerant, its full
        # charge (which certificate covers work on it) and whether it was retired by then
        # (tests/services/test_importing_equivalence.py holds it to that), and
        # only these kinds decide those: the state folded from them alone is the same. They are
        # a few events per system, found by index, where the whole history is thousands.
        folds: dict[int, list[Event]] = defaultdict(list)
        folds.update(repo.load_events_of_kinds(touched, _FOLD_KINDS, conn=conn))
        # A row's key holds its site and tag, so a key already in the ledger is on that system:
        # looking the input's keys up in their index reads far less than the touched systems' rows.
        row_keys = [content_key("events", r.cells) for r in rows]
        keys = repo.content_keys_present(row_keys, conn=conn)
        # chain hash -> (event id, system id, kind): the events of the touched systems that void
        # rows name (looked up by their hashes), and this input's rows (negative ids)
        by_hash = self._void_targets(rows, touched)
        voided_ids = {e.voids_id for evs in folds.values() for e in evs if e.voids_id is not None}
        if by_hash:
            voided_ids.update(
                vid for sid, vid in repo.voiding_events([v[0] for v in by_hash.values()], conn=conn) if sid in touched
            )
        today_by_site = {code: site_today(s.timezone) for code, s in sites.items()}
        # Per system: the newest day among the events that count for its state, and the state
        # they fold to (its state on that day and every day after); dropped when a row folds in.
        settled: dict[int, tuple[date | None, SystemState]] = {}
        placed: dict[int, date | None] = {}
        people: dict[tuple[str, WorkFacts], tuple[int | None, int | None, str | None]] = {}
        hermetic = repo.hermetic_flags(conn=conn)
        days: dict[str, date] = {}  # "on" cells read so far
        now_text = _utc_text(self.now)
        pending: list[tuple[Any, ...]] = []
        problems = self.problems.items
        warnings = self.summary.warnings
        total = len(rows)
        next_temp_id = -1
        for number, row in enumerate(rows, start=1):
            if self.progress and number % 1000 == 0:
                self.progress(number, total)
            cells = row.cells
            c = self.cells(row)
            # In a clean row (no cell too long, none with a NUL) reading a text cell cannot fail,
            # so the cells are read directly (None when the column is absent); the typed ones
            # go through c whenever they are not empty, as does every cell of any other row.
            joined = "".join(cells.values())
            clean = "\x00" not in joined and (len(joined) <= MAX_CELL or max(map(len, cells.values())) <= MAX_CELL)
            text = cells.get if clean else c.text
            site_code, tag = c.text("site", required=True), c.text("tag", required=True)
            kind = _IMPORTED.get(cells.get("kind", "")) if clean else None
            if kind is None:
                kind_text = c.choice("kind", _KIND_CHOICES, required=True)
                kind = None if kind_text is None else _KINDS[kind_text]
            on = days.get(cells.get("on", "")) if clean else None
            if on is None:
                on = c.day("on", required=True)
                if clean and on is not None:
                    days[cells["on"]] = on
            sid = systems.get((site_code, tag))
            if site_code and tag and sid is None:
                c.fail("tag", f"{site_code}/{tag} is not a system in the ledger or the input")
            if c.bad or sid is None or on is None or kind is None:
                continue
            key = row_keys[number - 1]
            if key in keys:
                self.summary.skipped["events"] += 1
                continue
            recorded_at = c.moment("recorded_at", now=self.now) if cells.get("recorded_at") else None
            recorded_text = now_text if recorded_at is None else _utc_text(recorded_at)
            recorded_at = recorded_at or self.now
            voids_id = None
            target_hash = (text("voids") or "").lower() or None
            if kind is EventKind.VOID:
                voids_id = self._void_target(c, target_hash, sid, by_hash, voided_ids)
                if c.bad:
                    continue
            elif target_hash:
                c.fail("voids", "applies only to kind void")
            attachments = (text("attachments") or "").split()
            if any(len(a) != HASH_LENGTH or any(ch not in "0123456789abcdef" for ch in a) for a in attachments):
                c.fail("attachments", "must be SHA-256 digests (64 hex digits) separated by spaces")
            # an empty typed cell that is not required reads as None (or no) without a problem
            charge_needed = kind in (EventKind.RETROFIT, EventKind.CHARGE_REVISED)
            draft = EventDraft(
                kind=kind,
                performed_on=on,
                mass_ng=c.mass("mass", allow_zero=kind is EventKind.RETIRE) if cells.get("mass") else None,
                refrigerant=c.refrigerant("refrigerant", required=kind is EventKind.RETROFIT)
                if cells.get("refrigerant") or kind is EventKind.RETROFIT
                else None,
                charge_ng=c.mass("charge", required=charge_needed) if cells.get("charge") or charge_needed else None,
                result=text("result") or None,
                location=text("where") or None,
                method=text("method") or None,
                destination=text("destination") or None,
                cylinder_code=text("cylinder") or None,
                cylinder_before_ng=c.mass("before") if cells.get("before") else None,
                cylinder_after_ng=c.mass("after") if cells.get("after") else None,
                technician=text("tech") or None,
                recorded_by=text("by") or text("tech") or None,
                note=text("note") or "",
                reclaimed=c.flag("reclaimed") if cells.get("reclaimed") else False,
                voids_id=voids_id,
                reason=text("reason") or None,
                facility=text("facility") or None,
                facility_certificate=text("facility_certificate") or None,
            )
            if draft.technician and draft.technician not in techs:
                c.fail("tech", "is not a technician in the ledger or the input")
            cylinder = cylinders.get(draft.cylinder_code) if draft.cylinder_code else None
            if draft.cylinder_code and cylinder is None:
                c.fail("cylinder", "is not a cylinder in the ledger or the input")
            if c.bad:
                continue
            mass, weight_findings = cylinder_mass_ng(draft)
            if mass != draft.mass_ng:
                draft = replace(draft, mass_ng=mass)
            fold = settled.get(sid)
            if fold is None:
                counted = folds[sid]
                newest = max((e.performed_on for e in counted), default=None)
                fold = settled[sid] = (newest, state_of(counted, date.max))
            state = fold[1] if fold[0] is None or on >= fold[0] else state_of(folds[sid], on)
            if sid not in placed:
                placed[sid] = placed_on(folds[sid])  # placing in service is never imported nor voided
            tech = techs[draft.technician][0] if draft.technician else None
            facts = WorkFacts(kind, on, sites[site_code].regimes, state.full_charge_ng, hermetic.get(sid, False),
                              state.refrigerant, site_profile(sites[site_code].regimes).certificate_scopes)
            findings = validate_event(
                draft,
                state,
                today=today_by_site[site_code],
                same_refrigerant=None
                if not draft.refrigerant or kind is EventKind.RETROFIT
                else draft.refrigerant == state.refrigerant,
                cylinder=cylinder,
                cylinder_matches=None if cylinder is None else cylinder.refrigerant == state.refrigerant,
                technician=tech,
                placed_on=placed[sid],
                work=facts,
            )
            if weight_findings:
                findings = weight_findings + findings
            if findings:
                errors = [f for f in findings if f.severity is Severity.ERROR]
                for f in errors:
                    column = _column_for(f)
                    c.fail(column, f.message.split(": ", 1)[-1])
                if errors:
                    continue
                warnings.extend(f"{row.source}: {f.message}" for f in findings if f.severity is Severity.WARNING)
            tech_name = draft.technician or ""
            who = people.get((tech_name, facts))
            if who is None:
                who = people[(tech_name, facts)] = self._tech_ids(techs, tech_name, facts)
            tech_id, cert_id, cert_key = who
            refrigerant = draft.refrigerant if kind is EventKind.RETROFIT else None
            attached = " ".join(attachments)
            reclaimed = draft.reclaimed or (cylinder is not None and cylinder.kind is CylinderKind.RECLAIMED)
            prev = heads.get(sid, chain.GENESIS)
            # chain.canonical's fields with their natural keys, as plain JSON values
            chain_hash = _chain_link(
                prev,
                {
                    "system": f"{site_code}/{tag}",
                    "kind": kind.value,
                    "performed_on": on.isoformat(),
                    "recorded_at": recorded_text,
                    "mass_ng": draft.mass_ng,
                    "refrigerant": refrigerant,
                    "charge_ng": draft.charge_ng,
                    "result": draft.result,
                    "location": draft.location,
                    "method": draft.method,
                    "destination": draft.destination,
                    "cylinder": draft.cylinder_code,
                    "cylinder_before_ng": draft.cylinder_before_ng,
                    "cylinder_after_ng": draft.cylinder_after_ng,
                    "technician": draft.technician,
                    "certificate": cert_key,
                    "recorded_by": draft.recorded_by,
                    "note": draft.note,
                    "voids": target_hash if kind is EventKind.VOID else None,
                    "reason": draft.reason,
                    "attachments": attached,
                    "reclaimed": int(reclaimed),
                    "facility": draft.facility,
                    "facility_certificate": draft.facility_certificate,
                    "v": chain.CHAIN_VERSION,
                },
            )
            heads[sid] = chain_hash
            pending.append(
                (  # in _EVENT_COLUMNS order
                    sid, kind.value, on, recorded_at, draft.mass_ng, refrigerant, draft.charge_ng, draft.result,
                    draft.location, draft.method, draft.destination, cylinder_ids.get(draft.cylinder_code or ""),
                    draft.cylinder_before_ng, draft.cylinder_after_ng, tech_id, cert_id, draft.recorded_by,
                    draft.note, attached, reclaimed, key, voids_id, draft.reason, draft.facility,
                    draft.facility_certificate, prev, chain_hash,
                )
            )
            keys.add(key)
            by_hash[chain_hash] = (next_temp_id, sid, kind)
            if voids_id is not None:
                voided_ids.add(voids_id)
            if kind in _FOLD_KINDS:
                folds[sid].append(
                    Event(
                        id=next_temp_id,
                        system_id=sid,
                        kind=kind,
                        performed_on=on,
                        mass_ng=draft.mass_ng,
                        refrigerant=refrigerant,
                        charge_ng=draft.charge_ng,
                        result=draft.result,
                        voids_id=voids_id,
                    )
                )
                settled.pop(sid, None)
            next_temp_id -= 1
        if problems or not pending:
            return
        self._write_events(pending)
        self.summary.added["events"] += len(pending)
        if self.progress:
            self.progress(total, total)

    def _cylinder_ids(self) -> dict[str, int]:
        from sqlalchemy import select

        from ledger.store.tables import cylinder

        return {r.code: r.id for r in self.conn.execute(select(cylinder.c.code, cylinder.c.id))}

    def _void_targets(self, rows: list[Row], touched: set[int]) -> dict[str, tuple[int, int, EventKind]]:
        """Chain hash -> (event id, system id, kind) of the events in the touched systems that
        the input's void rows name (a void must name an event of its own system)."""
        named = {
            text.lower() for r in rows if r.cells.get("kind") == "void" and (text := r.cells.get("voids", ""))
        }
        if not named:
            return {}
        found = repo.events_by_chain_hash(named, conn=self.conn)
        return {h: entry for h, entry in found.items() if entry[1] in touched}

    def _void_target(
        self,
        c: _Cells,
        target_hash: str | None,
        system_id: int,
        by_hash: dict[str, tuple[int, int, EventKind]],
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

    def _write_events(self, pending: list[tuple[Any, ...]]) -> None:
        """Insert in input order; a void of a row of this input gets that row's real id."""
        from sqlalchemy import select

        from ledger.store.tables import event as event_table

        voids_at, hash_at = _EVENT_COLUMNS.index("voids_id"), _EVENT_COLUMNS.index("chain_hash")
        batch: list[tuple[Any, ...]] = []
        for values in pending:
            target = values[voids_at]
            if target is not None and target < 0:
                repo.insert_event_rows(_EVENT_COLUMNS, batch, conn=self.conn)
                batch = []
                real = self.conn.execute(
                    select(event_table.c.id).where(event_table.c.chain_hash == pending[-target - 1][hash_at])
                ).scalar_one()
                values = (*values[:voids_at], real, *values[voids_at + 1 :])
            batch.append(values)
        repo.insert_event_rows(_EVENT_COLUMNS, batch, conn=self.conn)


# The columns an imported event row is written with, in the order _Job.events builds them.
_EVENT_COLUMNS = (
    "system_id", "kind", "performed_on", "recorded_at", "mass_ng", "refrigerant", "charge_ng", "result",
    "location", "method", "destination", "cylinder_id", "cylinder_before_ng", "cylinder_after_ng",
    "technician_id", "certificate_id", "recorded_by", "note", "attachments", "reclaimed", "content_key",
    "voids_id", "reason", "facility", "facility_certificate", "prev_hash", "chain_hash",
)
# The kinds that decide a system's refrigerant and retirement (see _Job.events).
_FOLD_KINDS = frozenset({EventKind.IN_SERVICE, EventKind.RETROFIT, EventKind.RETIRE, EventKind.VOID,
                         EventKind.CHARGE_REVISED})
_KINDS = {k.value: k for k in EventKind}
_KIND_CHOICES = sorted(k.value for k in IMPORT_KINDS)
_IMPORTED = {k.value: k for k in IMPORT_KINDS}
# chain.canonical's JSON object: its keys in sorted order, with the row key each is read from
# and whether it is left out when null (chain.OPTIONAL_FIELDS)
_CANONICAL = tuple(
    (_quote(name) + ":", chain.LEGACY_MASS_KEYS.get(name, name), name in chain.LEGACY_MASS_KEYS,
     name in chain.OPTIONAL_FIELDS)
    for name in sorted((*chain.CANONICAL_FIELDS, *chain.OPTIONAL_FIELDS, "v"))
)


def _utc_text(moment: datetime) -> str:
    """A recording time as chain.canonical writes it."""
    return moment.astimezone(UTC).isoformat(timespec="microseconds")


def _chain_link(prev_hash: str, body: dict[str, Any]) -> str:
    """``chain.link`` of a body that holds the row keys of ``chain.CANONICAL_FIELDS`` (masses
    as ``*_ng``), optionally ``chain.OPTIONAL_FIELDS``, and ``v`` (the chain version), as the
    plain values ``chain.canonical`` makes of them (text, integers, None)."""
    parts = []
    for key, source, is_mass, optional in _CANONICAL:
        v = body.get(source)
        if v is None and optional:
            continue
        if is_mass:
            v = chain.legacy_mg(v)  # ng-rename: keep
        parts.append(key + ("null" if v is None else _quote(v) if type(v) is str else _json_value(v)))
    return hashlib.sha256(f"{prev_hash}\n{{{','.join(parts)}}}".encode()).hexdigest()


def _json_value(value: Any) -> str:
    return str(value) if type(value) is int else json.dumps(value, ensure_ascii=False)


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
        "facility-certificate": "facility_certificate",
    }
    return mapping.get(name, name or "kind")
