"""Element content of stocks and mixtures, worked from CIAAW 2021 atomic weights."""

from __future__ import annotations

from decimal import Decimal

import pytest

from service.chem.content import (
    Component,
    mixture_element_masses_ug,
    mixture_element_ug_per_ml,
    substance_element_masses_ug,
    total_ug,
)
from service.chem.units import MissingDensityError, QuantityError


def test_cadmium_oleate_solution_worked_example():
    # worked value from CIAAW 2021 atomic weights: 10.0 mL × 0.20 mol/L × 1 Cd × 112.414 g/mol = 224.828 mg Cd.
    masses = mixture_element_masses_ug("10.0 mL", [Component("cadmium oleate", "Cd(C18H33O2)2", molarity="0.20 mol/L")])
    assert masses["Cd"] == 224_828
    assert round(masses["Cd"] / 1000, 1) == 224.8


def test_two_atoms_per_formula_unit_count_twice():
    # Cs2CO3 at 0.05 mol/L in 10 mL: 0.5 mmol × 2 Cs × 132.905 g/mol = 132.905 mg Cs.
    masses = mixture_element_masses_ug("10 mL", [Component("cesium carbonate", "Cs2CO3", molarity="0.05 mol/L")])
    assert masses["Cs"] == 132_905


@pytest.mark.parametrize(
    "amount, formula, purity, expected_ug",
    [
        # 1.000 g CdO × 112.414/128.413 = 0.875410 g Cd (CIAAW 2021).
        ("1.000 g", "CdO", 1, {"Cd": 875_410, "O": 124_590}),
        # 99.99 % purity scales every element.
        ("1.000 g", "CdO", Decimal("0.9999"), {"Cd": 875_322, "O": 124_578}),
        # 266.532 mg Cd(OAc)2·2H2O is 1.000 mmol: 112.414 mg Cd.
        ("266.532 mg", "Cd(CH3COO)2·2H2O", 1, {"Cd": 112_414}),
        # 191.385 mg CdSe is 1.000 mmol: 112.414 mg Cd and 78.971 mg Se.
        ("191.385 mg", "CdSe", 1, {"Cd": 112_414, "Se": 78_971}),
    ],
)
def test_substance_element_masses(amount, formula, purity, expected_ug):
    masses = substance_element_masses_ug(amount, formula, purity=purity)
    for symbol, ug in expected_ug.items():
        assert masses[symbol] == ug


def test_volume_of_a_liquid_with_density():
    # Chloroform 1.498 g/mL (NAS 2016): 10 mL = 14.98 g; Cl fraction 3×35.45/119.369.
    masses = substance_element_masses_ug("10 mL", "CHCl3", density_g_per_ml=1.498, substance="chloroform")
    assert masses["Cl"] == pytest.approx(14.98e6 * 3 * 35.45 / (12.011 + 1.008 + 3 * 35.45), abs=1)


def test_volume_without_density_names_the_substance():
    with pytest.raises(MissingDensityError, match="trioctylphosphine"):
        substance_element_masses_ug("5 mL", "(C8H17)3P", substance="trioctylphosphine")


def test_mass_and_volume_fraction_components():
    # 10 mL of a blend at 0.80 g/mL holding 1 % w/w CdO: 80 mg CdO -> 70.0328 mg Cd (0.875410 fraction).
    by_mass = mixture_element_masses_ug(
        "10 mL", [Component("cadmium oxide", "CdO", mass_fraction=Decimal("0.01"))], density_g_per_ml=0.80
    )
    assert by_mass["Cd"] == 70_033
    # 10 mL holding 50 % v/v chloroform (1.498 g/mL): 7.49 g CHCl3.
    by_volume = mixture_element_masses_ug(
        "10 mL", [Component("chloroform", "CHCl3", volume_fraction=Decimal("0.5"), density_g_per_ml=1.498)]
    )
    assert sum(by_volume.values()) == pytest.approx(7_490_000, abs=2)


def test_per_ml_content_scales_with_volume():
    per_ml = mixture_element_ug_per_ml([Component("TOP-Se", "Se", molarity="1.0 mol/L")])
    assert per_ml["Se"] == Decimal("78971.000")  # 1 mmol/mL × 78.971 g/mol


@pytest.mark.parametrize(
    "component, message",
    [
        (Component("x", "CdO"), "exactly one of"),
        (Component("x", "CdO", molarity="0.2 mol/L", mass_fraction=Decimal("0.1")), "exactly one of"),
        (Component("x", "CdO", mass_fraction=Decimal("0.1")), "needs a density"),
        (Component("x", "CdO", molarity="5 g"), "expected a molarity"),
        (Component("x", "CdO", mass_fraction=Decimal("1.5")), "between 0 and 1"),
    ],
)
def test_bad_components(component, message):
    with pytest.raises(QuantityError, match=message):
        mixture_element_masses_ug("10 mL", [component], density_g_per_ml=None if "density" in message else 0.8)


def test_totals_are_exact_integer_sums():
    parts = [substance_element_masses_ug("0.1 mg", "CdO") for _ in range(1000)]
    assert total_ug(parts)["Cd"] == 1000 * parts[0]["Cd"]
