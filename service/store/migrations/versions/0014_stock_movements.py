"""stock movements: stocks leaving the inventory by disposal, transfer to another lab or shipment

Revision ID: 0014_stock_movements
Revises: 0010_idempotency
Create Date: 2026-12-05 09:00:00
"""

from alembic import op
import sqlalchemy as sa


revision = '0014_stock_movements'
down_revision = '0013_entry_basis'
branch_labels = None
depends_on = None

# As service.vocab.MOVEMENT_KINDS when this revision was written (a later change needs its own revision).
KINDS = ('dispose', 'transfer', 'ship')


def upgrade() -> None:
    op.create_table('stock_movements',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('stock_id', sa.Integer(), nullable=False),
    sa.Column('kind', sa.String(length=10), nullable=False),
    sa.Column('amount_text', sa.String(length=60), nullable=False),
    sa.Column('quantity_micro', sa.BigInteger(), nullable=False),
    sa.Column('element_mass_ug', sa.JSON(), nullable=False),
    sa.Column('waste_entry_id', sa.Integer(), nullable=True),
    sa.Column('to_stock_id', sa.Integer(), nullable=True),
    sa.Column('destination', sa.String(length=300), nullable=True),
    sa.Column('note', sa.Text(), nullable=True),
    sa.Column('actor_id', sa.Integer(), nullable=True),
    sa.Column('at', sa.DateTime(), nullable=False),
    sa.CheckConstraint("kind IN ({})".format(", ".join(f"'{k}'" for k in KINDS)), name=op.f('ck_stock_movements_kind')),
    sa.ForeignKeyConstraint(['actor_id'], ['users.id'], name=op.f('fk_stock_movements_actor_id_users')),
    sa.ForeignKeyConstraint(['stock_id'], ['stocks.id'], name=op.f('fk_stock_movements_stock_id_stocks')),
    sa.ForeignKeyConstraint(['to_stock_id'], ['stocks.id'], name=op.f('fk_stock_movements_to_stock_id_stocks')),
    sa.ForeignKeyConstraint(['waste_entry_id'], ['waste_entries.id'],
                            name=op.f('fk_stock_movements_waste_entry_id_waste_entries')),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_stock_movements'))
    )
    with op.batch_alter_table('stock_movements', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_stock_movements_at'), ['at'], unique=False)
        batch_op.create_index(batch_op.f('ix_stock_movements_kind'), ['kind'], unique=False)
        batch_op.create_index(batch_op.f('ix_stock_movements_stock_id'), ['stock_id'], unique=False)


def downgrade() -> None:
    with op.batch_alter_table('stock_movements', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_stock_movements_stock_id'))
        batch_op.drop_index(batch_op.f('ix_stock_movements_kind'))
        batch_op.drop_index(batch_op.f('ix_stock_movements_at'))
    op.drop_table('stock_movements')
