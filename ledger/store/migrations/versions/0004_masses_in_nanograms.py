"""Masses in integer nanograms (kg, g, lb and oz all exact); EU Art 6(c) facility fields.

Written by hand. Renames every mass column ``*_mg`` to ``*_ng`` and multiplies its values by
10^6, keeping every record. 1 lb = 453 592 370 000 ng and 1 oz = 28 349 523 125 ng exactly
(international pound, 1959 agreement), which whole milligrams could not hold. A BIGINT holds
9.22e18 ng (about 9 223 t), so a stored value above 9 223 372 036 854 mg stops the upgrade
with a message rather than overflowing.

Events are append-only (triggers of 0001); the triggers are dropped for the one UPDATE and
created again exactly as 0001 made them. The hash chain is unaffected: its canonical form
keeps the keys ``mass_mg`` etc. with the exact milligram value (ledger/store/chain.py), which
for every row migrated here is the same integer that was hashed before.

Also adds ``event.facility`` and ``event.facility_certificate`` (EU 2024/573 Art 6(c): the
recycling, reclamation or destruction facility and its certificate number).

Downgrade divides by 10^6, rounding half away from zero: a mass entered in lb or oz after
this upgrade loses its sub-milligram part, and such an event no longer verifies under the
older code (its hash covered the exact figure).

Revision ID: 0004
Revises: 0003
Create Date: 2026-12-03 12:00:00
"""

import sqlalchemy as sa
from alembic import op

revision = "0004"
down_revision = "0003"
branch_labels = None
depends_on = None

NG_PER_MG = 1_000_000
BIGINT_MAX = 9_223_372_036_854_775_807

# (table, old column, new column)
MASS_COLUMNS = (
    ("cylinder", "tare_mg", "tare_ng"),
    ("event", "mass_mg", "mass_ng"),
    ("event", "charge_mg", "charge_ng"),
    ("event", "cylinder_before_mg", "cylinder_before_ng"),
    ("event", "cylinder_after_mg", "cylinder_after_ng"),
)

APPEND_ONLY_MESSAGE = "events are append-only: record a void event instead"


def upgrade() -> None:
    bind = op.get_bind()
    for table, old, _ in MASS_COLUMNS:
        largest = bind.execute(sa.text(f"SELECT MAX(ABS({old})) FROM {table}")).scalar()
        if largest is not None and int(largest) > BIGINT_MAX // NG_PER_MG:
            raise RuntimeError(
                f"{table}.{old} holds {largest} mg, more than 9 223 t, which nanograms in a "
                "BIGINT cannot hold; correct that record before upgrading"
            )
    _drop_append_only_triggers()
    for table, old, new in MASS_COLUMNS:
        op.execute(f"ALTER TABLE {table} RENAME COLUMN {old} TO {new}")
        op.execute(f"UPDATE {table} SET {new} = {new} * {NG_PER_MG} WHERE {new} IS NOT NULL")
    _create_append_only_triggers()
    # EU 2024/573 Art 6(c): the facility that recycled, reclaimed or destroyed the gas and its
    # certificate number, on the events that move refrigerant (hashed only when set).
    op.add_column("event", sa.Column("facility", sa.Text(), nullable=True))
    op.add_column("event", sa.Column("facility_certificate", sa.String(length=200), nullable=True))
    # Kept results hold masses of the old unit: make every site's kept rows stale.
    op.execute("UPDATE site_revision SET n = n + 1")


def downgrade() -> None:
    half = NG_PER_MG // 2
    # The Art 6(c) facility fields are lost (an event that had them no longer verifies).
    op.execute("ALTER TABLE event DROP COLUMN facility_certificate")
    op.execute("ALTER TABLE event DROP COLUMN facility")
    _drop_append_only_triggers()
    for table, old, new in MASS_COLUMNS:
        op.execute(
            f"UPDATE {table} SET {new} = CASE WHEN {new} >= 0 THEN ({new} + {half}) / {NG_PER_MG} "
            f"ELSE -((-{new} + {half}) / {NG_PER_MG}) END WHERE {new} IS NOT NULL"
        )
        op.execute(f"ALTER TABLE {table} RENAME COLUMN {new} TO {old}")
    _create_append_only_triggers()
    op.execute("UPDATE site_revision SET n = n + 1")


# The append-only guard of 0001, copied so that this revision stands on its own.
def _create_append_only_triggers() -> None:
    if op.get_bind().dialect.name == "sqlite":
        for action in ("UPDATE", "DELETE"):
            op.execute(
                f"CREATE TRIGGER event_no_{action.lower()} BEFORE {action} ON event "
                f"BEGIN SELECT RAISE(ABORT, '{APPEND_ONLY_MESSAGE}'); END"
            )
    else:
        op.execute(
            "CREATE FUNCTION event_append_only() RETURNS trigger LANGUAGE plpgsql AS $$ "
            f"BEGIN RAISE EXCEPTION '{APPEND_ONLY_MESSAGE}'; END $$"
        )
        op.execute(
            "CREATE TRIGGER event_append_only BEFORE UPDATE OR DELETE ON event "
            "FOR EACH ROW EXECUTE FUNCTION event_append_only()"
        )
        op.execute(
            "CREATE TRIGGER event_no_truncate BEFORE TRUNCATE ON event "
            "FOR EACH STATEMENT EXECUTE FUNCTION event_append_only()"
        )


def _drop_append_only_triggers() -> None:
    if op.get_bind().dialect.name == "sqlite":
        op.execute("DROP TRIGGER IF EXISTS event_no_update")
        op.execute("DROP TRIGGER IF EXISTS event_no_delete")
    else:
        op.execute("DROP TRIGGER IF EXISTS event_no_truncate ON event")
        op.execute("DROP TRIGGER IF EXISTS event_append_only ON event")
        op.execute("DROP FUNCTION IF EXISTS event_append_only()")
