"""Build the demo ledger: a fresh database loaded from the sample records."""

from __future__ import annotations

from dataclasses import dataclass, field
from datetime import date
from pathlib import Path

from ledger.errors import Conflict, LedgerError
from ledger.services.importing import ORDER, import_files
from ledger.store.db import Database, Location, upgrade

# The scenario in sample_records/ is written to be seen on this day (its last events are in
# late November 2026); a fixed day keeps the demo's output the same whenever it is run.
DEMO_AS_OF = date(2026, 12, 1)
# The sample records begin here; the sample logbook covers the records, not the years before.
DEMO_RECORDS_FROM = date(2023, 12, 1)


# Web app users of the demo (login, role, technician record, sites): invented like the rest.
DEMO_USERS: tuple[tuple[str, str, str | None, tuple[str, ...]], ...] = (
    ("jana", "technician", "Jana Köhler", ("DE-LEJ", "DE-HAJ")),
    ("marisol", "technician", "Marisol Vega", ("TX-HOU", "TX-DAL")),
    ("greta", "officer", None, ()),
    ("audit", "auditor", None, ()),
    ("admin", "admin", None, ()),
)


@dataclass(slots=True)
class DemoResult:
    """What `refledger demo` built and wrote."""

    url: str
    as_of: date
    sites: int = 0
    systems: int = 0
    events: int = 0
    due: list[str] = field(default_factory=list)
    warnings: list[str] = field(default_factory=list)
    files: list[Path] = field(default_factory=list)
    users: list[tuple[str, str, str]] = field(default_factory=list)  # (login, role, password)


def build_demo(location: Location, *, records: Path, out: Path | None, replace: bool,
               password: str | None = None) -> DemoResult:
    """Create (or replace) the demo database, import the sample records, list what is due.

    Args:
        location: the database to build; an existing SQLite file is replaced only with
            ``replace``; any other non-empty database is refused.
        records: folder with sites.csv ... events.csv.
        out: folder for sample reports, or None.
        replace: delete an existing SQLite file first.
        password: give every demo user this password (tests); default: a new random one each.
    """
    from ledger.services.obligations import due

    path = location.sqlite_path
    if path is not None and path.exists():
        if not replace:
            raise Conflict(f"db: {path} exists; use --replace to rebuild the demo there")
        for suffix in ("", "-wal", "-shm"):
            Path(str(path) + suffix).unlink(missing_ok=True)
    upgrade(location, backup=False)
    files = [records / f"{name}.csv" for name in ORDER]
    missing = [str(f) for f in files if not f.exists()]
    if missing:
        raise LedgerError(f"--records: missing {', '.join(missing)}")
    db = Database(location)
    try:
        summary = import_files(db, files)
        if summary.problems:
            raise LedgerError("demo records do not import cleanly: " + summary.problems[0])
        if summary.added["sites"] == 0 and summary.skipped["sites"]:
            raise Conflict("db: already holds these sites; use an empty database or --replace")
        as_of = DEMO_AS_OF
        if (records / "companies.csv").exists():
            add_company_certificates(db, records / "companies.csv")
        correct_at_the_desk(db)
        file_past_reports(db)
        detectors = records / "detectors"
        reviews = load_detectors(db, location, detectors) if detectors.is_dir() else []
        listing = due(db, as_of=as_of)
        result = DemoResult(location.url, as_of)
        result.sites = summary.added["sites"]
        result.systems = summary.added["systems"]
        result.events = summary.added["events"] + summary.added["systems"]
        result.warnings = summary.warnings
        result.users = add_demo_users(db, password=password)
        result.due = [
            f"{r['due_on']}  {r['status']:<8} {r['kind']:<22} "
            f"{r['site']}/{r['system'] or '(facility)'}  {r['regime']}: {r['basis']}"
            for r in listing.rows
        ]
        if out is not None:
            from ledger.services.samples import write_samples

            result.files = write_samples(db, out, as_of=as_of, records_from=DEMO_RECORDS_FROM)
            if reviews:
                result.files.append(write_review_pdf(reviews[0], out))
        return result
    finally:
        db.close()


def add_demo_users(db: Database, *, password: str | None = None) -> list[tuple[str, str, str]]:
    """Add the demo's web app users; returns (login, role, password) for each."""
    from ledger.services.accounts import add_user, new_password

    made = []
    for name, role, tech, sites in DEMO_USERS:
        secret = password or new_password()
        add_user(db, name=name, role=role, password=secret, technician=tech, sites=sites)
        made.append((name, role, secret))
    return made


def load_detectors(db: Database, location: Location, folder: Path) -> list:
    """Map the demo's detector channels, import their readings and review each channel."""
    import csv

    from ledger.services.detectors import add_channel, import_readings, review

    with (folder / "channels.csv").open(encoding="utf-8") as fh:
        channels = list(csv.DictReader(fh))
    for row in channels:
        site_code, _, tag = row["system"].partition("/")
        add_channel(
            db,
            site_code=row["site"],
            code=row["channel"],
            system_site=site_code,
            system_tag=tag,
            levels=row["levels"],
            night=row["night"],
        )
    for path in sorted(folder.glob("*-readings.csv")):
        import_readings(db, location.readings_root, path, site_code=path.name.split("-readings")[0], tz=None)
    return [
        review(db, location.readings_root, site_code=row["site"], code=row["channel"], start=None, end=None)
        for row in channels
    ]


def write_review_pdf(result, out: Path) -> Path:
    """The demo's detector review PDF for the first channel."""
    from ledger.exports.detector_pdf import write_channel_review

    channel = result.channel
    return write_channel_review(out / f"detector-review-{channel.site_code}-{channel.code}.pdf", result)


def file_past_reports(db: Database) -> None:
    """The Sacramento office filed its California annual reports for 2016 (the rack's first
    year) to 2024, not 2025.

    The unfiled 2025 report stays overdue beside the open 2026 one (17 CCR 95380 ff.).
    """
    from ledger.services.recording import record_filing

    for year in range(2016, 2025):
        filed_on = date(year + 1, 2, 20)
        record_filing(db, site_code="CA-SAC", regime="us-ca", period_year=year, filed_on=filed_on,
                      reference=f"CARB-RMP-{year}-0417", recorded_by="Dana Whitfield")


def add_company_certificates(db: Database, path: Path) -> None:
    """The demo's company certificates (the import format has no sheet for them yet)."""
    import csv

    from ledger.services.recording import add_company_certificate

    with path.open(encoding="utf-8") as fh:
        for row in csv.DictReader(fh):
            add_company_certificate(
                db, company=row["company"], number=row["certificate"], scope=row["scope"], issuer=row["issuer"],
                valid_from=date.fromisoformat(row["valid_from"]) if row["valid_from"] else None,
                valid_to=date.fromisoformat(row["valid_to"]) if row["valid_to"] else None,
            )


def correct_at_the_desk(db: Database) -> None:
    """The office types a top-up as 16 kg instead of 1.6 kg and voids it: shows a correction.

    Made through the services (the import format has no voids, which need an event id).
    """
    from ledger.domain.drafts import EventDraft
    from ledger.domain.records import EventKind
    from ledger.services.recording import log_event, void_event

    wrong = log_event(db, site_code="DE-LEJ", tag="CU-DAIRY", draft=EventDraft(
        kind=EventKind.ADD, performed_on=date(2026, 11, 5), mass_ng=16_000_000_000_000,
        technician="Jana Köhler", recorded_by="Greta Lind", note="from the service sheet"), confirm=True)
    void_event(db, event_id=wrong.event_id, reason="typed 16 kg for 1.6 kg; the 1.6 kg entry of the same day stands",
               recorded_by="Greta Lind")
