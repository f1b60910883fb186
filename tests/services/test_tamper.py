"""Tamper evidence against someone with write access, on SQLite and PostgreSQL.

Each test changes the database as a person with direct access could (dropping the triggers
first where they are in the way) and checks that `verify`, or the check against a signed
checkpoint, names what was done. The attacker's side uses the ledger's own hash functions,
as someone who has read docs/integrity.md would.

Cases 1 (an event edited) and 3 (an event deleted from the middle) are
`test_edited_field_is_named` and `test_deleted_row_is_named` in test_integrity.py, on both
engines too.
"""

from __future__ import annotations

from datetime import UTC, date, datetime, timedelta
from pathlib import Path

import pytest
from sqlalchemy import func, insert, select, text

from ledger.domain.drafts import EventDraft
from ledger.domain.records import EventKind
from ledger.services.checkpoints import check_signature, load_checkpoint, make_checkpoint, new_key
from ledger.services.integrity import check_chain, verify
from ledger.services.obligations import due
from ledger.services.recording import add_site, add_system, add_technician, log_event
from ledger.store import chain
from ledger.store.db import Database
from ledger.store.repository import events_with_keys
from ledger.store.tables import event, kept_obligation, kept_site
from ledger.units import parse_mass_ng
from tests.services.test_integrity import _drop_triggers as _drop_event_guards

TECH = "Ines Okafor"  # invented demo name


def _ledger(db: Database) -> list[int]:
    """Site S (DE) with systems A and B; four additions on A by a certified technician."""
    add_site(db, code="S", name="S", country="DE")
    add_technician(db, name=TECH, certificate="CERT-1", scheme="Scheme X", category="I",
                   valid_from=date(2020, 1, 1), valid_to=date(2030, 1, 1))
    for tag in ("A", "B"):
        add_system(db, site_code="S", tag=tag, refrigerant="R-134a", charge_ng=parse_mass_ng("50 kg"),
                   application="comfort-cooling", in_service_on=date(2023, 1, 1))
    return [
        log_event(db, site_code="S", tag="A",
                  draft=EventDraft(kind=EventKind.ADD, performed_on=date(2024, 1, day),
                                   mass_ng=parse_mass_ng(f"{day} kg"), technician=TECH)).event_id
        for day in (1, 2, 3, 4)
    ]


def _checkpoint(db: Database, tmp_path: Path):  # type: ignore[no-untyped-def]
    key = new_key(tmp_path / "signing.key")
    return make_checkpoint(db, key_path=key.private_path, out=tmp_path / "cp.json"), key


def _against(db: Database, tmp_path: Path) -> list[tuple[str, str]]:
    """(chain, what) of every difference from the checkpoint file, read back and signature-checked."""
    found = load_checkpoint(db, str(tmp_path / "cp.json"))
    from ledger.services.checkpoints import load_public_key

    assert check_signature(found, load_public_key(tmp_path / "signing.key.pub")).ok
    return [(b.chain, b.what) for b in verify(db, checkpoint=found.statement).checkpoint_breaks]


def _rows_of(db: Database, tag: str) -> list[dict]:
    with db.read() as conn:
        stmt = events_with_keys().where(text(f"system.tag = '{tag}'")).order_by(event.c.id)
        return [dict(r) for r in conn.execute(stmt).mappings()]


# ---- 2. delete the newest event: invisible to the chain, named by the checkpoint --------------------


def test_deleting_the_newest_event_is_named_by_the_checkpoint(db: Database, tmp_path: Path) -> None:
    ids = _ledger(db)
    _checkpoint(db, tmp_path)
    _drop_event_guards(db)
    with db.engine.begin() as conn:
        conn.execute(text("DELETE FROM event WHERE id = :i"), {"i": ids[-1]})
    plain = verify(db)
    assert plain.breaks == []  # the chain alone cannot tell (docs/integrity.md, threat model)
    assert _against(db, tmp_path) == [("S/A", "removed")]


# ---- 4. insert with a valid hash ------------------------------------------------------------------


def test_an_event_inserted_with_a_valid_hash_before_the_checkpoint_is_named(db: Database, tmp_path: Path) -> None:
    ids = _ledger(db)
    made, _ = _checkpoint(db, tmp_path)
    rows = _rows_of(db, "A")
    forged = {k: v for k, v in rows[-1].items() if k in event.c and k != "id"}
    forged.update(mass_ng=parse_mass_ng("0.524 kg"), performed_on=date(2024, 1, 5),
                  recorded_at=datetime.fromisoformat(made.made_at) - timedelta(days=3))
    forged["prev_hash"] = rows[-1]["chain_hash"]
    forged["chain_hash"] = chain.link(forged["prev_hash"], {**rows[-1], **forged})
    with db.engine.begin() as conn:
        conn.execute(insert(event).values(**forged))
    assert verify(db).breaks == []  # a correctly hashed row at the end holds by itself
    assert _against(db, tmp_path) == [("S/A", "back-dated")]
    assert ids  # the real events are still there


# ---- 5. recompute a whole chain -----------------------------------------------------------------


def test_a_recomputed_chain_is_named_by_the_checkpoint(db: Database, tmp_path: Path) -> None:
    _ledger(db)
    _checkpoint(db, tmp_path)
    _drop_event_guards(db)
    rows = _rows_of(db, "A")
    prev = chain.GENESIS
    with db.engine.begin() as conn:
        for r in rows:
            if r["kind"] == "add" and r["mass_ng"] == parse_mass_ng("2 kg"):
                r["mass_ng"] = parse_mass_ng("0.524 kg")
            r["prev_hash"] = prev
            r["chain_hash"] = prev = chain.link(prev, r)
            conn.execute(text("UPDATE event SET mass_ng = :m, prev_hash = :p, chain_hash = :h WHERE id = :i"),
                         {"m": r["mass_ng"], "p": r["prev_hash"], "h": r["chain_hash"], "i": r["id"]})
    assert verify(db).breaks == []  # internally consistent again
    assert _against(db, tmp_path) == [("S/A", "changed")]


# ---- 6. change a system attribute (no trigger in the way) ------------------------------------------


def test_a_changed_system_attribute_is_named(db: Database) -> None:
    _ledger(db)
    with db.engine.begin() as conn:
        conn.execute(text("UPDATE system SET hermetic = :t WHERE tag = 'B'"), {"t": True})
    result = verify(db)
    assert [(b.table, b.key, b.what) for b in result.record_breaks] == [("system", "S/B", "changed")]
    assert "hermetic 0 -> 1" in result.record_breaks[0].detail
    assert not result.ok and result.breaks == []


def test_a_site_regime_change_and_a_removed_cylinder_row_are_named(db: Database) -> None:
    from ledger.services.recording import add_cylinder

    _ledger(db)
    add_cylinder(db, code="C-1", refrigerant="R-134a", kind="virgin", tare_ng=parse_mass_ng("12 kg"))
    with db.engine.begin() as conn:
        conn.execute(text("UPDATE site SET regimes = 'gb' WHERE code = 'S'"))
        conn.execute(text("DELETE FROM cylinder WHERE code = 'C-1'"))
    got = {(b.table, b.key, b.what) for b in verify(db).record_breaks}
    assert got == {("site", "S", "changed"), ("cylinder", "C-1", "removed")}


# ---- 7. change a certificate -----------------------------------------------------------------------


def test_a_changed_certificate_is_named(db: Database) -> None:
    _ledger(db)
    with db.engine.begin() as conn:
        conn.execute(text("UPDATE certificate SET valid_to = :d"), {"d": date(2023, 12, 31)})
    breaks = verify(db).record_breaks
    assert [(b.table, b.key, b.what) for b in breaks] == [("certificate", "Scheme X|CERT-1", "changed")]
    assert "valid_to '2030-01-01' -> '2023-12-31'" in breaks[0].detail


def test_a_record_version_rewritten_in_place_is_named(db: Database) -> None:
    _ledger(db)
    with db.engine.begin() as conn:
        if conn.dialect.name == "sqlite":
            conn.execute(text("DROP TRIGGER record_version_no_update"))
        else:
            conn.execute(text("DROP TRIGGER record_version_append_only ON record_version"))
        conn.execute(text("UPDATE system SET hermetic = :t WHERE tag = 'B'"), {"t": True})
        conn.execute(text("UPDATE record_version SET body = replace(body, :a, :b) "
                          "WHERE table_name = 'system' AND body LIKE :like"),
                     {"a": '"hermetic":0', "b": '"hermetic":1', "like": '%"tag":"B"%'})
    result = verify(db)
    assert [(b.table, b.what) for b in result.record_breaks] == [("system", "edited")]
    assert any("record_version_" in g for g in result.guards)


# ---- 8. delete or edit kept rows: `due` is unchanged ------------------------------------------------


def test_deleting_or_editing_kept_rows_leaves_due_unchanged(db: Database) -> None:
    _ledger(db)
    day = date(2026, 11, 30)
    first = due(db, as_of=day).rows
    assert first and any(r["status"] == "overdue" for r in first)
    with db.read() as conn:
        assert conn.execute(select(func.count()).select_from(kept_site)).scalar_one() == 1
    with db.engine.begin() as conn:
        conn.execute(kept_obligation.delete().where(
            kept_obligation.c.id == select(func.min(kept_obligation.c.id)).scalar_subquery()))
    assert verify(db).kept == ["site S: kept `due` rows were removed or altered (`due` computes the site again)"]
    assert due(db, as_of=day).rows == first  # recomputed, not silently absent
    with db.engine.begin() as conn:
        conn.execute(kept_obligation.update().values(due_on=date(2099, 1, 1)))
    assert due(db, as_of=day).rows == first
    assert verify(db).kept == []  # `due` kept a fresh, matching set again


def test_an_event_slipped_past_a_dropped_revision_trigger_makes_kept_rows_stale(db: Database) -> None:
    _ledger(db)
    day = date(2026, 11, 30)
    due(db, as_of=day)
    with db.engine.begin() as conn:
        if conn.dialect.name == "sqlite":
            conn.execute(text("DROP TRIGGER event_raises_site_revision"))
        else:
            conn.execute(text("DROP TRIGGER event_raises_site_revision ON event"))
    log_event(db, site_code="S", tag="A", draft=EventDraft(kind=EventKind.CHECK, performed_on=date(2026, 11, 1),
                                                           result="no-leak", method="direct", technician=TECH))
    assert due(db, as_of=day).rows == due(db, as_of=day, recompute=True).rows
    assert any("event_raises_site_revision" in g for g in verify(db).guards)


# ---- 9. drop a trigger -------------------------------------------------------------------------------


def test_a_dropped_append_only_trigger_is_named(db: Database) -> None:
    _ledger(db)
    assert verify(db).guards == []
    _drop_event_guards(db)
    guards = verify(db).guards
    name = "event_no_update" if db.location.is_sqlite else "event_append_only"
    assert f"trigger {name} on table event is missing" in guards


def test_a_trigger_made_harmless_is_named(db: Database) -> None:
    _ledger(db)
    with db.engine.begin() as conn:
        if conn.dialect.name == "sqlite":
            conn.execute(text("DROP TRIGGER filing_no_delete"))
            conn.execute(text("CREATE TRIGGER filing_no_delete BEFORE DELETE ON filing BEGIN SELECT 1; END"))
            want = "trigger filing_no_delete on table filing no longer refuses changes"
        else:
            conn.execute(text("ALTER TABLE filing DISABLE TRIGGER filing_append_only"))
            want = "trigger filing_append_only on table filing is disabled"
    assert want in verify(db).guards


@pytest.mark.parametrize("engine_only", ["postgresql"])
def test_a_rule_on_a_guarded_table_is_named(db: Database, engine_only: str) -> None:
    if db.location.is_sqlite:
        pytest.skip("rules are a PostgreSQL feature")
    _ledger(db)
    with db.engine.begin() as conn:
        conn.execute(text("CREATE RULE keep_quiet AS ON DELETE TO event DO INSTEAD NOTHING"))
    assert "rule keep_quiet on table event may rewrite or silence writes to it" in verify(db).guards


# ---- the checkpoint itself --------------------------------------------------------------------------


def test_an_intact_ledger_holds_against_its_checkpoint_and_later_events_are_fine(db: Database, tmp_path: Path) -> None:
    _ledger(db)
    _checkpoint(db, tmp_path)
    log_event(db, site_code="S", tag="B", draft=EventDraft(kind=EventKind.ADD, performed_on=date(2024, 2, 1),
                                                           mass_ng=parse_mass_ng("1 kg")))
    assert _against(db, tmp_path) == []
    assert verify(db).ok


def test_a_removed_system_is_named_by_the_checkpoint(db: Database, tmp_path: Path) -> None:
    _ledger(db)
    _checkpoint(db, tmp_path)
    _drop_event_guards(db)
    with db.engine.begin() as conn:
        conn.execute(text("DELETE FROM event WHERE system_id = (SELECT id FROM system WHERE tag = 'B')"))
    assert ("S/B", "removed") in _against(db, tmp_path)


def test_a_forged_checkpoint_fails_against_the_auditors_key(db: Database, tmp_path: Path) -> None:
    from ledger.services.checkpoints import load_public_key

    _ledger(db)
    _checkpoint(db, tmp_path)
    other = new_key(tmp_path / "intruder.key")
    forged = make_checkpoint(db, key_path=other.private_path)  # signed with a key of one's own
    assert check_signature(forged).ok  # consistent with the key stored beside it...
    auditor = load_public_key(tmp_path / "signing.key.pub")
    assert not check_signature(forged, auditor).ok  # ...but not with the auditor's copy


def test_check_chain_names_reordering_generically() -> None:
    rows = [{"id": i, "body": str(i)} for i in range(3)]
    prev = chain.GENESIS
    for r in rows:
        r["prev_hash"], r["chain_hash"] = prev, chain.GENESIS
    assert check_chain(rows, lambda p, r: "x")[0] == "edited"


def test_a_checkpoint_refuses_a_broken_ledger(db: Database, tmp_path: Path) -> None:
    from ledger.errors import LedgerError

    _ledger(db)
    with db.engine.begin() as conn:
        conn.execute(text("UPDATE system SET application = 'other' WHERE tag = 'A'"))
    key = new_key(tmp_path / "k")
    with pytest.raises(LedgerError, match="does not verify"):
        make_checkpoint(db, key_path=key.private_path)


def test_now_is_utc() -> None:  # statement times are compared as aware UTC times
    assert datetime.now(UTC).tzinfo is UTC
