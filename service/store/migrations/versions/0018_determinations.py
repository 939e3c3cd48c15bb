"""waste determinations: the safety officer's confirmed waste codes of a container, append-only

Revision ID: 0018_determinations
Revises: 0017_accumulation_areas
Create Date: 2026-12-08 09:00:00
"""

from alembic import op
import sqlalchemy as sa


revision = '0018_determinations'
down_revision = '0017_accumulation_areas'
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table('waste_determinations',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('container_id', sa.Integer(), nullable=False),
    sa.Column('codes', sa.JSON(), nullable=False),
    sa.Column('comment', sa.Text(), nullable=True),
    sa.Column('actor_id', sa.Integer(), nullable=False),
    sa.Column('at', sa.DateTime(), nullable=False),
    sa.ForeignKeyConstraint(['actor_id'], ['users.id'], name=op.f('fk_waste_determinations_actor_id_users')),
    sa.ForeignKeyConstraint(['container_id'], ['waste_containers.id'],
                            name=op.f('fk_waste_determinations_container_id_waste_containers')),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_waste_determinations'))
    )
    with op.batch_alter_table('waste_determinations', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_waste_determinations_at'), ['at'], unique=False)
        batch_op.create_index(batch_op.f('ix_waste_determinations_container_id'), ['container_id'], unique=False)


def downgrade() -> None:
    with op.batch_alter_table('waste_determinations', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_waste_determinations_container_id'))
        batch_op.drop_index(batch_op.f('ix_waste_determinations_at'))
    op.drop_table('waste_determinations')
