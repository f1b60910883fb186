"""Kept obligations: what `due` computed per site, reused while the site's records are unchanged.

Derived data only (no triggers: rows may be replaced or dropped at any time); see the comment
above ``kept_site`` in tables.py.

Revision ID: 0003
Revises: 0002
Create Date: 2026-12-02 01:30:00
"""

import sqlalchemy as sa
from alembic import op

revision = '0003'
down_revision = '0002'
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table('kept_site',
    sa.Column('site_id', sa.Integer(), nullable=False),
    sa.Column('as_of', sa.Date(), nullable=False),
    sa.Column('fresh_until', sa.Date(), nullable=True),
    sa.Column('rules_key', sa.String(length=64), nullable=False),
    sa.Column('head_event_id', sa.Integer(), nullable=True),
    sa.Column('head_system_id', sa.Integer(), nullable=True),
    sa.Column('computed_at', sa.DateTime(timezone=True), nullable=False),
    sa.ForeignKeyConstraint(['site_id'], ['site.id'], name=op.f('fk_kept_site_site_id_site')),
    sa.PrimaryKeyConstraint('site_id', name=op.f('pk_kept_site'))
    )
    op.create_table('kept_obligation',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('site_id', sa.Integer(), nullable=False),
    sa.Column('system_id', sa.Integer(), nullable=True),
    sa.Column('regime', sa.String(length=20), nullable=False),
    sa.Column('kind', sa.String(length=40), nullable=False),
    sa.Column('due_on', sa.Date(), nullable=False),
    sa.Column('earliest_on', sa.Date(), nullable=True),
    sa.Column('citation', sa.Text(), nullable=False),
    sa.Column('confidence', sa.String(length=20), nullable=False),
    sa.Column('basis_note', sa.Text(), server_default='', nullable=False),
    sa.Column('caused_by', sa.Integer(), nullable=True),
    sa.Column('detail', sa.Text(), server_default='', nullable=False),
    sa.Column('earlier_missed', sa.Integer(), nullable=True),
    sa.ForeignKeyConstraint(['site_id'], ['site.id'], name=op.f('fk_kept_obligation_site_id_site')),
    sa.ForeignKeyConstraint(['system_id'], ['system.id'], name=op.f('fk_kept_obligation_system_id_system')),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_kept_obligation'))
    )
    with op.batch_alter_table('kept_obligation', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_kept_obligation_site_id'), ['site_id'], unique=False)
    op.create_table('kept_finding',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('site_id', sa.Integer(), nullable=False),
    sa.Column('source', sa.Text(), nullable=False),
    sa.Column('message', sa.Text(), nullable=False),
    sa.Column('severity', sa.String(length=10), nullable=False),
    sa.Column('field', sa.String(length=40), nullable=True),
    sa.ForeignKeyConstraint(['site_id'], ['site.id'], name=op.f('fk_kept_finding_site_id_site')),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_kept_finding'))
    )
    with op.batch_alter_table('kept_finding', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_kept_finding_site_id'), ['site_id'], unique=False)


def downgrade() -> None:
    with op.batch_alter_table('kept_finding', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_kept_finding_site_id'))
    op.drop_table('kept_finding')
    with op.batch_alter_table('kept_obligation', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_kept_obligation_site_id'))
    op.drop_table('kept_obligation')
    op.drop_table('kept_site')
