"""runs and waste

Revision ID: 0005_runs_waste
Revises: 0004_procedures
Create Date: 2026-12-02 02:16:08.331055
"""

from alembic import op
import sqlalchemy as sa


revision = '0005_runs_waste'
down_revision = '0004_procedures'
branch_labels = None
depends_on = None


def upgrade() -> None:

    op.create_table('runs',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('procedure_id', sa.Integer(), nullable=False),
    sa.Column('lab_id', sa.Integer(), nullable=False),
    sa.Column('researcher_id', sa.Integer(), nullable=False),
    sa.Column('scale', sa.Float(), nullable=False),
    sa.Column('state', sa.String(length=10), nullable=False),
    sa.Column('note', sa.Text(), nullable=True),
    sa.Column('started_at', sa.DateTime(), nullable=False),
    sa.Column('closed_at', sa.DateTime(), nullable=True),
    sa.ForeignKeyConstraint(['lab_id'], ['labs.id'], name=op.f('fk_runs_lab_id_labs')),
    sa.ForeignKeyConstraint(['procedure_id'], ['procedures.id'], name=op.f('fk_runs_procedure_id_procedures')),
    sa.ForeignKeyConstraint(['researcher_id'], ['users.id'], name=op.f('fk_runs_researcher_id_users')),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_runs'))
    )
    with op.batch_alter_table('runs', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_runs_lab_id'), ['lab_id'], unique=False)
        batch_op.create_index(batch_op.f('ix_runs_procedure_id'), ['procedure_id'], unique=False)

    op.create_table('waste_containers',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('label', sa.String(length=80), nullable=False),
    sa.Column('lab_id', sa.Integer(), nullable=False),
    sa.Column('location_id', sa.Integer(), nullable=False),
    sa.Column('stream', sa.String(length=60), nullable=False),
    sa.Column('form', sa.String(length=10), nullable=False),
    sa.Column('capacity_text', sa.String(length=60), nullable=False),
    sa.Column('capacity_micro', sa.BigInteger(), nullable=False),
    sa.Column('acute_hazardous', sa.Boolean(), nullable=False),
    sa.Column('state', sa.String(length=20), nullable=False),
    sa.Column('first_entry_at', sa.DateTime(), nullable=True),
    sa.Column('full_at', sa.DateTime(), nullable=True),
    sa.Column('pickup_requested_at', sa.DateTime(), nullable=True),
    sa.Column('collected_at', sa.DateTime(), nullable=True),
    sa.Column('created_at', sa.DateTime(), nullable=False),
    sa.Column('updated_at', sa.DateTime(), nullable=False),
    sa.Column('retired_at', sa.DateTime(), nullable=True),
    sa.ForeignKeyConstraint(['lab_id'], ['labs.id'], name=op.f('fk_waste_containers_lab_id_labs')),
    sa.ForeignKeyConstraint(['location_id'], ['locations.id'], name=op.f('fk_waste_containers_location_id_locations')),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_waste_containers')),
    sa.UniqueConstraint('label', name=op.f('uq_waste_containers_label'))
    )
    with op.batch_alter_table('waste_containers', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_waste_containers_lab_id'), ['lab_id'], unique=False)
        batch_op.create_index(batch_op.f('ix_waste_containers_location_id'), ['location_id'], unique=False)
        batch_op.create_index(batch_op.f('ix_waste_containers_state'), ['state'], unique=False)
        batch_op.create_index(batch_op.f('ix_waste_containers_stream'), ['stream'], unique=False)

    op.create_table('run_draws',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('run_id', sa.Integer(), nullable=False),
    sa.Column('stock_id', sa.Integer(), nullable=True),
    sa.Column('mixture_id', sa.Integer(), nullable=True),
    sa.Column('amount_text', sa.String(length=60), nullable=False),
    sa.Column('element_mass_ug', sa.JSON(), nullable=False),
    sa.ForeignKeyConstraint(['mixture_id'], ['mixtures.id'], name=op.f('fk_run_draws_mixture_id_mixtures')),
    sa.ForeignKeyConstraint(['run_id'], ['runs.id'], name=op.f('fk_run_draws_run_id_runs')),
    sa.ForeignKeyConstraint(['stock_id'], ['stocks.id'], name=op.f('fk_run_draws_stock_id_stocks')),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_run_draws'))
    )
    with op.batch_alter_table('run_draws', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_run_draws_run_id'), ['run_id'], unique=False)

    op.create_table('run_losses',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('run_id', sa.Integer(), nullable=False),
    sa.Column('description', sa.Text(), nullable=False),
    sa.Column('element_mass_ug', sa.JSON(), nullable=False),
    sa.ForeignKeyConstraint(['run_id'], ['runs.id'], name=op.f('fk_run_losses_run_id_runs')),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_run_losses'))
    )
    with op.batch_alter_table('run_losses', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_run_losses_run_id'), ['run_id'], unique=False)

    op.create_table('run_outputs',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('run_id', sa.Integer(), nullable=False),
    sa.Column('label', sa.String(length=120), nullable=False),
    sa.Column('method', sa.String(length=20), nullable=False),
    sa.Column('description', sa.Text(), nullable=True),
    sa.Column('element_mass_ug', sa.JSON(), nullable=False),
    sa.Column('relative_uncertainty', sa.Float(), nullable=True),
    sa.Column('basis', sa.JSON(), nullable=False),
    sa.ForeignKeyConstraint(['run_id'], ['runs.id'], name=op.f('fk_run_outputs_run_id_runs')),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_run_outputs'))
    )
    with op.batch_alter_table('run_outputs', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_run_outputs_run_id'), ['run_id'], unique=False)

    op.create_table('waste_entries',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('container_id', sa.Integer(), nullable=False),
    sa.Column('run_id', sa.Integer(), nullable=True),
    sa.Column('actor_id', sa.Integer(), nullable=True),
    sa.Column('at', sa.DateTime(), nullable=False),
    sa.Column('description', sa.Text(), nullable=False),
    sa.Column('volume_ul', sa.BigInteger(), nullable=False),
    sa.Column('mass_ug', sa.BigInteger(), nullable=False),
    sa.Column('filterable_solids_percent', sa.Float(), nullable=True),
    sa.Column('reverses_entry_id', sa.Integer(), nullable=True),
    sa.ForeignKeyConstraint(['actor_id'], ['users.id'], name=op.f('fk_waste_entries_actor_id_users')),
    sa.ForeignKeyConstraint(['container_id'], ['waste_containers.id'], name=op.f('fk_waste_entries_container_id_waste_containers')),
    sa.ForeignKeyConstraint(['reverses_entry_id'], ['waste_entries.id'], name=op.f('fk_waste_entries_reverses_entry_id_waste_entries')),
    sa.ForeignKeyConstraint(['run_id'], ['runs.id'], name=op.f('fk_waste_entries_run_id_runs')),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_waste_entries')),
    sa.UniqueConstraint('reverses_entry_id', name=op.f('uq_waste_entries_reverses_entry_id'))
    )
    with op.batch_alter_table('waste_entries', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_waste_entries_at'), ['at'], unique=False)
        batch_op.create_index(batch_op.f('ix_waste_entries_container_id'), ['container_id'], unique=False)
        batch_op.create_index(batch_op.f('ix_waste_entries_run_id'), ['run_id'], unique=False)

    op.create_table('waste_entry_components',
    sa.Column('entry_id', sa.Integer(), nullable=False),
    sa.Column('substance_id', sa.Integer(), nullable=False),
    sa.Column('volume_ul', sa.BigInteger(), nullable=False),
    sa.ForeignKeyConstraint(['entry_id'], ['waste_entries.id'], name=op.f('fk_waste_entry_components_entry_id_waste_entries')),
    sa.ForeignKeyConstraint(['substance_id'], ['substances.id'], name=op.f('fk_waste_entry_components_substance_id_substances')),
    sa.PrimaryKeyConstraint('entry_id', 'substance_id', name=op.f('pk_waste_entry_components'))
    )
    op.create_table('waste_entry_elements',
    sa.Column('entry_id', sa.Integer(), nullable=False),
    sa.Column('element', sa.String(length=3), nullable=False),
    sa.Column('mass_ug', sa.BigInteger(), nullable=False),
    sa.ForeignKeyConstraint(['entry_id'], ['waste_entries.id'], name=op.f('fk_waste_entry_elements_entry_id_waste_entries')),
    sa.PrimaryKeyConstraint('entry_id', 'element', name=op.f('pk_waste_entry_elements'))
    )
    with op.batch_alter_table('waste_entry_elements', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_waste_entry_elements_element'), ['element'], unique=False)




def downgrade() -> None:

    with op.batch_alter_table('waste_entry_elements', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_waste_entry_elements_element'))

    op.drop_table('waste_entry_elements')
    op.drop_table('waste_entry_components')
    with op.batch_alter_table('waste_entries', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_waste_entries_run_id'))
        batch_op.drop_index(batch_op.f('ix_waste_entries_container_id'))
        batch_op.drop_index(batch_op.f('ix_waste_entries_at'))

    op.drop_table('waste_entries')
    with op.batch_alter_table('run_outputs', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_run_outputs_run_id'))

    op.drop_table('run_outputs')
    with op.batch_alter_table('run_losses', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_run_losses_run_id'))

    op.drop_table('run_losses')
    with op.batch_alter_table('run_draws', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_run_draws_run_id'))

    op.drop_table('run_draws')
    with op.batch_alter_table('waste_containers', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_waste_containers_stream'))
        batch_op.drop_index(batch_op.f('ix_waste_containers_state'))
        batch_op.drop_index(batch_op.f('ix_waste_containers_location_id'))
        batch_op.drop_index(batch_op.f('ix_waste_containers_lab_id'))

    op.drop_table('waste_containers')
    with op.batch_alter_table('runs', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_runs_procedure_id'))
        batch_op.drop_index(batch_op.f('ix_runs_lab_id'))

    op.drop_table('runs')

