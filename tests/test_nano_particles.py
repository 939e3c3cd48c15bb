"""Tests for service.nano.particles and the material table (densities, monolayers).

Hand calculations use CIAAW 2021 standard atomic weights (Prohaska et al., Pure Appl. Chem.
94, 2022): Cd 112.414, Se 78.971, Zn 65.38, S 32.06; the Avogadro constant
N_A = 6.02214076e23 /mol (SI, exact).
"""

import doctest
import math

import pytest

from service.nano import materials, particles
from service.nano.errors import NonPositiveQuantityError, UnknownMaterialError
from service.nano.materials import MATERIALS, get_material
from service.nano.particles import (
    atoms_per_particle,
    formula_units_per_particle,
    shell_atoms_per_particle,
    shell_thickness_from_monolayers,
    sphere_volume_nm3,
)

N_A = 6.02214076e23  # SI exact
CD, SE, ZN, S = 112.414, 78.971, 65.38, 32.06  # CIAAW 2021


# Source: Kasap, Principles of Electronic Materials and Devices, table of semiconductor
# properties (seen); ZnS zinc blende 4.09-4.11 g/cm³ from a secondary copy (2nd), low end pinned.
@pytest.mark.parametrize(
    "material, density_g_per_cm3",
    [("CdSe", 5.81), ("CdS", 4.82), ("CdTe", 5.85), ("ZnS", 4.09)],
)
def test_bulk_densities_from_the_handbook(material, density_g_per_cm3):
    assert MATERIALS[material].density_g_per_cm3 == density_g_per_cm3
    assert MATERIALS[material].density_source


# Common practice (not a measured constant): ZnS ≈ 0.31 nm, CdS ≈ 0.35 nm per monolayer.
@pytest.mark.parametrize("shell, thickness_nm", [("ZnS", 0.31), ("CdS", 0.35)])
def test_monolayer_thickness_common_practice(shell, thickness_nm):
    assert MATERIALS[shell].monolayer_source == "common practice"
    assert shell_thickness_from_monolayers(shell, 3) == pytest.approx(3 * thickness_nm)


def test_every_table_value_names_its_source():
    assert {name for name, entry in MATERIALS.items() if entry.has_optical_relations} >= {"CdSe", "CdTe", "CdS"}
    for entry in MATERIALS.values():
        assert entry.density_source
        if entry.has_optical_relations:
            assert "Chem. Mater. 2003" in entry.relation_source
            assert "conservative choice" in entry.range_note
            assert "conservative choice" in entry.uncertainty_note


def test_atoms_in_a_3_nm_cdse_sphere_by_hand():
    # Hand calculation: V = π/6·D³ with D = 3.0 nm = 3.0e-7 cm
    volume_cm3 = math.pi / 6 * (3.0e-7) ** 3  # 1.41372e-20 cm³
    mass_g = 5.81 * volume_cm3  # Kasap density of CdSe; 8.2137e-20 g
    molar_mass = CD + SE  # 191.385 g/mol (CIAAW)
    units = mass_g / molar_mass * N_A  # 258.45 formula units
    assert units == pytest.approx(258.45, abs=0.01)  # the hand calculation's own arithmetic
    assert formula_units_per_particle("CdSe", 3.0) == pytest.approx(units, rel=1e-9)
    atoms = atoms_per_particle("CdSe", 3.0)
    assert dict(atoms) == pytest.approx({"Cd": units, "Se": units}, rel=1e-9)
    assert sphere_volume_nm3(3.0) == pytest.approx(volume_cm3 * 1e21, rel=1e-12)


# Geometry: atoms scale with D³ (sphere volume), so doubling D gives 8x the atoms.
@pytest.mark.parametrize("material", ["CdSe", "CdTe", "CdS", "ZnS"])
def test_atoms_scale_with_the_cube_of_the_diameter(material):
    small = atoms_per_particle(material, 2.5)
    large = atoms_per_particle(material, 5.0)
    assert len(small) == 2 and set(small) == set(large)  # the metal and the chalcogen
    for symbol in small:
        assert large[symbol] == pytest.approx(8 * small[symbol], rel=1e-12)


@pytest.mark.parametrize(
    "shell, monolayers, thickness_nm, density, metal, metal_weight, anion_weight",
    [
        ("ZnS", 1, 0.31, 4.09, "Zn", ZN, S),  # monolayer: common practice
        ("ZnS", 3, 0.31, 4.09, "Zn", ZN, S),
        ("CdS", 2, 0.35, 4.82, "Cd", CD, S),
    ],
)
def test_shell_atoms_by_hand(shell, monolayers, thickness_nm, density, metal, metal_weight,
                             anion_weight):
    core_d_cm = 3.0e-7
    outer_d_cm = core_d_cm + 2 * monolayers * thickness_nm * 1e-7
    shell_volume_cm3 = math.pi / 6 * (outer_d_cm**3 - core_d_cm**3)
    units = density * shell_volume_cm3 / (metal_weight + anion_weight) * N_A
    thickness = shell_thickness_from_monolayers(shell, monolayers)
    atoms = shell_atoms_per_particle(shell, 3.0, thickness)
    assert atoms[metal] == pytest.approx(units, rel=1e-9)
    assert atoms["S"] == pytest.approx(units, rel=1e-9)


def test_zero_shell_has_no_atoms():
    assert dict(shell_atoms_per_particle("ZnS", 3.0, 0.0)) == {"Zn": 0.0, "S": 0.0}


@pytest.mark.parametrize("diameter_nm", [0, -1.0, math.nan, math.inf, "3 nm", True])
def test_non_positive_diameter_is_refused(diameter_nm):
    with pytest.raises(NonPositiveQuantityError, match="diameter_nm must be a positive"):
        atoms_per_particle("CdSe", diameter_nm)


@pytest.mark.parametrize("bad", [-1, math.nan, math.inf])
def test_negative_shell_thickness_is_refused(bad):
    with pytest.raises(NonPositiveQuantityError, match="non-negative"):
        shell_atoms_per_particle("ZnS", 3.0, bad)


@pytest.mark.parametrize("shell", ["CdSe", "CdTe", "InP"])
def test_shell_without_monolayer_data_is_refused(shell):
    with pytest.raises(UnknownMaterialError, match="no shell data"):
        shell_thickness_from_monolayers(shell, 2)


def test_material_table_is_read_only():
    with pytest.raises(TypeError):
        MATERIALS["CdSe"] = MATERIALS["CdS"]  # type: ignore[index]
    with pytest.raises(AttributeError):
        get_material("CdSe").density_g_per_cm3 = 1.0  # type: ignore[misc]


@pytest.mark.parametrize("module", [particles, materials])
def test_doctests(module):
    assert doctest.testmod(module).failed == 0
