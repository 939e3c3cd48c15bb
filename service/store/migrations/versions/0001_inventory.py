"""inventory: labs, locations, substances, stocks, mixtures

Revision ID: 0001
Revises: 
Create Date: 2026-12-02 00:53:45.679016
"""

from alembic import op
import sqlalchemy as sa


revision = '0001'
down_revision = None
branch_labels = None
depends_on = None


def upgrade() -> None:

    op.create_table('labs',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('code', sa.String(length=40), nullable=False),
    sa.Column('name', sa.String(length=200), nullable=False),
    sa.Column('building', sa.String(length=100), nullable=True),
    sa.Column('created_at', sa.DateTime(), nullable=False),
    sa.Column('updated_at', sa.DateTime(), nullable=False),
    sa.Column('retired_at', sa.DateTime(), nullable=True),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_labs')),
    sa.UniqueConstraint('code', name=op.f('uq_labs_code'))
    )
    op.create_table('substances',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('key', sa.String(length=80), nullable=False),
    sa.Column('name', sa.String(length=200), nullable=False),
    sa.Column('synonyms', sa.JSON(), nullable=False),
    sa.Column('formula', sa.String(length=200), nullable=False),
    sa.Column('cas', sa.String(length=20), nullable=False),
    sa.Column('state', sa.String(length=10), nullable=False),
    sa.Column('density_g_per_ml', sa.Float(), nullable=True),
    sa.Column('flash_point_c', sa.Float(), nullable=True),
    sa.Column('boiling_point_c', sa.Float(), nullable=True),
    sa.Column('autoignition_c', sa.Float(), nullable=True),
    sa.Column('hazard', sa.JSON(), nullable=False),
    sa.Column('flags', sa.JSON(), nullable=False),
    sa.Column('source', sa.Text(), nullable=False),
    sa.Column('physical_source', sa.Text(), nullable=True),
    sa.Column('origin', sa.String(length=20), nullable=False),
    sa.Column('created_at', sa.DateTime(), nullable=False),
    sa.Column('updated_at', sa.DateTime(), nullable=False),
    sa.Column('retired_at', sa.DateTime(), nullable=True),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_substances')),
    sa.UniqueConstraint('key', name=op.f('uq_substances_key'))
    )
    with op.batch_alter_table('substances', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_substances_cas'), ['cas'], unique=False)

    op.create_table('locations',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('lab_id', sa.Integer(), nullable=True),
    sa.Column('building', sa.String(length=100), nullable=False),
    sa.Column('room', sa.String(length=100), nullable=False),
    sa.Column('storage', sa.String(length=200), nullable=False),
    sa.Column('kind', sa.String(length=40), nullable=False),
    sa.Column('created_at', sa.DateTime(), nullable=False),
    sa.Column('updated_at', sa.DateTime(), nullable=False),
    sa.Column('retired_at', sa.DateTime(), nullable=True),
    sa.ForeignKeyConstraint(['lab_id'], ['labs.id'], name=op.f('fk_locations_lab_id_labs')),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_locations')),
    sa.UniqueConstraint('building', 'room', 'storage', name=op.f('uq_locations_building'))
    )
    op.create_table('mixtures',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('label', sa.String(length=80), nullable=False),
    sa.Column('name', sa.String(length=200), nullable=False),
    sa.Column('lab_id', sa.Integer(), nullable=False),
    sa.Column('location_id', sa.Integer(), nullable=False),
    sa.Column('volume_text', sa.String(length=60), nullable=False),
    sa.Column('volume_ul', sa.BigInteger(), nullable=False),
    sa.Column('density_g_per_ml', sa.Float(), nullable=True),
    sa.Column('prepared_on', sa.Date(), nullable=True),
    sa.Column('expires_on', sa.Date(), nullable=True),
    sa.Column('created_at', sa.DateTime(), nullable=False),
    sa.Column('updated_at', sa.DateTime(), nullable=False),
    sa.Column('retired_at', sa.DateTime(), nullable=True),
    sa.ForeignKeyConstraint(['lab_id'], ['labs.id'], name=op.f('fk_mixtures_lab_id_labs')),
    sa.ForeignKeyConstraint(['location_id'], ['locations.id'], name=op.f('fk_mixtures_location_id_locations')),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_mixtures')),
    sa.UniqueConstraint('label', name=op.f('uq_mixtures_label'))
    )
    with op.batch_alter_table('mixtures', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_mixtures_lab_id'), ['lab_id'], unique=False)
        batch_op.create_index(batch_op.f('ix_mixtures_location_id'), ['location_id'], unique=False)

    op.create_table('stocks',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('label', sa.String(length=80), nullable=False),
    sa.Column('substance_id', sa.Integer(), nullable=False),
    sa.Column('lab_id', sa.Integer(), nullable=False),
    sa.Column('location_id', sa.Integer(), nullable=False),
    sa.Column('amount_text', sa.String(length=60), nullable=False),
    sa.Column('quantity_kind', sa.String(length=10), nullable=False),
    sa.Column('quantity_micro', sa.BigInteger(), nullable=False),
    sa.Column('purity_percent', sa.Float(), nullable=False),
    sa.Column('density_g_per_ml', sa.Float(), nullable=True),
    sa.Column('opened_on', sa.Date(), nullable=True),
    sa.Column('expires_on', sa.Date(), nullable=True),
    sa.Column('created_at', sa.DateTime(), nullable=False),
    sa.Column('updated_at', sa.DateTime(), nullable=False),
    sa.Column('retired_at', sa.DateTime(), nullable=True),
    sa.ForeignKeyConstraint(['lab_id'], ['labs.id'], name=op.f('fk_stocks_lab_id_labs')),
    sa.ForeignKeyConstraint(['location_id'], ['locations.id'], name=op.f('fk_stocks_location_id_locations')),
    sa.ForeignKeyConstraint(['substance_id'], ['substances.id'], name=op.f('fk_stocks_substance_id_substances')),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_stocks')),
    sa.UniqueConstraint('label', name=op.f('uq_stocks_label'))
    )
    with op.batch_alter_table('stocks', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_stocks_lab_id'), ['lab_id'], unique=False)
        batch_op.create_index(batch_op.f('ix_stocks_location_id'), ['location_id'], unique=False)
        batch_op.create_index(batch_op.f('ix_stocks_substance_id'), ['substance_id'], unique=False)

    op.create_table('mixture_components',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('mixture_id', sa.Integer(), nullable=False),
    sa.Column('position', sa.Integer(), nullable=False),
    sa.Column('substance_id', sa.Integer(), nullable=False),
    sa.Column('molarity_text', sa.String(length=60), nullable=True),
    sa.Column('mass_fraction', sa.String(length=30), nullable=True),
    sa.Column('volume_fraction', sa.String(length=30), nullable=True),
    sa.ForeignKeyConstraint(['mixture_id'], ['mixtures.id'], name=op.f('fk_mixture_components_mixture_id_mixtures')),
    sa.ForeignKeyConstraint(['substance_id'], ['substances.id'], name=op.f('fk_mixture_components_substance_id_substances')),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_mixture_components'))
    )
    with op.batch_alter_table('mixture_components', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_mixture_components_mixture_id'), ['mixture_id'], unique=False)

    op.create_table('mixture_elements',
    sa.Column('mixture_id', sa.Integer(), nullable=False),
    sa.Column('element', sa.String(length=3), nullable=False),
    sa.Column('mass_ug', sa.BigInteger(), nullable=False),
    sa.ForeignKeyConstraint(['mixture_id'], ['mixtures.id'], name=op.f('fk_mixture_elements_mixture_id_mixtures')),
    sa.PrimaryKeyConstraint('mixture_id', 'element', name=op.f('pk_mixture_elements'))
    )
    with op.batch_alter_table('mixture_elements', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_mixture_elements_element'), ['element'], unique=False)

    op.create_table('stock_elements',
    sa.Column('stock_id', sa.Integer(), nullable=False),
    sa.Column('element', sa.String(length=3), nullable=False),
    sa.Column('mass_ug', sa.BigInteger(), nullable=False),
    sa.ForeignKeyConstraint(['stock_id'], ['stocks.id'], name=op.f('fk_stock_elements_stock_id_stocks')),
    sa.PrimaryKeyConstraint('stock_id', 'element', name=op.f('pk_stock_elements'))
    )
    with op.batch_alter_table('stock_elements', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_stock_elements_element'), ['element'], unique=False)




def downgrade() -> None:

    with op.batch_alter_table('stock_elements', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_stock_elements_element'))

    op.drop_table('stock_elements')
    with op.batch_alter_table('mixture_elements', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_mixture_elements_element'))

    op.drop_table('mixture_elements')
    with op.batch_alter_table('mixture_components', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_mixture_components_mixture_id'))

    op.drop_table('mixture_components')
    with op.batch_alter_table('stocks', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_stocks_substance_id'))
        batch_op.drop_index(batch_op.f('ix_stocks_location_id'))
        batch_op.drop_index(batch_op.f('ix_stocks_lab_id'))

    op.drop_table('stocks')
    with op.batch_alter_table('mixtures', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_mixtures_location_id'))
        batch_op.drop_index(batch_op.f('ix_mixtures_lab_id'))

    op.drop_table('mixtures')
    op.drop_table('locations')
    with op.batch_alter_table('substances', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_substances_cas'))

    op.drop_table('substances')
    op.drop_table('labs')

