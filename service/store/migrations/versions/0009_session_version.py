"""a session version per user: sign-out and a password change end every copy of a session cookie

Revision ID: 0009_session_version
Revises: 0008_container_totals
Create Date: 2026-12-04 09:00:00
"""

from alembic import op
import sqlalchemy as sa


revision = '0009_session_version'
down_revision = '0008_container_totals'
branch_labels = None
depends_on = None


def upgrade() -> None:
    with op.batch_alter_table('users') as batch_op:
        batch_op.add_column(sa.Column('session_version', sa.Integer(), server_default='0', nullable=False))


def downgrade() -> None:
    with op.batch_alter_table('users') as batch_op:
        batch_op.drop_column('session_version')
