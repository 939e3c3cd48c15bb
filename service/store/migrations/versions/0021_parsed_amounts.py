"""planned reagent draws keep their amount parsed: kind and exact µg or µL beside the text

Revision ID: 0021_parsed_amounts
Revises: 0019_holding_changes
Create Date: 2026-12-02 16:20:00

Existing draws are parsed once here, as a new draw is when it is written.
"""

from alembic import op
import sqlalchemy as sa


revision = '0021_parsed_amounts'
down_revision = '0020_monthly_totals'
branch_labels = None
depends_on = None


def upgrade() -> None:
    from service.chem.units import exact_micro, parse_quantity  # the one parse of an amount text

    with op.batch_alter_table('reagent_draws') as batch_op:
        batch_op.add_column(sa.Column('amount_kind', sa.String(length=10), nullable=True))
        batch_op.add_column(sa.Column('amount_micro', sa.String(length=48), nullable=True))
    draws = sa.table('reagent_draws', sa.column('id', sa.Integer()), sa.column('amount_text', sa.String()),
                     sa.column('amount_kind', sa.String()), sa.column('amount_micro', sa.String()))
    connection = op.get_bind()
    for ident, text in connection.execute(sa.select(draws.c.id, draws.c.amount_text)).all():
        kind, micro = exact_micro(parse_quantity(text, expect=("mass", "volume"), field=f"reagent_draws.{ident}"))
        connection.execute(draws.update().where(draws.c.id == ident)
                           .values(amount_kind=kind, amount_micro=f"{micro.normalize():f}"))
    with op.batch_alter_table('reagent_draws') as batch_op:
        batch_op.alter_column('amount_kind', existing_type=sa.String(length=10), nullable=False)
        batch_op.alter_column('amount_micro', existing_type=sa.String(length=48), nullable=False)
        batch_op.create_check_constraint(op.f('ck_reagent_draws_amount_kind'), "amount_kind IN ('mass', 'volume')")


def downgrade() -> None:
    with op.batch_alter_table('reagent_draws') as batch_op:
        batch_op.drop_constraint(op.f('ck_reagent_draws_amount_kind'), type_='check')
        batch_op.drop_column('amount_micro')
        batch_op.drop_column('amount_kind')
