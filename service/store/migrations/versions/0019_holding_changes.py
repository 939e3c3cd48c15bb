"""holding changes: the element content of stocks and mixtures, change by change; times of outputs and losses

Revision ID: 0019_holding_changes
Revises: 0018_determinations
Create Date: 2026-12-02 15:40:00

A database that already holds stocks starts its record with one "carried_over" row per element of
each active stock and mixture (what it holds now, dated now); outputs and losses recorded before this
revision take their run's start as their time.
"""

import datetime as dt

from alembic import op
import sqlalchemy as sa


revision = '0019_holding_changes'
down_revision = '0018_determinations'
branch_labels = None
depends_on = None

# As service.vocab.HOLDING_CHANGE_KINDS when this revision was written (a later change needs its own revision).
KINDS = ('received', 'carried_over', 'product', 'prepared', 'used_for_mixture', 'drawn_by_run', 'disposed',
         'shipped', 'transferred_out', 'transferred_in', 'corrected', 'retired')


def _element_check():
    from service import vocab  # the element symbols are the periodic table's: they do not change

    quoted = ", ".join(f"'{s}'" for s in vocab.ELEMENT_SYMBOLS)
    return sa.CheckConstraint(f"element IN ({quoted})", name=op.f('ck_holding_changes_element'))


def upgrade() -> None:
    op.create_table('holding_changes',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('at', sa.DateTime(), nullable=False),
    sa.Column('element', sa.String(length=3), nullable=False),
    sa.Column('mass_ug', sa.BigInteger(), nullable=False),
    sa.Column('kind', sa.String(length=20), nullable=False),
    sa.Column('lab_id', sa.Integer(), nullable=False),
    sa.Column('stock_id', sa.Integer(), nullable=True),
    sa.Column('mixture_id', sa.Integer(), nullable=True),
    sa.Column('run_id', sa.Integer(), nullable=True),
    sa.Column('movement_id', sa.Integer(), nullable=True),
    sa.Column('into_mixture_id', sa.Integer(), nullable=True),
    _element_check(),
    sa.CheckConstraint("kind IN ({})".format(", ".join(f"'{k}'" for k in KINDS)), name=op.f('ck_holding_changes_kind')),
    sa.ForeignKeyConstraint(['lab_id'], ['labs.id'], name=op.f('fk_holding_changes_lab_id_labs')),
    sa.ForeignKeyConstraint(['stock_id'], ['stocks.id'], name=op.f('fk_holding_changes_stock_id_stocks')),
    sa.ForeignKeyConstraint(['mixture_id'], ['mixtures.id'], name=op.f('fk_holding_changes_mixture_id_mixtures')),
    sa.ForeignKeyConstraint(['run_id'], ['runs.id'], name=op.f('fk_holding_changes_run_id_runs')),
    sa.ForeignKeyConstraint(['movement_id'], ['stock_movements.id'],
                            name=op.f('fk_holding_changes_movement_id_stock_movements')),
    sa.ForeignKeyConstraint(['into_mixture_id'], ['mixtures.id'],
                            name=op.f('fk_holding_changes_into_mixture_id_mixtures')),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_holding_changes'))
    )
    with op.batch_alter_table('holding_changes', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_holding_changes_at'), ['at'], unique=False)
        batch_op.create_index(batch_op.f('ix_holding_changes_element'), ['element'], unique=False)
        batch_op.create_index(batch_op.f('ix_holding_changes_kind'), ['kind'], unique=False)
        batch_op.create_index(batch_op.f('ix_holding_changes_lab_id'), ['lab_id'], unique=False)
        batch_op.create_index(batch_op.f('ix_holding_changes_stock_id'), ['stock_id'], unique=False)
        batch_op.create_index(batch_op.f('ix_holding_changes_mixture_id'), ['mixture_id'], unique=False)
        batch_op.create_index(batch_op.f('ix_holding_changes_run_id'), ['run_id'], unique=False)
    for table in ('run_outputs', 'run_losses'):
        with op.batch_alter_table(table, schema=None) as batch_op:
            batch_op.add_column(sa.Column('at', sa.DateTime(), nullable=True))
        op.execute(f"UPDATE {table} SET at = (SELECT runs.started_at FROM runs WHERE runs.id = {table}.run_id)")
        with op.batch_alter_table(table, schema=None) as batch_op:
            batch_op.alter_column('at', existing_type=sa.DateTime(), nullable=False)
            batch_op.create_index(batch_op.f(f'ix_{table}_at'), ['at'], unique=False)

    now = dt.datetime.now(dt.timezone.utc).replace(tzinfo=None)
    bind = op.get_bind()
    rows = []
    for holder, table, key in (('stock_id', 'stock_elements', 'stock_id'), ('mixture_id', 'mixture_elements', 'mixture_id')):
        owner = 'stocks' if holder == 'stock_id' else 'mixtures'
        found = bind.execute(sa.text(
            f"SELECT e.{key}, o.lab_id, e.element, e.mass_ug FROM {table} e JOIN {owner} o ON o.id = e.{key} "
            f"WHERE o.retired_at IS NULL AND e.mass_ug <> 0 ORDER BY e.{key}, e.element"))
        rows += [{'at': now, 'element': element, 'mass_ug': int(mass), 'kind': 'carried_over', 'lab_id': lab,
                  'stock_id': ident if holder == 'stock_id' else None,
                  'mixture_id': ident if holder == 'mixture_id' else None} for ident, lab, element, mass in found]
    if rows:
        changes = sa.table('holding_changes', *(sa.column(c) for c in
                           ('at', 'element', 'mass_ug', 'kind', 'lab_id', 'stock_id', 'mixture_id')))
        op.bulk_insert(changes, rows)


def downgrade() -> None:
    for table in ('run_losses', 'run_outputs'):
        with op.batch_alter_table(table, schema=None) as batch_op:
            batch_op.drop_index(batch_op.f(f'ix_{table}_at'))
            batch_op.drop_column('at')
    with op.batch_alter_table('holding_changes', schema=None) as batch_op:
        for column in ('run_id', 'mixture_id', 'stock_id', 'lab_id', 'kind', 'element', 'at'):
            batch_op.drop_index(batch_op.f(f'ix_holding_changes_{column}'))
    op.drop_table('holding_changes')
