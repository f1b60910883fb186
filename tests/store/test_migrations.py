"""Migrations: an empty database upgrades to head, and the models agree with the migrations."""

from __future__ import annotations

from alembic import command
from alembic.script import ScriptDirectory
from sqlalchemy import text

from ledger.store.db import HEAD_REVISION, Database, Location, alembic_config, status


def test_head_constant_matches_alembic_head(location: Location) -> None:
    script = ScriptDirectory.from_config(alembic_config(location))
    assert script.get_current_head() == HEAD_REVISION


def test_upgraded_database_has_no_pending_revisions_and_matches_models(location: Location) -> None:
    current, pending = status(location)
    assert current == HEAD_REVISION
    assert pending == []
    # `alembic check` fails if tables.py and the migrations disagree (Alembic >= 1.9).
    command.check(alembic_config(location))


def test_events_are_append_only_in_the_database(location: Location) -> None:
    from ledger.services.recording import add_site, add_system

    db = Database(location)
    add_site(db, code="S1", name="Site", country="DE")
    from datetime import date

    add_system(db, site_code="S1", tag="T1", refrigerant="R-134a", charge_ng=5_000_000_000_000,
               application="comfort-cooling", in_service_on=date(2024, 1, 1))
    for statement in ("UPDATE event SET note = 'x'", "DELETE FROM event"):
        try:
            with db.engine.begin() as conn:
                conn.execute(text(statement))
        except Exception as exc:  # the driver's IntegrityError / RaiseException
            assert "append-only" in str(exc)
        else:
            raise AssertionError(f"{statement} was allowed")
    db.close()


def test_upgrade_from_the_first_revision_keeps_data_and_makes_a_backup(tmp_path) -> None:  # type: ignore[no-untyped-def]
    from datetime import date

    from ledger.services.recording import add_site, add_system
    from ledger.store.db import locate, upgrade

    loc = locate(str(tmp_path / "old.db"))
    command.upgrade(alembic_config(loc), "0001")
    db = Database(loc)
    with db.engine.begin() as conn:
        assert conn.execute(text("SELECT version_num FROM alembic_version")).scalar() == "0001"
    before, after, saved = upgrade(loc)
    assert (before, after) == ("0001", HEAD_REVISION)
    assert saved is not None and saved.name == "old.db.bak-0001" and saved.exists()
    add_site(db, code="S", name="S", country="DE")
    add_system(db, site_code="S", tag="T", refrigerant="R-134a", charge_ng=1_000_000_000_000,
               application="other", in_service_on=date(2024, 1, 1))
    db.close()


def test_commands_refuse_a_database_behind_the_head(tmp_path) -> None:  # type: ignore[no-untyped-def]
    import pytest

    from ledger.errors import SchemaOutOfDate
    from ledger.store.db import locate

    loc = locate(str(tmp_path / "old.db"))
    command.upgrade(alembic_config(loc), "0001")
    with pytest.raises(SchemaOutOfDate, match="refledger db upgrade"):
        with Database(loc).read():
            pass


def test_upgrade_to_0006_chains_every_existing_record(location: Location) -> None:
    """Records written before the record chain existed get their first version, and the
    versions are the ones the ledger itself writes (same canonical form)."""
    from datetime import date

    from sqlalchemy import func, select

    from ledger.services.integrity import verify
    from ledger.services.recording import add_cylinder, add_site, add_system, add_technician
    from ledger.store.tables import record_version
    from ledger.units import parse_mass_ng

    db = Database(location)
    add_site(db, code="S", name="Site", country="DE")
    add_technician(db, name="Ines Okafor", certificate="C-1", scheme="Scheme X", company="Cold Co",
                   valid_from=date(2020, 1, 1))
    add_cylinder(db, code="CY-1", refrigerant="R-134a", kind="virgin", tare_ng=parse_mass_ng("12 kg"))
    add_system(db, site_code="S", tag="T", refrigerant="R-134a", charge_ng=parse_mass_ng("5 kg"),
               application="comfort-cooling", in_service_on=date(2024, 1, 1), hermetic=True)
    with db.read() as conn:
        written = [r.body for r in conn.execute(select(record_version).order_by(record_version.c.id))]
    db.close()
    command.downgrade(alembic_config(location), "0003")
    command.upgrade(alembic_config(location), "head")
    db = Database(location)
    with db.read() as conn:
        rebuilt = [r.body for r in conn.execute(select(record_version).order_by(record_version.c.id))]
        assert conn.execute(select(func.count()).select_from(record_version)).scalar_one() == 6

    def without_time(body: str) -> str:
        import json

        doc = json.loads(body)
        doc.pop("at")
        return json.dumps(doc, sort_keys=True)

    # the same six versions (site, company, technician, certificate, cylinder, system), in
    # the migration's table order rather than the order they were written
    assert sorted(map(without_time, rebuilt)) == sorted(map(without_time, written))
    result = verify(db)
    assert result.ok, result.problems()
    db.close()
