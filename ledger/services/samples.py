"""Sample reports written by `refledger demo --out DIR`.

One system's logbook (PDF and spreadsheet) and the annual loss summary of the last full year
before the demo's as-of day (PDF and spreadsheet). The logbook shows the system whose record
has the most to show: a voided event first, then the most events.
"""

from __future__ import annotations

import re
from datetime import date
from pathlib import Path

from ledger.domain.records import EventKind, SystemHistory
from ledger.store import repository as repo
from ledger.store.db import Database

_UNSAFE = re.compile(r"[^A-Za-z0-9._-]+")


def file_stem(*parts: str) -> str:
    """A file name stem from codes and tags (anything but letters, digits, . _ - becomes _)."""
    return "-".join(_UNSAFE.sub("_", p).strip("_") or "x" for p in parts)


def showcase(histories: list[SystemHistory]) -> SystemHistory | None:
    """The system whose logbook shows the most: has a voided event, then most events."""
    from ledger.rules import site_profile

    if not histories:
        return None
    return max(
        histories,
        key=lambda h: (
            any(e.kind is EventKind.VOID for e in h.events),
            site_profile(h.site.regimes).leak_rates,  # such logbooks also show the leak-rate table
            len(h.events),
            h.site.code,
            h.system.tag,
        ),
    )


def write_samples(db: Database, out: Path, *, as_of: date, records_from: date | None = None) -> list[Path]:
    """Write the demo's sample reports into ``out``; returns the files written.

    Args:
        db: the demo ledger.
        out: folder for the files (created if missing).
        as_of: the demo's day; the logbook runs to it and the annual summary covers the
            calendar year before it.
        records_from: the day the records begin; the logbook starts there.
    """
    from ledger.exports.pdf import write_annual_pdf, write_logbook_pdf
    from ledger.exports.xlsx import write_annual_xlsx, write_logbook_xlsx
    from ledger.services.reporting import annual_summary, logbook

    out.mkdir(parents=True, exist_ok=True)
    with db.read() as conn:
        histories = repo.load_histories(conn=conn)
    files: list[Path] = []
    chosen = showcase(histories)
    if chosen is not None:
        book = logbook(db, site_code=chosen.site.code, tag=chosen.system.tag, from_on=records_from, to_on=as_of)
        stem = file_stem("logbook", chosen.site.code, chosen.system.tag)
        files.append(write_logbook_pdf(out / f"{stem}.pdf", book))
        files.append(write_logbook_xlsx(out / f"{stem}.xlsx", book))
    year = as_of.year - 1
    summary = annual_summary(db, year=year)
    files.append(write_annual_pdf(out / f"annual-{year}.pdf", summary))
    files.append(write_annual_xlsx(out / f"annual-{year}.xlsx", summary))
    return files
