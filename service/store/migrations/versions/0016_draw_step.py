"""the step a planned reagent draw goes into the vessel at

Revision ID: 0016_draw_step
Revises: 0015_waste_ph
Create Date: 2026-12-06 09:30:00
"""

from alembic import op
import sqlalchemy as sa


revision = '0016_draw_step'
down_revision = '0015_waste_ph'
branch_labels = None
depends_on = None


def upgrade() -> None:
    with op.batch_alter_table('reagent_draws') as batch_op:
        batch_op.add_column(sa.Column('step', sa.Integer(), nullable=True))


def downgrade() -> None:
    with op.batch_alter_table('reagent_draws') as batch_op:
        batch_op.drop_column('step')
