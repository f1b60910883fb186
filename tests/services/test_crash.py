"""Crash safety: an import killed part-way leaves all of it or none of it, and chains verify."""

from __future__ import annotations

import csv
import os
import signal
import subprocess
import sys
import time
from datetime import date, timedelta
from pathlib import Path

import pytest
from sqlalchemy import func, select

from ledger.services.integrity import verify
from ledger.services.recording import add_site, add_system
from ledger.store.db import Database, Location
from ledger.store.tables import event

ROWS = 6000


def _events_file(folder: Path) -> Path:
    path = folder / "events.csv"
    with path.open("w", newline="", encoding="utf-8") as fh:
        writer = csv.writer(fh)
        writer.writerow(["site", "tag", "kind", "on", "mass", "note"])
        start = date(2022, 1, 1)
        for i in range(ROWS):
            day = (start + timedelta(days=i % 1000)).isoformat()
            writer.writerow(["S", f"T{i % 20}", "add", day, "0.5 kg", f"row {i}"])
    return path


def _count(db: Database) -> int:
    with db.read() as conn:
        return conn.execute(select(func.count()).select_from(event)).scalar_one()


@pytest.mark.parametrize("kill_after", [0.8, 1.6, 2.6])
def test_killed_import_is_all_or_nothing(db: Database, location: Location, tmp_path: Path, kill_after: float) -> None:
    add_site(db, code="S", name="S", country="DE")
    for i in range(20):
        add_system(db, site_code="S", tag=f"T{i}", refrigerant="R-134a", charge_ng=200_000_000_000_000,
                   application="comfort-cooling", in_service_on=date(2021, 1, 1))
    before = _count(db)
    path = _events_file(tmp_path)
    proc = subprocess.Popen(
        [sys.executable, "-m", "ledger.cli.main", "--db", location.url, "import", str(path)],
        stdout=subprocess.PIPE, stderr=subprocess.PIPE, env={**os.environ, "PYTHONUNBUFFERED": "1"},
    )
    time.sleep(kill_after)
    proc.send_signal(signal.SIGKILL)
    proc.wait()
    after = _count(db)
    assert after in (before, before + ROWS)
    assert verify(db).ok
