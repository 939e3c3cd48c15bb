"""audit: hash-chained audit events and the chain's head row

Revision ID: 0002_audit
Revises: 0001
"""

from alembic import op
import sqlalchemy as sa


revision = '0002_audit'
down_revision = '0001'
branch_labels = None
depends_on = None

GENESIS = '0' * 64


def upgrade() -> None:
    op.create_table('audit_events',
    sa.Column('id', sa.Integer(), autoincrement=False, nullable=False),
    sa.Column('at', sa.DateTime(), nullable=False),
    sa.Column('actor_user_id', sa.Integer(), nullable=True),
    sa.Column('actor_label', sa.Text(), nullable=False),
    sa.Column('entity', sa.String(length=80), nullable=False),
    sa.Column('entity_id', sa.String(length=80), nullable=False),
    sa.Column('action', sa.String(length=80), nullable=False),
    sa.Column('before', sa.JSON(), nullable=True),
    sa.Column('after', sa.JSON(), nullable=True),
    sa.Column('prev_hash', sa.String(length=64), nullable=False),
    sa.Column('hash', sa.String(length=64), nullable=False),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_audit_events'))
    )
    with op.batch_alter_table('audit_events', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_audit_events_at'), ['at'], unique=False)
        batch_op.create_index(batch_op.f('ix_audit_events_actor_user_id'), ['actor_user_id'], unique=False)
        batch_op.create_index('ix_audit_events_entity_entity_id', ['entity', 'entity_id'], unique=False)

    head = op.create_table('audit_head',
    sa.Column('id', sa.Integer(), autoincrement=False, nullable=False),
    sa.Column('last_event_id', sa.Integer(), nullable=False),
    sa.Column('last_hash', sa.String(length=64), nullable=False),
    sa.CheckConstraint('id = 1', name=op.f('ck_audit_head_single_row')),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_audit_head'))
    )
    # The head exists from the start, so appending never has to race to create it.
    op.bulk_insert(head, [{'id': 1, 'last_event_id': 0, 'last_hash': GENESIS}])


def downgrade() -> None:
    op.drop_table('audit_head')
    with op.batch_alter_table('audit_events', schema=None) as batch_op:
        batch_op.drop_index('ix_audit_events_entity_entity_id')
        batch_op.drop_index(batch_op.f('ix_audit_events_actor_user_id'))
        batch_op.drop_index(batch_op.f('ix_audit_events_at'))

    op.drop_table('audit_events')
