"""a run's product kept as a stock: the run and output it came from (an output becomes at most one stock)

Revision ID: 0012_product_stocks
Revises: 0010_idempotency
Create Date: 2026-12-11 09:00:00
"""

from alembic import op
import sqlalchemy as sa


revision = '0012_product_stocks'
down_revision = '0011_mixture_sources'
branch_labels = None
depends_on = None


def upgrade() -> None:
    with op.batch_alter_table('stocks') as batch_op:
        batch_op.add_column(sa.Column('origin_run_id', sa.Integer(), nullable=True))
        batch_op.add_column(sa.Column('origin_output_id', sa.Integer(), nullable=True))
        batch_op.create_index(batch_op.f('ix_stocks_origin_run_id'), ['origin_run_id'], unique=False)
        batch_op.create_unique_constraint(batch_op.f('uq_stocks_origin_output_id'), ['origin_output_id'])
        batch_op.create_foreign_key(batch_op.f('fk_stocks_origin_run_id_runs'), 'runs', ['origin_run_id'], ['id'])
        batch_op.create_foreign_key(batch_op.f('fk_stocks_origin_output_id_run_outputs'), 'run_outputs',
                                    ['origin_output_id'], ['id'])


def downgrade() -> None:
    with op.batch_alter_table('stocks') as batch_op:
        batch_op.drop_constraint(batch_op.f('fk_stocks_origin_output_id_run_outputs'), type_='foreignkey')
        batch_op.drop_constraint(batch_op.f('fk_stocks_origin_run_id_runs'), type_='foreignkey')
        batch_op.drop_constraint(batch_op.f('uq_stocks_origin_output_id'), type_='unique')
        batch_op.drop_index(batch_op.f('ix_stocks_origin_run_id'))
        batch_op.drop_column('origin_output_id')
        batch_op.drop_column('origin_run_id')
