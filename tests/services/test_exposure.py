"""`refledger exposure` on the demo ledger: at least one system per regime with a date.

Prohibitions and their sources: ledger/reference/servicing.csv (Reg. (EU) 2024/573 Art 13(3)
consolidated text; Reg. (EC) 1005/2009 Art 11(3) from memory; US 2029 reclaim requirement,
secondary); see tests/rules/test_servicing.py for the value checks.
"""

from __future__ import annotations

import json
from datetime import date
from decimal import Decimal
from pathlib import Path

from typer.testing import CliRunner

from ledger.services.exposure import exposure_view
from ledger.store.db import Database, Location

ROOT = Path(__file__).resolve().parents[2]


def _demo(db: Database) -> None:
    from ledger.services.demo import ORDER, correct_at_the_desk
    from ledger.services.importing import import_files

    records = ROOT / "sample_records"
    assert not import_files(db, [records / f"{name}.csv" for name in ORDER]).problems
    correct_at_the_desk(db)


def test_demo_lists_a_dated_system_per_regime(db: Database) -> None:
    from ledger.services.demo import DEMO_AS_OF

    _demo(db)
    view = exposure_view(db, as_of=DEMO_AS_OF)
    by_regime = {}
    for r in view["rows"]:
        by_regime.setdefault(r["regime"], []).append(r)
    assert set(by_regime) >= {"eu", "gb", "us-84c"}
    assert all(isinstance(r["from_on"], date) for r in view["rows"])
    # GB-BRS/CU-22 holds 5.6 kg R-22: the HCFC servicing ban (from 2015, memory) is in force;
    # 5.6 kg x AR4-valued 1810 / 1000 = 10.136 t at stake (gb basis carries AR4 for HCFCs)
    cu22 = next(r for r in by_regime["gb"] if r["system"] == "CU-22")
    assert (cu22["from_on"], cu22["in_force"], cu22["co2e_t"]) == (date(2015, 1, 1), True, Decimal("10.136"))
    # the US reclaim requirement starts in 2029 and is not yet in force on the demo day
    assert {(r["from_on"], r["in_force"]) for r in by_regime["us-84c"]} == {(date(2029, 1, 1), False)}
    assert view["totals"]["gb"]["systems"] >= 1


def test_exposure_command_json(sqlite_location: Location) -> None:
    from ledger.cli.main import app

    db = Database(sqlite_location)
    try:
        _demo(db)
    finally:
        db.close()
    out = CliRunner().invoke(app, ["--db", sqlite_location.url, "exposure", "--as-of", "2026-12-01", "--json"])
    assert out.exit_code == 0, out.output
    data = json.loads(out.output)
    assert any(r["system"] == "RACK-MT" and r["regime"] == "us-84c" for r in data["rows"])
    text = CliRunner().invoke(app, ["--db", sqlite_location.url, "exposure", "--as-of", "2026-12-01"])
    assert "competent authority govern" in text.output and "GB-BRS/CU-22" in text.output
    bad = CliRunner().invoke(app, ["--db", sqlite_location.url, "exposure", "--as-of", "2026-13-01"])
    assert bad.exit_code == 2 and "--as-of" in bad.output
