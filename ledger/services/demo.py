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


def build_demo(location: Location, *, records: Path, out: Path | None, replace: bool) -> DemoResult:
    """Create (or replace) the demo database, import the sample records, list what is due.

    Args:
        location: the database to build; an existing SQLite file is replaced only with
            ``replace``; any other non-empty database is refused.
        records: folder with sites.csv ... events.csv.
        out: folder for sample reports, or None.
        replace: delete an existing SQLite file first.
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
        listing = due(db, as_of=as_of)
        result = DemoResult(location.url, as_of)
        result.sites = summary.added["sites"]
        result.systems = summary.added["systems"]
        result.events = summary.added["events"] + summary.added["systems"]
        result.warnings = summary.warnings
        result.due = [
            f"{r['due_on']}  {r['status']:<8} {r['kind']:<22} "
            f"{r['site']}/{r['system'] or '(facility)'}  {r['regime']}: {r['basis']}"
            for r in listing.rows
        ]
        if out is not None:
            from ledger.services.samples import write_samples

            result.files = write_samples(db, out, as_of=as_of)
        return result
    finally:
        db.close()
