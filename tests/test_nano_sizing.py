"""Tests for service.nano.sizing: diameter and extinction coefficient from the first exciton.

Source of the relations: Yu, Qu, Guo, Peng, Chem. Mater. 2003, 15, 2854-2860 (equations as
as published, "Nanocrystal optics"; status 2nd). The functions below are a literal,
independent transcription of those printed equations, written out term by term.
"""

import doctest
import math

import pytest

from service.nano import sizing
from service.nano.errors import OutOfRangeError, UnknownMaterialError
from service.nano.sizing import (
    SizeEstimate,
    diameter_from_wavelength,
    diameter_range_nm,
    extinction_coefficient,
    size_from_wavelength,
    wavelength_range_nm,
)


# --- literal transcription of Yu et al. 2003 (D, λ in nm; ε in M⁻¹ cm⁻¹) -------------------
def yu_diameter_cdte(lam):
    return (9.8127e-7) * lam**3 - (1.7147e-3) * lam**2 + (1.0064) * lam - 194.84


def yu_diameter_cdse(lam):
    return (
        (1.6122e-9) * lam**4 - (2.6575e-6) * lam**3 + (1.6242e-3) * lam**2 - (0.4277) * lam + 41.57
    )


def yu_diameter_cds(lam):
    return (-6.6521e-8) * lam**3 + (1.9557e-4) * lam**2 - (9.2352e-2) * lam + 13.29


def yu_epsilon_cdte(d):
    return 10043 * d**2.12


def yu_epsilon_cdse(d):
    return 5857 * d**2.65


def yu_epsilon_cds(d):
    return 21536 * d**2.3


YU = {
    "CdTe": (yu_diameter_cdte, yu_epsilon_cdte),
    "CdSe": (yu_diameter_cdse, yu_epsilon_cdse),
    "CdS": (yu_diameter_cds, yu_epsilon_cds),
}


# Source: Yu et al. 2003 equations, transcribed above; points spread over each pinned range.
@pytest.mark.parametrize(
    "material, wavelength_nm",
    [
        ("CdSe", 400), ("CdSe", 480), ("CdSe", 550), ("CdSe", 600), ("CdSe", 650),
        ("CdTe", 500), ("CdTe", 600), ("CdTe", 700),
        ("CdS", 300), ("CdS", 400), ("CdS", 450), ("CdS", 500),
    ],
)
def test_relations_reproduce_published_equations(material, wavelength_nm):
    diameter_of, epsilon_of = YU[material]
    expected_d = diameter_of(wavelength_nm)
    assert diameter_from_wavelength(material, wavelength_nm) == pytest.approx(expected_d, rel=1e-12)
    assert extinction_coefficient(material, expected_d) == pytest.approx(
        epsilon_of(expected_d), rel=1e-12
    )


# Source: "Nanocrystal optics". These rounded values were *derived* from the
# Yu et al. 2003 equations (not published in the paper), so they are checked to their rounding.
@pytest.mark.parametrize(
    "material, wavelength_nm, diameter_nm, epsilon",
    [
        ("CdSe", 550, 3.04, 1.12e5),
        ("CdSe", 600, 4.58, 3.31e5),
        ("CdTe", 600, 3.66, 1.57e5),
        ("CdS", 400, 3.38, 3.55e5),
    ],
)
def test_rounded_values_derived_from_the_equations(material, wavelength_nm, diameter_nm, epsilon):
    estimate = size_from_wavelength(material, wavelength_nm)
    assert estimate.diameter_nm == pytest.approx(diameter_nm, abs=0.005)
    assert estimate.extinction_per_m_per_cm == pytest.approx(epsilon, rel=0.005)


# Source: the criterion stated in service.nano.materials (conservative choice): the pinned
# span is the λ interval, rounded inwards to whole nm, where the Yu et al. D(λ) rises
# monotonically and stays within 1-9 nm. Checked here with the literal transcription.
@pytest.mark.parametrize("material", ["CdTe", "CdSe", "CdS"])
def test_pinned_wavelength_range_follows_the_stated_criterion(material):
    diameter_of, _ = YU[material]
    low, high = wavelength_range_nm(material)

    def slope(lam):
        return (diameter_of(lam + 1e-3) - diameter_of(lam - 1e-3)) / 2e-3

    steps = int((high - low) * 2)
    assert all(slope(low + i * 0.5) > 0 for i in range(steps + 1))
    assert 1.0 <= diameter_of(low) and diameter_of(high) <= 9.0
    # rounded inwards to whole nm: one nm further out breaks the criterion
    assert diameter_of(low - 1) < 1.0 or slope(low - 1) <= 0
    assert diameter_of(high + 1) > 9.0
    assert diameter_range_nm(material) == pytest.approx((diameter_of(low), diameter_of(high)))


@pytest.mark.parametrize(
    "material, wavelength_nm",
    [
        ("CdSe", 700), ("CdSe", 300), ("CdSe", 663.5),
        ("CdTe", 450), ("CdTe", 800),
        ("CdS", 250), ("CdS", 600),
    ],
)
def test_wavelength_outside_range_is_refused(material, wavelength_nm):
    low, high = wavelength_range_nm(material)
    with pytest.raises(OutOfRangeError) as caught:
        diameter_from_wavelength(material, wavelength_nm)
    error = caught.value
    assert isinstance(error, ValueError)
    assert (error.material, error.value, error.low, error.high, error.unit) == (
        material, wavelength_nm, low, high, "nm"
    )
    message = str(error)
    assert f"{low:g}–{high:g} nm" in message and material in message


def test_nan_wavelength_is_refused():
    with pytest.raises(OutOfRangeError):
        diameter_from_wavelength("CdSe", math.nan)


@pytest.mark.parametrize("material, diameter_nm", [("CdSe", 12.0), ("CdSe", 0.5), ("CdS", 1.0)])
def test_diameter_outside_range_is_refused(material, diameter_nm):
    with pytest.raises(OutOfRangeError, match=r"diameter .* nm is outside the valid range"):
        extinction_coefficient(material, diameter_nm)


@pytest.mark.parametrize("material", ["InP", "ZnS", "PbS", ""])
def test_material_without_relation_is_refused(material):
    with pytest.raises(UnknownMaterialError, match="CdTe, CdSe, CdS"):
        diameter_from_wavelength(material, 500)


def test_material_name_ignores_case():
    assert diameter_from_wavelength("cdse", 550) == diameter_from_wavelength("CdSe", 550)


def test_size_estimate_is_frozen_and_consistent():
    estimate = size_from_wavelength("CdSe", 550)
    assert isinstance(estimate, SizeEstimate)
    assert estimate.extinction_per_m_per_cm == extinction_coefficient("CdSe", estimate.diameter_nm)
    assert 0 < estimate.diameter_relative_uncertainty < estimate.extinction_relative_uncertainty
    assert "Chem. Mater. 2003" in estimate.source
    with pytest.raises(AttributeError):
        estimate.diameter_nm = 1.0


def test_doctests():
    assert doctest.testmod(sizing).failed == 0
