"""running totals per waste container, backfilled from the entries

Revision ID: 0008_container_totals
Revises: 0007_vocabulary_checks
Create Date: 2026-12-03 09:00:00
"""

from decimal import ROUND_HALF_EVEN, Decimal

from alembic import op
import sqlalchemy as sa

# The element symbols as migration 0007 writes them out for the other element tables.
ELEMENT_SYMBOLS = (
    'H He Li Be B C N O F Ne Na Mg Al Si P S Cl Ar K Ca Sc Ti V Cr Mn Fe Co Ni Cu Zn Ga Ge As Se Br Kr '
    'Rb Sr Y Zr Nb Mo Tc Ru Rh Pd Ag Cd In Sn Sb Te I Xe Cs Ba La Ce Pr Nd Pm Sm Eu Gd Tb Dy Ho Er Tm Yb Lu '
    'Hf Ta W Re Os Ir Pt Au Hg Tl Pb Bi Po At Rn Fr Ra Ac Th Pa U Np Pu Am Cm Bk Cf Es Fm Md No Lr '
    'Rf Db Sg Bh Hs Mt Ds Rg Cn Nh Fl Mc Lv Ts Og'
).split()
ELEMENT_CHECK = "element IN (" + ", ".join(f"'{symbol}'" for symbol in ELEMENT_SYMBOLS) + ")"


revision = '0008_container_totals'
down_revision = '0007_vocabulary_checks'
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table('waste_container_totals',
    sa.Column('container_id', sa.Integer(), nullable=False),
    sa.Column('entries', sa.Integer(), nullable=False),
    sa.Column('volume_ul', sa.BigInteger(), nullable=False),
    sa.Column('mass_ug', sa.BigInteger(), nullable=False),
    sa.Column('solids_percent_ul_e6', sa.BigInteger(), nullable=False),
    sa.ForeignKeyConstraint(['container_id'], ['waste_containers.id'],
                            name=op.f('fk_waste_container_totals_container_id_waste_containers')),
    sa.PrimaryKeyConstraint('container_id', name=op.f('pk_waste_container_totals'))
    )
    op.create_table('waste_container_elements',
    sa.Column('container_id', sa.Integer(), nullable=False),
    sa.Column('element', sa.String(length=3), nullable=False),
    sa.Column('mass_ug', sa.BigInteger(), nullable=False),
    sa.ForeignKeyConstraint(['container_id'], ['waste_containers.id'],
                            name=op.f('fk_waste_container_elements_container_id_waste_containers')),
    sa.PrimaryKeyConstraint('container_id', 'element', name=op.f('pk_waste_container_elements')),
    sa.CheckConstraint(ELEMENT_CHECK,
                       name=op.f('ck_waste_container_elements_element')),
    )
    op.create_table('waste_container_components',
    sa.Column('container_id', sa.Integer(), nullable=False),
    sa.Column('substance_id', sa.Integer(), nullable=False),
    sa.Column('volume_ul', sa.BigInteger(), nullable=False),
    sa.ForeignKeyConstraint(['container_id'], ['waste_containers.id'],
                            name=op.f('fk_waste_container_components_container_id_waste_containers')),
    sa.ForeignKeyConstraint(['substance_id'], ['substances.id'],
                            name=op.f('fk_waste_container_components_substance_id_substances')),
    sa.PrimaryKeyConstraint('container_id', 'substance_id', name=op.f('pk_waste_container_components'))
    )
    _backfill()


def _backfill() -> None:
    """Sum the existing entries once; exact integers, as the store keeps them from here on."""
    op.execute("""
        INSERT INTO waste_container_totals (container_id, entries, volume_ul, mass_ug, solids_percent_ul_e6)
        SELECT c.id, COUNT(e.id), COALESCE(SUM(e.volume_ul), 0), COALESCE(SUM(e.mass_ug), 0), 0
        FROM waste_containers c LEFT JOIN waste_entries e ON e.container_id = c.id
        GROUP BY c.id""")
    op.execute("""
        INSERT INTO waste_container_elements (container_id, element, mass_ug)
        SELECT e.container_id, x.element, SUM(x.mass_ug)
        FROM waste_entry_elements x JOIN waste_entries e ON e.id = x.entry_id
        GROUP BY e.container_id, x.element""")
    op.execute("""
        INSERT INTO waste_container_components (container_id, substance_id, volume_ul)
        SELECT e.container_id, x.substance_id, SUM(x.volume_ul)
        FROM waste_entry_components x JOIN waste_entries e ON e.id = x.entry_id
        GROUP BY e.container_id, x.substance_id""")
    # The solids weight is rounded per entry (as service.store.waste.solids_weight does), which SQL
    # floats cannot reproduce exactly; it is summed here in Python.
    connection = op.get_bind()
    weights: dict[int, int] = {}
    rows = connection.execute(sa.text(
        "SELECT container_id, volume_ul, filterable_solids_percent FROM waste_entries "
        "WHERE filterable_solids_percent IS NOT NULL AND filterable_solids_percent <> 0 AND volume_ul <> 0"))
    for container_id, volume_ul, percent in rows:
        exact = Decimal(volume_ul) * Decimal(percent) * 1_000_000
        weights[container_id] = weights.get(container_id, 0) + int(exact.to_integral_value(ROUND_HALF_EVEN))
    update = sa.text("UPDATE waste_container_totals SET solids_percent_ul_e6 = :weight WHERE container_id = :cid")
    for container_id, weight in weights.items():
        connection.execute(update, {"weight": weight, "cid": container_id})


def downgrade() -> None:
    op.drop_table('waste_container_components')
    op.drop_table('waste_container_elements')
    op.drop_table('waste_container_totals')
