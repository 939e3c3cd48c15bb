"""CHECK constraints from the shared vocabularies (service/vocab.py)

Each constrained column accepts only the words of its vocabulary. The values are written
out here as they were when this revision was made, so the revision does the same thing
whenever it runs; a later change to a vocabulary comes with its own revision that drops
and re-creates the constraint (tests/test_vocab.py compares the migrated constraints with
service/vocab.py). batch_alter_table rebuilds the table on SQLite, which cannot add a
constraint to an existing table; PostgreSQL checks the existing rows when the constraint
is added.

Revision ID: 0007_vocabulary_checks
Revises: 0006_site
Create Date: 2026-12-09 10:00:00
"""

from alembic import op


revision = '0007_vocabulary_checks'
down_revision = '0006_site'
branch_labels = None
depends_on = None

ROLES = ('researcher', 'safety_officer', 'lab_manager', 'auditor', 'admin')
LOCATION_KINDS = ('storage', 'satellite_accumulation_area')
STREAMS = ('non_halogenated_solvent_heavy_metals', 'halogenated_solvent_heavy_metals', 'aqueous_heavy_metals',
           'contaminated_solids', 'sharps')
PROCEDURE_STATES = ('draft', 'submitted', 'approved', 'changes_requested', 'declined', 'retired')
RUN_STATES = ('open', 'closed')
CONTAINER_STATES = ('open', 'full', 'pickup_requested', 'collected')
ELEMENT_SYMBOLS = (
    'H He Li Be B C N O F Ne Na Mg Al Si P S Cl Ar K Ca Sc Ti V Cr Mn Fe Co Ni Cu Zn Ga Ge As Se Br Kr '
    'Rb Sr Y Zr Nb Mo Tc Ru Rh Pd Ag Cd In Sn Sb Te I Xe Cs Ba La Ce Pr Nd Pm Sm Eu Gd Tb Dy Ho Er Tm Yb Lu '
    'Hf Ta W Re Os Ir Pt Au Hg Tl Pb Bi Po At Rn Fr Ra Ac Th Pa U Np Pu Am Cm Bk Cf Es Fm Md No Lr '
    'Rf Db Sg Bh Hs Mt Ds Rg Cn Nh Fl Mc Lv Ts Og'
).split()

# table -> [(column, allowed values)]; the constraint is ck_<table>_<column>, as the models name it.
CHECKS = {
    'users': [('role', ROLES)],
    'locations': [('kind', LOCATION_KINDS)],
    'procedures': [('state', PROCEDURE_STATES)],
    'runs': [('state', RUN_STATES)],
    'waste_containers': [('stream', STREAMS), ('state', CONTAINER_STATES)],
    'stock_elements': [('element', ELEMENT_SYMBOLS)],
    'mixture_elements': [('element', ELEMENT_SYMBOLS)],
    'waste_entry_elements': [('element', ELEMENT_SYMBOLS)],
}


def upgrade() -> None:
    for table, checks in CHECKS.items():
        with op.batch_alter_table(table) as batch_op:
            for column, values in checks:
                quoted = ', '.join(f"'{value}'" for value in values)
                batch_op.create_check_constraint(op.f(f'ck_{table}_{column}'), f'{column} IN ({quoted})')


def downgrade() -> None:
    for table, checks in CHECKS.items():
        with op.batch_alter_table(table) as batch_op:
            for column, _values in checks:
                batch_op.drop_constraint(op.f(f'ck_{table}_{column}'), type_='check')
