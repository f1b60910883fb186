"""Certificate scopes and company certificates.

A personal certificate gets the regime family it was issued under (``scope``: eu, gb,
us-608; empty for certificates recorded before, which keep their date-only meaning) and its
issuer; companies get certificates of their own (Reg. (EU) 2024/573 Art 10, printed on the
logbook). The new certificate columns are NULL on existing rows, so the record chain
(0006), which hashes a column only when it is set, still matches them. Written by hand to
match tables.py (``alembic check`` compares them).

Revision ID: 0007
Revises: 0006
Create Date: 2026-12-03 12:20:00
"""

import sqlalchemy as sa
from alembic import op

revision = '0007'
down_revision = '0006'
branch_labels = None
depends_on = None


def upgrade() -> None:
    with op.batch_alter_table('certificate', schema=None) as batch_op:
        batch_op.add_column(sa.Column('scope', sa.String(length=10), nullable=True))
        batch_op.add_column(sa.Column('issuer', sa.String(length=200), nullable=True))
    op.create_table('company_certificate',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('company_id', sa.Integer(), nullable=False),
    sa.Column('scope', sa.String(length=10), nullable=False),
    sa.Column('number', sa.String(length=100), nullable=False),
    sa.Column('issuer', sa.String(length=200), server_default='', nullable=False),
    sa.Column('valid_from', sa.Date(), nullable=True),
    sa.Column('valid_to', sa.Date(), nullable=True),
    sa.ForeignKeyConstraint(['company_id'], ['company.id'], name=op.f('fk_company_certificate_company_id_company')),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_company_certificate')),
    sa.UniqueConstraint('scope', 'number', name='uq_company_certificate_scope_number')
    )
    with op.batch_alter_table('company_certificate', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_company_certificate_company_id'), ['company_id'], unique=False)


def downgrade() -> None:
    with op.batch_alter_table('company_certificate', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_company_certificate_company_id'))
    op.drop_table('company_certificate')
    with op.batch_alter_table('certificate', schema=None) as batch_op:
        batch_op.drop_column('issuer')
        batch_op.drop_column('scope')
