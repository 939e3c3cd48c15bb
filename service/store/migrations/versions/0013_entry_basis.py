"""how each element mass of a waste entry was given: a mass, an assay, a share of the run's remainder

Revision ID: 0013_entry_basis
Revises: 0010_idempotency
Create Date: 2026-12-05 09:00:00
"""

from alembic import op
import sqlalchemy as sa


revision = '0013_entry_basis'
down_revision = '0012_product_stocks'
branch_labels = None
depends_on = None


def upgrade() -> None:
    with op.batch_alter_table('waste_entry_elements') as batch_op:
        batch_op.add_column(sa.Column('basis', sa.JSON(), nullable=True))


def downgrade() -> None:
    with op.batch_alter_table('waste_entry_elements') as batch_op:
        batch_op.drop_column('basis')
