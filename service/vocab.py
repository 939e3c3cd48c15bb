"""The shared vocabularies: every fixed list of words the service stores or checks, once.

Pydantic types (``service.schemas``), the CLI's choices, the permission matrix, the
configuration defaults, the pages and the database CHECK constraints
(``service.store.models``) all derive from the tuples here. Pure: no Flask, no database.

A value added here (or removed) needs an alembic migration that rebuilds the CHECK
constraint of its column; ``tests/test_vocab.py`` compares each constraint in a migrated
database with these tuples and fails until that migration exists.

>>> element_symbol("Cd")
'Cd'
>>> element_symbol("cd")
Traceback (most recent call last):
...
service.vocab.UnknownElementError: 'cd' is not an element symbol (symbols are case-sensitive: write Cd)
"""

from __future__ import annotations

__all__ = [
    "ROLES",
    "LOCATION_KINDS",
    "ACCUMULATION_AREA_KINDS",
    "GENERATOR_CATEGORIES",
    "RULE_MARKS",
    "OPT_INS",
    "STREAMS",
    "SOLID_STREAMS",
    "PROCEDURE_STATES",
    "RUN_STATES",
    "CONTAINER_STATES",
    "MOVEMENT_KINDS",
    "LABEL_SIZES",
    "HOLDING_CHANGE_KINDS",
    "FINDING_LEVELS",
    "WASTE_CODE_FORMATS",
    "WASTE_CODE_SYSTEMS",
    "ELEMENT_SYMBOLS",
    "TRACKED_ELEMENTS",
    "BALANCE_ELEMENTS",
    "UnknownElementError",
    "element_symbol",
    "element_list",
]

# Who a user is; what each may do is service/permissions.py.
ROLES = ("researcher", "safety_officer", "lab_manager", "auditor", "admin")

# Where things are kept: ordinary storage, or an accumulation area for waste: a satellite area at or near
# the point of generation (RCRA, 40 CFR 262.15) or the site's central accumulation area (262.16 / 262.17).
LOCATION_KINDS = ("storage", "satellite_accumulation_area", "central_accumulation_area")
ACCUMULATION_AREA_KINDS = ("satellite_accumulation_area", "central_accumulation_area")

# Generator categories of 40 CFR 260.10 / 262.13, from the smallest; which applies in a month follows from
# the rules of scope generator_month that mark a category (rule packs hold the thresholds).
GENERATOR_CATEGORIES = ("very_small_quantity_generator", "small_quantity_generator", "large_quantity_generator")

# What a firing rule marks beyond its finding: an accumulation area over its limit (starts the area's
# clock), or the generator category a month's amounts put the site in.
RULE_MARKS = ("area_over_limit", "small_quantity_generator", "large_quantity_generator")

# Optional regimes a site pack opts in to (``opt_ins:``); rules may apply only with, or only without, one.
# academic_laboratories: 40 CFR part 262 subpart K for the laboratories of an eligible academic entity.
OPT_INS = ("academic_laboratories",)

# Waste streams a container collects; the solid ones are measured by mass, the others by volume.
STREAMS = (
    "non_halogenated_solvent_heavy_metals",
    "halogenated_solvent_heavy_metals",
    "aqueous_heavy_metals",
    "contaminated_solids",
    "sharps",
)
SOLID_STREAMS = ("contaminated_solids", "sharps")

# Lifecycles, in the order a record usually goes through them.
PROCEDURE_STATES = ("draft", "submitted", "approved", "changes_requested", "declined", "retired")
RUN_STATES = ("open", "closed")
CONTAINER_STATES = ("open", "full", "pickup_requested", "collected")

# How a stock leaves the inventory other than by a run's draw: into a waste container, to another
# lab of the site (a new stock there), or out of the site (sent to a collaborator, returned).
MOVEMENT_KINDS = ("dispose", "transfer", "ship")

# The sizes a waste container's label prints at: one label of 100 mm × 150 mm on its own page, or a
# sheet of the common label layouts (A4 with 2 × 4 labels of 99.1 mm × 67.7 mm; US Letter with 2 × 3
# labels of 4 in × 3 1/3 in), every label of the sheet the same. The layouts are service/documents/label.py.
LABEL_SIZES = ("single-100x150", "a4-2x4", "letter-2x3")

# Why a stock's or mixture's element content changed: one row per element of each change, signed
# (+ into the inventory, − out of it), so that the element on hand at any moment is a sum.
# Pairs inside the site net to zero: prepared / used_for_mixture, transferred_in / transferred_out.
HOLDING_CHANGE_KINDS = (
    "received",          # a stock or ready-made solution entered the inventory (+)
    "carried_over",      # what a holding held when its changes began to be recorded (+)
    "product",           # a run's product put into the inventory (+)
    "prepared",          # a mixture prepared from stocks: what it drew (+)
    "used_for_mixture",  # drawn from a stock or mixture to prepare a mixture (−)
    "drawn_by_run",      # drawn by a run (−)
    "disposed",          # disposed of into a waste container (−)
    "shipped",           # shipped out of the site (−)
    "transferred_out",   # moved to another lab of the site (−)
    "transferred_in",    # arrived from another lab of the site (+)
    "corrected",         # the content recomputed after a corrected amount, purity, density or volume (±)
    "retired",           # the holding retired with what it still held (−)
)

# Levels of a rule finding, in rising severity (rule packs and review decisions).
FINDING_LEVELS = ("note", "caution", "review", "block")

# The waste-code systems a safety officer's determination may name, each with the form of its codes:
# - RCRA (40 CFR part 261): characteristic D001-D043 (261.21-261.24), F001-F039 from non-specific
#   sources (261.31), K001-K999 from specific sources (261.32), P001-P999 acute and U001-U999 toxic
#   discarded commercial products (261.33). The letter-and-three-digit form and the D and F ranges are
#   from memory of the published lists; a code the form admits may still not exist.
# - EU-LoW (List of Waste, Commission Decision 2000/532/EC as amended by 2014/955/EU): six digits in
#   three pairs, chapters 01-20, an asterisk marking a hazardous entry ("16 05 06*").
WASTE_CODE_FORMATS = {
    "RCRA": r"D0(0[1-9]|[1-3][0-9]|4[0-3])|F0(0[1-9]|[1-3][0-9])|[KPU](00[1-9]|0[1-9][0-9]|[1-9][0-9]{2})",
    "EU-LoW": r"(0[1-9]|1[0-9]|20) [0-9]{2} [0-9]{2}\*?",
}
WASTE_CODE_SYSTEMS = tuple(WASTE_CODE_FORMATS)

# The 118 element symbols in order of atomic number, as the IUPAC Periodic Table of the Elements
# writes them (Nh, Mc, Ts, Og as named in 2016): exact case, no isotopes (D, T), no neutron ("n").
ELEMENT_SYMBOLS = (
    "H", "He", "Li", "Be", "B", "C", "N", "O", "F", "Ne", "Na", "Mg", "Al", "Si", "P", "S", "Cl", "Ar",
    "K", "Ca", "Sc", "Ti", "V", "Cr", "Mn", "Fe", "Co", "Ni", "Cu", "Zn", "Ga", "Ge", "As", "Se", "Br", "Kr",
    "Rb", "Sr", "Y", "Zr", "Nb", "Mo", "Tc", "Ru", "Rh", "Pd", "Ag", "Cd", "In", "Sn", "Sb", "Te", "I", "Xe",
    "Cs", "Ba", "La", "Ce", "Pr", "Nd", "Pm", "Sm", "Eu", "Gd", "Tb", "Dy", "Ho", "Er", "Tm", "Yb", "Lu",
    "Hf", "Ta", "W", "Re", "Os", "Ir", "Pt", "Au", "Hg", "Tl", "Pb", "Bi", "Po", "At", "Rn",
    "Fr", "Ra", "Ac", "Th", "Pa", "U", "Np", "Pu", "Am", "Cm", "Bk", "Cf", "Es", "Fm", "Md", "No", "Lr",
    "Rf", "Db", "Sg", "Bh", "Hs", "Mt", "Ds", "Rg", "Cn", "Nh", "Fl", "Mc", "Lv", "Ts", "Og",
)  # fmt: skip
_KNOWN = frozenset(ELEMENT_SYMBOLS)

# The elements a run's mass balance follows by default (DOTLEDGER_BALANCE_ELEMENTS): the metals and
# metalloids, and the chalcogens S, Se and Te of cores, shells (ZnS, CdS) and their precursors.
# Carbon, hydrogen, oxygen and nitrogen come mostly from solvents and ligands and are not balanced.
BALANCE_ELEMENTS = ("Cd", "Se", "Te", "S", "Pb", "Zn", "In", "Cs", "Hg", "As", "Ag", "Cu")

# The elements the inventory pages total and give columns to, in this order: the balance's, the
# group's core chemistry first.
TRACKED_ELEMENTS = ("Cd", "Se", "Te", "Pb", "Zn", "S", "In", "Cs", "Hg", "As", "Ag", "Cu")


class UnknownElementError(ValueError):
    """A text that is not one of the 118 element symbols (carries the text as ``value``)."""

    def __init__(self, value: object):
        self.value = value
        hint = ""
        if isinstance(value, str) and value.strip().capitalize() in _KNOWN:
            hint = f"symbols are case-sensitive: write {value.strip().capitalize()}"
        super().__init__(f"{value!r} is not an element symbol ({hint or 'e.g. Cd, Se, Pb'})")


def element_symbol(value: object) -> str:
    """Return ``value`` if it is an element symbol exactly as written in the periodic table.

    :raises UnknownElementError: anything else ("cd", "n", "Xx", "", " Cd", None)
    """
    if not isinstance(value, str) or value not in _KNOWN:
        raise UnknownElementError(value)
    return value


def element_list(text: str) -> tuple[str, ...]:
    """Parse a comma-separated list of element symbols such as ``"Cd, Se,Pb"``.

    :raises UnknownElementError: an entry that is not an element symbol
    :raises ValueError: an empty list or an element named twice

    >>> element_list("Cd, Se,Pb")
    ('Cd', 'Se', 'Pb')
    """
    symbols = tuple(element_symbol(part.strip()) for part in str(text).split(",") if part.strip())
    if not symbols:
        raise ValueError("give at least one element symbol, e.g. Cd,Se,Pb")
    twice = sorted({s for s in symbols if symbols.count(s) > 1})
    if twice:
        raise ValueError(f"{', '.join(twice)} named twice")
    return symbols
