"""mixtures prepared from stocks: each component may name the stock or mixture it drew from, the amount and the
element masses it carried; a mixture without sources is marked as received as a solution

Mixtures stored before this revision had their element content computed from their stated concentrations,
so they are marked ``received_as_solution``.

Revision ID: 0011_mixture_sources
Revises: 0010_idempotency
Create Date: 2026-12-05 09:00:00
"""

from alembic import op
import sqlalchemy as sa


revision = '0011_mixture_sources'
down_revision = '0010_idempotency'
branch_labels = None
depends_on = None


def upgrade() -> None:
    with op.batch_alter_table('mixtures') as batch_op:
        batch_op.add_column(sa.Column('received_as_solution', sa.Boolean(), server_default=sa.false(), nullable=False))
    op.execute(sa.text("UPDATE mixtures SET received_as_solution = :yes").bindparams(yes=True))
    with op.batch_alter_table('mixture_components') as batch_op:
        batch_op.add_column(sa.Column('source_stock_id', sa.Integer(), nullable=True))
        batch_op.add_column(sa.Column('source_mixture_id', sa.Integer(), nullable=True))
        batch_op.add_column(sa.Column('amount_text', sa.String(length=60), nullable=True))
        batch_op.add_column(sa.Column('element_mass_ug', sa.JSON(), nullable=True))
        batch_op.create_foreign_key(batch_op.f('fk_mixture_components_source_stock_id_stocks'), 'stocks',
                                    ['source_stock_id'], ['id'])
        batch_op.create_foreign_key(batch_op.f('fk_mixture_components_source_mixture_id_mixtures'), 'mixtures',
                                    ['source_mixture_id'], ['id'])
        batch_op.create_index(batch_op.f('ix_mixture_components_source_stock_id'), ['source_stock_id'], unique=False)
        batch_op.create_index(batch_op.f('ix_mixture_components_source_mixture_id'), ['source_mixture_id'],
                              unique=False)


def downgrade() -> None:
    with op.batch_alter_table('mixture_components') as batch_op:
        batch_op.drop_index(batch_op.f('ix_mixture_components_source_mixture_id'))
        batch_op.drop_index(batch_op.f('ix_mixture_components_source_stock_id'))
        batch_op.drop_constraint(batch_op.f('fk_mixture_components_source_mixture_id_mixtures'), type_='foreignkey')
        batch_op.drop_constraint(batch_op.f('fk_mixture_components_source_stock_id_stocks'), type_='foreignkey')
        batch_op.drop_column('element_mass_ug')
        batch_op.drop_column('amount_text')
        batch_op.drop_column('source_mixture_id')
        batch_op.drop_column('source_stock_id')
    with op.batch_alter_table('mixtures') as batch_op:
        batch_op.drop_column('received_as_solution')
