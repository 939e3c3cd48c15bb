"""Tests for service.nano.estimate: Beer–Lambert concentration and element masses.

Hand calculations: Beer–Lambert law A = ε·c·l; Yu, Qu, Guo, Peng, Chem. Mater. 2003, 15,
2854-2860 for D(λ) and ε(D) of CdSe (equations as published, transcribed literally
here); Kasap bulk densities (CdSe 5.81 g/cm³; ZnS 4.09 g/cm³, 2nd); CIAAW 2021 atomic weights;
N_A = 6.02214076e23 /mol (SI exact); monolayer thicknesses are common practice.
"""

import ast
import doctest
import math
import pathlib

import pytest

from service.nano import estimate as estimate_module
from service.nano.errors import (
    NanoError,
    NonPositiveQuantityError,
    OutOfRangeError,
    UnknownMaterialError,
)
from service.nano.estimate import MetalEstimate, estimate_metal_content, particle_concentration

N_A = 6.02214076e23  # SI exact
CD, SE, ZN, S = 112.414, 78.971, 65.38, 32.06  # CIAAW 2021


def cdse_diameter_nm(lam):  # Yu et al. 2003, literal
    return 1.6122e-9 * lam**4 - 2.6575e-6 * lam**3 + 1.6242e-3 * lam**2 - 0.4277 * lam + 41.57


def cdse_epsilon(d):  # Yu et al. 2003, literal
    return 5857 * d**2.65


# Beer–Lambert worked by hand: c = A / (ε·l) × dilution.
@pytest.mark.parametrize(
    "absorbance, epsilon, path_cm, dilution, expected_mol_per_l",
    [
        (0.5, 2.0e5, 1.0, 1, 2.5e-6),  # 0.5 / 2e5 = 2.5e-6
        (0.5, 2.0e5, 1.0, 10, 2.5e-5),  # ×10
        (0.12, 1.5e5, 0.2, 1, 4.0e-6),  # 0.12 / 3e4
        (1.0, 1.0e5, 0.5, 50, 1.0e-3),  # 1 / 5e4 = 2e-5, ×50
    ],
)
def test_beer_lambert_by_hand(absorbance, epsilon, path_cm, dilution, expected_mol_per_l):
    assert particle_concentration(absorbance, epsilon, path_cm, dilution) == pytest.approx(
        expected_mol_per_l, rel=1e-12
    )


@pytest.mark.parametrize(
    "name, kwargs",
    [
        ("absorbance", {"absorbance": 0}),
        ("absorbance", {"absorbance": -0.1}),
        ("absorbance", {"absorbance": math.nan}),
        ("path_length_cm", {"path_length_cm": 0}),
        ("path_length_cm", {"path_length_cm": -1.0}),
        ("dilution_factor", {"dilution_factor": 0}),
        ("volume_ml", {"volume_ml": 0}),
        ("volume_ml", {"volume_ml": -2.0}),
        ("volume_ml", {"volume_ml": math.inf}),
    ],
)
def test_non_positive_inputs_are_refused(name, kwargs):
    arguments = {"core": "CdSe", "wavelength_nm": 550, "absorbance": 0.5, "volume_ml": 2.0}
    arguments.update(kwargs)
    with pytest.raises(NonPositiveQuantityError) as caught:
        estimate_metal_content(**arguments)
    assert isinstance(caught.value, ValueError)
    assert caught.value.name == name
    assert f"{name} must be a positive finite number" in str(caught.value)


def test_non_positive_extinction_is_refused():
    with pytest.raises(NonPositiveQuantityError, match="M⁻¹ cm⁻¹"):
        particle_concentration(0.5, 0.0)


def _core_cd_mass_ug_by_hand(lam, absorbance, dilution, volume_ml, path_cm=1.0):
    d_nm = cdse_diameter_nm(lam)
    c_mol_per_l = absorbance / (cdse_epsilon(d_nm) * path_cm) * dilution
    particles_mol = c_mol_per_l * volume_ml / 1000.0
    units = 5.81 * math.pi / 6 * (d_nm * 1e-7) ** 3 / (CD + SE) * N_A
    return particles_mol * units * CD * 1e6, particles_mol, d_nm


@pytest.mark.parametrize(
    "lam, absorbance, dilution, volume_ml",
    [(550, 0.5, 10, 2.0), (600, 0.25, 20, 5.0), (480, 1.1, 1, 0.5)],
)
def test_cdse_core_cadmium_by_hand(lam, absorbance, dilution, volume_ml):
    expected_cd_ug, particles_mol, _ = _core_cd_mass_ug_by_hand(
        lam, absorbance, dilution, volume_ml
    )
    result = estimate_metal_content("CdSe", lam, absorbance, volume_ml, dilution_factor=dilution)
    assert result.metal_mass_ug_by_element["Cd"] == pytest.approx(expected_cd_ug, rel=1e-9)
    assert result.particle_amount_mol == pytest.approx(particles_mol, rel=1e-9)
    # Se from the same atoms: 1 Se per Cd in CdSe, scaled by the CIAAW weights
    assert result.element_mass_ug_by_element["Se"] == pytest.approx(expected_cd_ug * SE / CD)
    assert set(result.metal_mass_ug_by_element) == {"Cd"}


def test_zns_shell_adds_zinc_and_leaves_cadmium():
    core_only = estimate_metal_content("CdSe", 550, 0.5, 2.0, dilution_factor=10)
    shelled = estimate_metal_content(
        "CdSe", 550, 0.5, 2.0, dilution_factor=10, shell="ZnS", shell_monolayers=3
    )
    cd_ug, particles_mol, d_nm = _core_cd_mass_ug_by_hand(550, 0.5, 10, 2.0)
    outer_nm = d_nm + 2 * 3 * 0.31  # 3 ZnS monolayers of 0.31 nm (common practice)
    shell_cm3 = math.pi / 6 * ((outer_nm * 1e-7) ** 3 - (d_nm * 1e-7) ** 3)
    zn_units = 4.09 * shell_cm3 / (ZN + S) * N_A
    assert shelled.metal_mass_ug_by_element["Zn"] == pytest.approx(
        particles_mol * zn_units * ZN * 1e6, rel=1e-9
    )
    assert shelled.metal_mass_ug_by_element["Cd"] == pytest.approx(cd_ug, rel=1e-9)
    assert shelled.metal_mass_ug_by_element["Cd"] == core_only.metal_mass_ug_by_element["Cd"]
    assert shelled.outer_diameter_nm == pytest.approx(outer_nm)
    assert "Zn" not in core_only.element_mass_ug_by_element


def test_cds_shell_adds_cadmium():
    core_only = estimate_metal_content("CdSe", 550, 0.5, 2.0)
    shelled = estimate_metal_content("CdSe", 550, 0.5, 2.0, shell="CdS", shell_monolayers=2)
    d_nm = cdse_diameter_nm(550)
    outer_nm = d_nm + 2 * 2 * 0.35  # CdS monolayer 0.35 nm (common practice)
    shell_cm3 = math.pi / 6 * ((outer_nm * 1e-7) ** 3 - (d_nm * 1e-7) ** 3)
    added_cd_ug = shelled.particle_amount_mol * 4.82 * shell_cm3 / (CD + S) * N_A * CD * 1e6
    assert shelled.metal_mass_ug_by_element["Cd"] == pytest.approx(
        core_only.metal_mass_ug_by_element["Cd"] + added_cd_ug, rel=1e-9
    )


# Method and values stated in service.nano.estimate / materials (conservative choices, not the
# paper's scatter): u_ε = 0.25, u_D = 0.10, u_t = 0.20, first order, independent, quadrature.
def test_core_uncertainty_follows_stated_method():
    result = estimate_metal_content("CdSe", 550, 0.5, 2.0)
    assert result.relative_uncertainty == pytest.approx(math.sqrt(0.25**2 + (3 * 0.10) ** 2))


def test_shell_uncertainty_sensitivities_match_numerical_derivatives():
    result = estimate_metal_content("CdSe", 550, 0.5, 2.0, shell="ZnS", shell_monolayers=3)
    d, t, h = result.core_diameter_nm, 3 * 0.31, 1e-6

    def zn(d_nm, t_nm):
        # Zn atoms ∝ shell volume π/6·((d + 2t)³ − d³); the constant drops out of the log-derivatives.
        return (d_nm + 2 * t_nm) ** 3 - d_nm**3

    s_d = (math.log(zn(d * (1 + h), t)) - math.log(zn(d * (1 - h), t))) / (2 * h)
    s_t = (math.log(zn(d, t * (1 + h))) - math.log(zn(d, t * (1 - h)))) / (2 * h)
    expected = math.sqrt(0.25**2 + (s_d * 0.10) ** 2 + (s_t * 0.20) ** 2)
    assert result.relative_uncertainty_by_element["Zn"] == pytest.approx(expected, rel=1e-6)
    assert result.relative_uncertainty == max(result.relative_uncertainty_by_element.values())


def test_wavelength_outside_core_range_is_refused():
    with pytest.raises(OutOfRangeError, match=r"340–663 nm"):
        estimate_metal_content("CdSe", 700, 0.5, 2.0, shell="ZnS", shell_monolayers=2)


@pytest.mark.parametrize("monolayers", [-1, math.nan])
def test_negative_monolayers_are_refused(monolayers):
    with pytest.raises(NonPositiveQuantityError, match="shell_monolayers"):
        estimate_metal_content("CdSe", 550, 0.5, 2.0, shell="ZnS", shell_monolayers=monolayers)


def test_monolayers_without_shell_are_refused():
    with pytest.raises(NanoError, match="no shell material"):
        estimate_metal_content("CdSe", 550, 0.5, 2.0, shell_monolayers=2)


@pytest.mark.parametrize("core, shell", [("ZnS", None), ("CdSe", "CdTe"), ("PbS", None)])
def test_unknown_roles_are_refused(core, shell):
    with pytest.raises(UnknownMaterialError):
        estimate_metal_content(core, 550, 0.5, 2.0, shell=shell, shell_monolayers=1 if shell else 0)


def test_result_is_frozen():
    result = estimate_metal_content("CdSe", 550, 0.5, 2.0)
    assert isinstance(result, MetalEstimate)
    with pytest.raises(AttributeError):
        result.volume_ml = 1.0
    with pytest.raises(TypeError):
        result.metal_mass_ug_by_element["Cd"] = 0.0


# Project rule (DESIGN.md / STYLE.md habit 1): the pure core imports neither Flask, SQLAlchemy
# nor pandas, and formula work goes through service.chem.formula only.
def test_package_is_pure():
    forbidden = {"flask", "sqlalchemy", "pandas", "periodictable", "requests", "os", "pathlib"}
    package = pathlib.Path(estimate_module.__file__).parent
    for path in package.glob("*.py"):
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if isinstance(node, ast.Import):
                names = [alias.name for alias in node.names]
            elif isinstance(node, ast.ImportFrom):
                names = [node.module or ""]
            else:
                continue
            assert not {n.split(".")[0] for n in names} & forbidden, (path.name, names)


def test_doctests():
    assert doctest.testmod(estimate_module).failed == 0
