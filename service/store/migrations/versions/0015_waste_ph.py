"""the pH of a waste entry, and the container's pH as last recorded on an entry still standing

Revision ID: 0015_waste_ph
Revises: 0014_stock_movements
Create Date: 2026-12-06 09:00:00
"""

from alembic import op
import sqlalchemy as sa


revision = '0015_waste_ph'
down_revision = '0014_stock_movements'
branch_labels = None
depends_on = None


def upgrade() -> None:
    with op.batch_alter_table('waste_entries') as batch_op:
        batch_op.add_column(sa.Column('ph', sa.Float(), nullable=True))
    with op.batch_alter_table('waste_container_totals') as batch_op:
        batch_op.add_column(sa.Column('ph', sa.Float(), nullable=True))


def downgrade() -> None:
    with op.batch_alter_table('waste_container_totals') as batch_op:
        batch_op.drop_column('ph')
    with op.batch_alter_table('waste_entries') as batch_op:
        batch_op.drop_column('ph')
