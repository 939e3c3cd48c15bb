"""the first answer to each API write sent with an Idempotency-Key, per user

Revision ID: 0010_idempotency
Revises: 0009_session_version
Create Date: 2026-12-04 09:00:00
"""

from alembic import op
import sqlalchemy as sa


revision = '0010_idempotency'
down_revision = '0009_session_version'
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table('idempotency_keys',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('user_id', sa.Integer(), nullable=False),
    sa.Column('key', sa.String(length=200), nullable=False),
    sa.Column('request_sha256', sa.String(length=64), nullable=False),
    sa.Column('status', sa.Integer(), nullable=False),
    sa.Column('content_type', sa.String(length=100), nullable=False),
    sa.Column('location', sa.String(length=500), nullable=True),
    sa.Column('body', sa.Text(), nullable=False),
    sa.Column('created_at', sa.DateTime(), nullable=False),
    sa.ForeignKeyConstraint(['user_id'], ['users.id'], name=op.f('fk_idempotency_keys_user_id_users')),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_idempotency_keys')),
    sa.UniqueConstraint('user_id', 'key', name=op.f('uq_idempotency_keys_user_id'))
    )


def downgrade() -> None:
    op.drop_table('idempotency_keys')
