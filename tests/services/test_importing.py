"""Bulk import: all or nothing, every problem listed, re-import adds nothing, never a traceback."""

from __future__ import annotations

import csv
import json
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from sqlalchemy import func, select

from ledger.services.importing import COLUMNS, import_files, parse_import_day
from ledger.services.obligations import due
from ledger.store.db import Database, Location
from ledger.store.tables import event, site, system

ROOT = Path(__file__).resolve().parents[2]
SAMPLES = ROOT / "sample_records"
ORDER = ("sites", "technicians", "cylinders", "systems", "events")


def _write(folder: Path, kind: str, rows: list[dict[str, str]]) -> Path:
    path = folder / f"{kind}.csv"
    names = sorted({k for r in rows for k in r}) or sorted(COLUMNS[kind][0])
    with path.open("w", newline="", encoding="utf-8") as fh:
        writer = csv.DictWriter(fh, fieldnames=names)
        writer.writeheader()
        writer.writerows(rows)
    return path


def _counts(db: Database) -> tuple[int, int, int]:
    with db.read() as conn:
        return tuple(conn.execute(select(func.count()).select_from(t)).scalar_one() for t in (site, system, event))  # type: ignore[return-value]


BASE = {
    "sites": [{"code": "NL-1", "name": "Utrecht", "country": "NL"}],
    "systems": [
        {
            "site": "NL-1",
            "tag": "R1",
            "refrigerant": "R449A",
            "charge": "60 kg",
            "application": "commercial-refrigeration",
            "in_service": "2022-01-10",
        }
    ],
    "events": [
        {"site": "NL-1", "tag": "R1", "kind": "check", "on": "2024-01-05", "result": "leak-found", "where": "valve"},
        {"site": "NL-1", "tag": "R1", "kind": "repair", "on": "2024-01-06"},
        {"site": "NL-1", "tag": "R1", "kind": "add", "on": "2024-01-06", "mass": "3.5 kg"},
    ],
}


def _files(folder: Path, data: dict[str, list[dict[str, str]]]) -> list[Path]:
    return [_write(folder, k, v) for k, v in data.items()]


def test_import_then_reimport_adds_nothing(db: Database, tmp_path: Path) -> None:
    files = _files(tmp_path, BASE)
    first = import_files(db, files)
    assert first.ok, first.problems
    assert first.added["events"] == 3 and first.added["systems"] == 1
    again = import_files(db, files)
    assert again.ok
    assert again.added == dict.fromkeys(ORDER, 0)
    assert again.skipped["events"] == 3
    assert _counts(db) == (1, 1, 4)  # 3 events + placed in service


def test_every_problem_is_listed_and_nothing_written(db: Database, tmp_path: Path) -> None:
    data = json.loads(json.dumps(BASE))
    data["events"].append({"site": "NL-1", "tag": "R1", "kind": "add", "on": "2024-01-07", "mass": "3.5"})
    data["events"].append({"site": "NL-1", "tag": "R9", "kind": "add", "on": "2024-01-07", "mass": "1 kg"})
    data["events"].append({"site": "NL-1", "tag": "R1", "kind": "add", "on": "07/01/2024", "mass": "1 kg"})
    data["events"].append({"site": "NL-1", "tag": "R1", "kind": "add", "on": "2021-01-07", "mass": "1 kg"})
    summary = import_files(db, _files(tmp_path, data))
    assert not summary.ok
    text = "\n".join(summary.problems)
    assert "events.csv row 5 column mass: '3.5'" in text and "no unit" in text
    assert "events.csv row 6 column tag" in text
    assert "events.csv row 7 column on: '07/01/2024': is not a date" in text
    assert "events.csv row 8 column on" in text and "before the system was placed in service" in text
    assert _counts(db) == (0, 0, 0)


def test_dayfirst_only_when_asked() -> None:
    assert parse_import_day("07/01/2024", dayfirst=False) is None
    assert str(parse_import_day("07/01/2024", dayfirst=True)) == "2024-01-07"
    assert str(parse_import_day("07.01.2024", dayfirst=True)) == "2024-01-07"
    assert parse_import_day("31/02/2024", dayfirst=True) is None
    assert str(parse_import_day("2024-01-07", dayfirst=False)) == "2024-01-07"


def test_unknown_and_missing_columns(db: Database, tmp_path: Path) -> None:
    path = tmp_path / "sites.csv"
    path.write_text("code,name,contry\nX,Y,DE\n", encoding="utf-8")
    summary = import_files(db, [path])
    assert any("missing column(s) country" in p for p in summary.problems)
    assert any("unknown column(s) contry" in p for p in summary.problems)


def test_template_is_a_valid_import(db: Database, tmp_path: Path) -> None:
    from ledger.exports.template import write_template

    path = tmp_path / "template.xlsx"
    write_template(path)
    summary = import_files(db, [path])
    assert summary.ok, summary.problems
    assert summary.added["events"] == 1 and summary.added["systems"] == 1


def test_demo_records_round_trip_through_a_workbook(sqlite_location: Location, tmp_path: Path) -> None:
    """Acceptance: the demo's own records, exported to a spreadsheet and re-imported into an
    empty ledger, give the same `due` output and the same chain heads."""
    from datetime import date

    from ledger.services.backup import export_workbook
    from ledger.services.demo import correct_at_the_desk
    from ledger.services.integrity import verify
    from ledger.store.db import upgrade

    first = Database(sqlite_location)
    assert import_files(first, [SAMPLES / f"{k}.csv" for k in ORDER]).ok
    correct_at_the_desk(first)  # a void, so the workbook carries one
    path = tmp_path / "demo.xlsx"
    counts = export_workbook(first, path)
    assert counts["events"] > 400
    second_loc = Location("sqlite:///" + str(tmp_path / "second.db"), "test")
    upgrade(second_loc, backup=False)
    second = Database(second_loc)
    summary = import_files(second, [path])
    assert summary.ok, summary.problems[:3]
    day = date(2026, 12, 1)
    def without_ids(rows: list[dict]) -> list[dict]:  # event ids are local to a database
        return [{k: v for k, v in r.items() if k not in ("caused_by", "met_by")} for r in rows]

    assert without_ids(due(first, as_of=day).rows) == without_ids(due(second, as_of=day).rows)
    a, b = verify(first), verify(second)
    assert a.ok and b.ok
    assert a.heads == b.heads
    # and sending the workbook again adds nothing
    again = import_files(second, [path])
    assert again.ok and sum(again.added.values()) == 0


def test_void_rows_name_the_voided_event_by_hash(db: Database, tmp_path: Path) -> None:
    data = json.loads(json.dumps(BASE))
    files = _files(tmp_path, data)
    assert import_files(db, files).ok
    from ledger.services.integrity import verify

    with db.read() as conn:
        target = conn.execute(select(event.c.chain_hash).where(event.c.kind == "add")).scalar_one()
    void = tmp_path / "v"
    void.mkdir()
    rows = [{"site": "NL-1", "tag": "R1", "kind": "void", "on": "2024-01-06", "voids": target,
             "reason": "double entry"}]
    assert import_files(db, [_write(void, "events", rows)]).ok
    bad = tmp_path / "b"
    bad.mkdir()
    rows = [{"site": "NL-1", "tag": "R1", "kind": "void", "on": "2024-01-06", "voids": target, "reason": "again"},
            {"site": "NL-1", "tag": "R1", "kind": "void", "on": "2024-01-06", "voids": "0" * 64, "reason": "x"}]
    summary = import_files(db, [_write(bad, "events", rows)])
    assert any("already voided" in p for p in summary.problems)
    assert any("is not the chain hash" in p for p in summary.problems)
    assert verify(db).ok


cell = st.one_of(
    st.text(max_size=30),
    st.sampled_from(
        [
            "",
            "1 kg",
            "-5 kg",
            "1e999 kg",
            "2024-02-30",
            "NaN kg",
            "=SUM(A1)",
            "R-404A",
            "yes",
            "9" * 40,
            "\x00",
            "ﬁ",
            "😀",
            "2024-01-01",
        ]
    ),
)


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(
    kind=st.sampled_from(ORDER),
    header=st.lists(
        st.sampled_from(sorted(set().union(*[r | o for r, o in COLUMNS.values()]) | {"bogus"})), max_size=8
    ),
    rows=st.lists(st.lists(cell, max_size=9), max_size=6),
)
def test_fuzzed_files_never_crash_and_never_write_partially(
    location: Location,
    tmp_path_factory: pytest.TempPathFactory,
    kind: str,
    header: list[str],
    rows: list[list[str]],
) -> None:
    db = Database(location)
    folder = tmp_path_factory.mktemp("fuzz")
    path = folder / f"{kind}.csv"
    with path.open("w", newline="", encoding="utf-8") as fh:
        writer = csv.writer(fh)
        writer.writerow(header)
        writer.writerows(rows)
    before = _counts(db)
    summary = import_files(db, [path])
    if not summary.ok:
        assert _counts(db) == before
    db.close()


@settings(max_examples=15, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(blob=st.binary(max_size=300))
def test_fuzzed_bytes_never_crash(
    location: Location, tmp_path_factory: pytest.TempPathFactory, blob: bytes
) -> None:
    db = Database(location)
    folder = tmp_path_factory.mktemp("bytes")
    for name in ("events.csv", "book.xlsx"):
        (folder / name).write_bytes(blob)
        summary = import_files(db, [folder / name])
        assert summary.ok or summary.problems
    assert _counts(db) == (0, 0, 0)
    db.close()


def test_empty_file(db: Database, tmp_path: Path) -> None:
    path = tmp_path / "events.csv"
    path.write_text("", encoding="utf-8")
    summary = import_files(db, [path])
    assert summary.problems and "empty" in summary.problems[0]
