"""the site's own record (its name)

Revision ID: 0006_site
Revises: 0005_runs_waste
Create Date: 2026-12-02 06:10:00
"""

from alembic import op
import sqlalchemy as sa


revision = '0006_site'
down_revision = '0005_runs_waste'
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table('site',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('name', sa.String(length=200), nullable=False),
    sa.Column('updated_at', sa.DateTime(), nullable=False),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_site'))
    )


def downgrade() -> None:
    op.drop_table('site')
