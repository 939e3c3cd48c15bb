"""Atoms in one nanocrystal: sphere volume × bulk density → formula units → atoms by element.

A particle is treated as a sphere of bulk density and bulk stoichiometry (common practice).
Real nanocrystals carry ligands and are often cation-rich at the surface, so the counts are
estimates. Molar masses and atom counts per formula unit come from
:func:`service.chem.formula.parse_formula`. Work is done in SI internally.
"""

from __future__ import annotations

import math
from types import MappingProxyType
from typing import Mapping

from service.chem.formula import parse_formula
from service.nano.errors import require_positive
from service.nano.materials import Material, get_material

__all__ = [
    "AVOGADRO_PER_MOL",
    "sphere_volume_nm3",
    "shell_thickness_from_monolayers",
    "formula_units_in_volume",
    "formula_units_per_particle",
    "atoms_per_particle",
    "shell_atoms_per_particle",
]

AVOGADRO_PER_MOL = 6.02214076e23  # SI, exact since 2019

_M3_PER_NM3 = 1e-27
_KG_PER_M3_PER_G_PER_CM3 = 1000.0
_KG_PER_G = 1e-3


def sphere_volume_nm3(diameter_nm: float) -> float:
    """Volume of a sphere of the given diameter, nm³ (π/6 · D³).

    Raises:
        NonPositiveQuantityError: if ``diameter_nm`` is not a positive finite number.

    >>> round(sphere_volume_nm3(3.0), 4)
    14.1372
    """
    diameter = require_positive("diameter_nm", diameter_nm, "nm")
    return math.pi / 6.0 * diameter**3


def shell_thickness_from_monolayers(shell: str | Material, monolayers: float) -> float:
    """Shell thickness in nm for ``monolayers`` monolayers of ``shell`` (common practice).

    Raises:
        UnknownMaterialError: if ``shell`` has no monolayer thickness in the table.
        NonPositiveQuantityError: if ``monolayers`` is negative or not finite.
    """
    entry = get_material(shell, role="shell")
    count = require_positive("shell_monolayers", monolayers, allow_zero=True)
    assert entry.monolayer_thickness_nm is not None
    return count * entry.monolayer_thickness_nm


def formula_units_in_volume(material: str | Material, volume_nm3: float) -> float:
    """Number of formula units in ``volume_nm3`` of bulk ``material`` (ρ·V·N_A / M).

    Parameters:
        material: a formula in :data:`service.nano.materials.MATERIALS`.
        volume_nm3: solid volume, nm³ (zero allowed: no shell).

    Returns:
        Formula units (a float; not rounded to whole units).

    Raises:
        UnknownMaterialError: if ``material`` is not in the table.
        NonPositiveQuantityError: if ``volume_nm3`` is negative or not finite.
    """
    entry = get_material(material)
    volume_m3 = require_positive("volume_nm3", volume_nm3, "nm³", allow_zero=True) * _M3_PER_NM3
    density_kg_per_m3 = entry.density_g_per_cm3 * _KG_PER_M3_PER_G_PER_CM3
    molar_mass_kg_per_mol = parse_formula(entry.formula).molar_mass_g_per_mol * _KG_PER_G
    return density_kg_per_m3 * volume_m3 * AVOGADRO_PER_MOL / molar_mass_kg_per_mol


def formula_units_per_particle(material: str | Material, diameter_nm: float) -> float:
    """Formula units in a sphere of bulk ``material`` with diameter ``diameter_nm``.

    Raises:
        UnknownMaterialError: if ``material`` is not in the table.
        NonPositiveQuantityError: if ``diameter_nm`` is not a positive finite number.

    >>> round(formula_units_per_particle("CdSe", 3.0), 1)
    258.5
    """
    return formula_units_in_volume(material, sphere_volume_nm3(diameter_nm))


def _atoms_by_element(material: str | Material, formula_units: float) -> Mapping[str, float]:
    entry = get_material(material)
    atoms = parse_formula(entry.formula).atoms
    return MappingProxyType({symbol: n * formula_units for symbol, n in atoms.items()})


def atoms_per_particle(material: str | Material, diameter_nm: float) -> Mapping[str, float]:
    """Atoms of each element in one spherical particle of ``material``.

    Parameters:
        material: a formula in the table, e.g. ``"CdSe"``.
        diameter_nm: particle diameter, nm.

    Returns:
        A read-only mapping element symbol → atoms per particle (formula units × atoms of
        that element per formula unit, as counted by ``parse_formula``).

    Raises:
        UnknownMaterialError: if ``material`` is not in the table.
        NonPositiveQuantityError: if ``diameter_nm`` is not a positive finite number.

    >>> {k: round(v) for k, v in atoms_per_particle("CdSe", 3.0).items()}
    {'Cd': 258, 'Se': 258}
    """
    return _atoms_by_element(material, formula_units_per_particle(material, diameter_nm))


def shell_atoms_per_particle(
    shell: str | Material, core_diameter_nm: float, shell_thickness_nm: float
) -> Mapping[str, float]:
    """Atoms of each element in a spherical shell grown on a core.

    The shell volume is the outer sphere (D + 2t) minus the core sphere (D); it is filled with
    bulk ``shell`` material at its bulk density (common practice; lattice strain and alloying
    at the interface are ignored).

    Parameters:
        shell: shell material, e.g. ``"ZnS"`` or ``"CdS"``.
        core_diameter_nm: core diameter D, nm.
        shell_thickness_nm: shell thickness t, nm (0 for a bare core).

    Returns:
        A read-only mapping element symbol → atoms per particle in the shell.

    Raises:
        UnknownMaterialError: if ``shell`` is not a shell material in the table.
        NonPositiveQuantityError: if a size is negative or not finite.
    """
    get_material(shell, role="shell")
    core = sphere_volume_nm3(core_diameter_nm)
    thickness = require_positive("shell_thickness_nm", shell_thickness_nm, "nm", allow_zero=True)
    outer = sphere_volume_nm3(core_diameter_nm + 2.0 * thickness)
    return _atoms_by_element(shell, formula_units_in_volume(shell, outer - core))
