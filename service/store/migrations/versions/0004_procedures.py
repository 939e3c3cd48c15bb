"""procedures

Revision ID: 0004_procedures
Revises: 0003_identity
Create Date: 2026-12-02 01:59:54.075566
"""

from alembic import op
import sqlalchemy as sa


revision = '0004_procedures'
down_revision = '0003_identity'
branch_labels = None
depends_on = None


def upgrade() -> None:

    op.create_table('procedures',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('family_id', sa.Integer(), nullable=True),
    sa.Column('revision', sa.Integer(), nullable=False),
    sa.Column('revision_of_id', sa.Integer(), nullable=True),
    sa.Column('lab_id', sa.Integer(), nullable=False),
    sa.Column('researcher_id', sa.Integer(), nullable=False),
    sa.Column('title', sa.String(length=300), nullable=False),
    sa.Column('summary', sa.Text(), nullable=True),
    sa.Column('scale', sa.Float(), nullable=False),
    sa.Column('state', sa.String(length=20), nullable=False),
    sa.Column('submitted_at', sa.DateTime(), nullable=True),
    sa.Column('decided_at', sa.DateTime(), nullable=True),
    sa.Column('decided_by_id', sa.Integer(), nullable=True),
    sa.Column('decision_comment', sa.Text(), nullable=True),
    sa.Column('created_at', sa.DateTime(), nullable=False),
    sa.Column('updated_at', sa.DateTime(), nullable=False),
    sa.Column('retired_at', sa.DateTime(), nullable=True),
    sa.ForeignKeyConstraint(['decided_by_id'], ['users.id'], name=op.f('fk_procedures_decided_by_id_users')),
    sa.ForeignKeyConstraint(['lab_id'], ['labs.id'], name=op.f('fk_procedures_lab_id_labs')),
    sa.ForeignKeyConstraint(['researcher_id'], ['users.id'], name=op.f('fk_procedures_researcher_id_users')),
    sa.ForeignKeyConstraint(['revision_of_id'], ['procedures.id'], name=op.f('fk_procedures_revision_of_id_procedures')),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_procedures'))
    )
    with op.batch_alter_table('procedures', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_procedures_family_id'), ['family_id'], unique=False)
        batch_op.create_index(batch_op.f('ix_procedures_lab_id'), ['lab_id'], unique=False)
        batch_op.create_index(batch_op.f('ix_procedures_researcher_id'), ['researcher_id'], unique=False)
        batch_op.create_index(batch_op.f('ix_procedures_state'), ['state'], unique=False)

    op.create_table('procedure_decisions',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('procedure_id', sa.Integer(), nullable=False),
    sa.Column('actor_id', sa.Integer(), nullable=False),
    sa.Column('from_state', sa.String(length=20), nullable=False),
    sa.Column('to_state', sa.String(length=20), nullable=False),
    sa.Column('comment', sa.Text(), nullable=True),
    sa.Column('highest_level', sa.String(length=10), nullable=True),
    sa.Column('at', sa.DateTime(), nullable=False),
    sa.ForeignKeyConstraint(['actor_id'], ['users.id'], name=op.f('fk_procedure_decisions_actor_id_users')),
    sa.ForeignKeyConstraint(['procedure_id'], ['procedures.id'], name=op.f('fk_procedure_decisions_procedure_id_procedures')),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_procedure_decisions'))
    )
    with op.batch_alter_table('procedure_decisions', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_procedure_decisions_procedure_id'), ['procedure_id'], unique=False)

    op.create_table('procedure_steps',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('procedure_id', sa.Integer(), nullable=False),
    sa.Column('position', sa.Integer(), nullable=False),
    sa.Column('operation', sa.String(length=40), nullable=False),
    sa.Column('temperature_c', sa.Float(), nullable=True),
    sa.Column('atmosphere', sa.String(length=20), nullable=True),
    sa.Column('duration_min', sa.Float(), nullable=True),
    sa.Column('note', sa.Text(), nullable=True),
    sa.ForeignKeyConstraint(['procedure_id'], ['procedures.id'], name=op.f('fk_procedure_steps_procedure_id_procedures')),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_procedure_steps'))
    )
    with op.batch_alter_table('procedure_steps', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_procedure_steps_procedure_id'), ['procedure_id'], unique=False)

    op.create_table('waste_plan_items',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('procedure_id', sa.Integer(), nullable=False),
    sa.Column('position', sa.Integer(), nullable=False),
    sa.Column('stream', sa.String(length=60), nullable=False),
    sa.Column('contents', sa.Text(), nullable=False),
    sa.Column('expected_amount', sa.String(length=60), nullable=True),
    sa.ForeignKeyConstraint(['procedure_id'], ['procedures.id'], name=op.f('fk_waste_plan_items_procedure_id_procedures')),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_waste_plan_items'))
    )
    with op.batch_alter_table('waste_plan_items', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_waste_plan_items_procedure_id'), ['procedure_id'], unique=False)

    op.create_table('reagent_draws',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('procedure_id', sa.Integer(), nullable=False),
    sa.Column('position', sa.Integer(), nullable=False),
    sa.Column('stock_id', sa.Integer(), nullable=True),
    sa.Column('mixture_id', sa.Integer(), nullable=True),
    sa.Column('amount_text', sa.String(length=60), nullable=False),
    sa.ForeignKeyConstraint(['mixture_id'], ['mixtures.id'], name=op.f('fk_reagent_draws_mixture_id_mixtures')),
    sa.ForeignKeyConstraint(['procedure_id'], ['procedures.id'], name=op.f('fk_reagent_draws_procedure_id_procedures')),
    sa.ForeignKeyConstraint(['stock_id'], ['stocks.id'], name=op.f('fk_reagent_draws_stock_id_stocks')),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_reagent_draws'))
    )
    with op.batch_alter_table('reagent_draws', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_reagent_draws_procedure_id'), ['procedure_id'], unique=False)




def downgrade() -> None:

    with op.batch_alter_table('reagent_draws', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_reagent_draws_procedure_id'))

    op.drop_table('reagent_draws')
    with op.batch_alter_table('waste_plan_items', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_waste_plan_items_procedure_id'))

    op.drop_table('waste_plan_items')
    with op.batch_alter_table('procedure_steps', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_procedure_steps_procedure_id'))

    op.drop_table('procedure_steps')
    with op.batch_alter_table('procedure_decisions', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_procedure_decisions_procedure_id'))

    op.drop_table('procedure_decisions')
    with op.batch_alter_table('procedures', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_procedures_state'))
        batch_op.drop_index(batch_op.f('ix_procedures_researcher_id'))
        batch_op.drop_index(batch_op.f('ix_procedures_lab_id'))
        batch_op.drop_index(batch_op.f('ix_procedures_family_id'))

    op.drop_table('procedures')

