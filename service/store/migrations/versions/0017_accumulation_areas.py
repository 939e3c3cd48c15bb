"""accumulation areas: central accumulation area as a location kind; when an area first went over its limit

A location of kind satellite_accumulation_area or central_accumulation_area is an accumulation area.
``locations.over_limit_since`` is set in the transaction of the waste entry that took the area's open
containers over a limit (the rules marked ``area_over_limit``) and cleared when they are back under; the
3-day (40 CFR 262.15(a)(6)) and 10-day (262.208) clocks count from it.

Revision ID: 0017_accumulation_areas
Revises: 0016_draw_step
Create Date: 2026-12-12 09:00:00
"""

from alembic import op
import sqlalchemy as sa


revision = '0017_accumulation_areas'
down_revision = '0016_draw_step'
branch_labels = None
depends_on = None

# As service.vocab.LOCATION_KINDS before and after this revision (a later change needs its own revision).
BEFORE = ('storage', 'satellite_accumulation_area')
AFTER = ('storage', 'satellite_accumulation_area', 'central_accumulation_area')


def _check(kinds) -> str:
    return "kind IN ({})".format(", ".join(f"'{k}'" for k in kinds))


def upgrade() -> None:
    with op.batch_alter_table('locations') as batch_op:
        batch_op.add_column(sa.Column('over_limit_since', sa.DateTime(), nullable=True))
        batch_op.drop_constraint(op.f('ck_locations_kind'), type_='check')
        batch_op.create_check_constraint(op.f('ck_locations_kind'), _check(AFTER))


def downgrade() -> None:
    op.execute("UPDATE locations SET kind = 'storage' WHERE kind = 'central_accumulation_area'")
    with op.batch_alter_table('locations') as batch_op:
        batch_op.drop_constraint(op.f('ck_locations_kind'), type_='check')
        batch_op.create_check_constraint(op.f('ck_locations_kind'), _check(BEFORE))
        batch_op.drop_column('over_limit_since')
