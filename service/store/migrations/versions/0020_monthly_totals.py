"""monthly totals of waste entries, holding changes and run and shipment flows, for the ledger reports

Revision ID: 0020_monthly_totals
Revises: 0019_holding_changes
Create Date: 2026-12-02 16:30:00

The totals are filled from the records already there (months in UTC); from then on the store keeps
them in the transaction of each record (service/store/month_totals.py).
"""

from collections import defaultdict
import datetime as dt
import json

from alembic import op
import sqlalchemy as sa


revision = '0020_monthly_totals'
down_revision = '0019_holding_changes'
branch_labels = None
depends_on = None


def _element_check(table):
    from service import vocab  # the element symbols are the periodic table's: they do not change

    quoted = ", ".join(f"'{s}'" for s in vocab.ELEMENT_SYMBOLS)
    return sa.CheckConstraint(f"element IN ({quoted})", name=op.f(f'ck_{table}_element'))


def _month(dialect, column):
    return f"strftime('%Y-%m', {column})" if dialect == 'sqlite' else f"to_char({column}, 'YYYY-MM')"


def _month_of(at):
    if isinstance(at, str):  # SQLite hands back text
        at = dt.datetime.fromisoformat(at)
    return at.strftime('%Y-%m')  # stored naive in UTC


def upgrade() -> None:
    op.create_table('waste_month_totals',
    sa.Column('month', sa.String(length=7), nullable=False),
    sa.Column('container_id', sa.Integer(), nullable=False),
    sa.Column('element', sa.String(length=3), nullable=False),
    sa.Column('mass_ug', sa.BigInteger(), nullable=False),
    sa.Column('disposed_ug', sa.BigInteger(), nullable=False),
    _element_check('waste_month_totals'),
    sa.ForeignKeyConstraint(['container_id'], ['waste_containers.id'],
                            name=op.f('fk_waste_month_totals_container_id_waste_containers')),
    sa.PrimaryKeyConstraint('month', 'container_id', 'element', name=op.f('pk_waste_month_totals'))
    )
    op.create_table('ledger_month_totals',
    sa.Column('month', sa.String(length=7), nullable=False),
    sa.Column('element', sa.String(length=3), nullable=False),
    sa.Column('flow', sa.String(length=40), nullable=False),
    sa.Column('mass_ug', sa.BigInteger(), nullable=False),
    _element_check('ledger_month_totals'),
    sa.PrimaryKeyConstraint('month', 'element', 'flow', name=op.f('pk_ledger_month_totals'))
    )

    bind = op.get_bind()
    dialect = bind.dialect.name
    month = _month(dialect, 'e.at')
    waste = [{'month': m, 'container_id': c, 'element': el, 'mass_ug': int(ug), 'disposed_ug': int(gone)}
             for m, c, el, ug, gone in bind.execute(sa.text(
                 f"SELECT {month}, e.container_id, x.element, SUM(x.mass_ug), "
                 "SUM(CASE WHEN e.id IN (SELECT waste_entry_id FROM stock_movements WHERE waste_entry_id IS NOT NULL) "
                 "THEN x.mass_ug ELSE 0 END) "
                 "FROM waste_entry_elements x JOIN waste_entries e ON e.id = x.entry_id "
                 f"GROUP BY {month}, e.container_id, x.element"))]
    month = _month(dialect, 'at')
    flows = defaultdict(int)
    for m, el, kind, ug in bind.execute(sa.text(
            f"SELECT {month}, element, kind, SUM(mass_ug) FROM holding_changes GROUP BY {month}, element, kind")):
        flows[(m, el, f'holding:{kind}')] += int(ug)
    for flow, query in (
        ('run_draw', "SELECT r.started_at, d.element_mass_ug FROM run_draws d JOIN runs r ON r.id = d.run_id"),
        ('run_output', "SELECT at, element_mass_ug FROM run_outputs"),
        ('run_loss', "SELECT at, element_mass_ug FROM run_losses"),
        ('shipment', "SELECT at, element_mass_ug FROM stock_movements WHERE kind = 'ship'"),
    ):
        for at, masses in bind.execute(sa.text(query)):
            if isinstance(masses, str):
                masses = json.loads(masses)
            for el, ug in (masses or {}).items():
                if ug:
                    flows[(_month_of(at), el, flow)] += int(ug)
    if waste:
        op.bulk_insert(sa.table('waste_month_totals', *(sa.column(c) for c in waste[0])), waste)
    if flows:
        op.bulk_insert(sa.table('ledger_month_totals', *(sa.column(c) for c in ('month', 'element', 'flow', 'mass_ug'))),
                       [{'month': m, 'element': el, 'flow': f, 'mass_ug': ug} for (m, el, f), ug in sorted(flows.items())])


def downgrade() -> None:
    op.drop_table('ledger_month_totals')
    op.drop_table('waste_month_totals')
