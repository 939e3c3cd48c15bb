"""Core diameter and molar extinction coefficient from the first excitonic absorption peak.

Implements the empirical relations of Yu, Qu, Guo and Peng (*Chem. Mater.* 2003, 15,
2854–2860) for CdTe, CdSe and CdS cores: D(λ) as a polynomial in the peak wavelength and
ε(D) as a power law, with D and λ in nm and ε in M⁻¹ cm⁻¹ at that peak. Inputs outside the
pinned ranges raise :class:`~service.nano.errors.OutOfRangeError`; nothing is extrapolated.
The ranges are a conservative choice derived from the equations (see
:mod:`service.nano.materials`).
"""

from __future__ import annotations

from dataclasses import dataclass

from service.nano.errors import OutOfRangeError
from service.nano.materials import Material, get_material

__all__ = [
    "SizeEstimate",
    "diameter_from_wavelength",
    "extinction_coefficient",
    "size_from_wavelength",
    "wavelength_range_nm",
    "diameter_range_nm",
]


@dataclass(frozen=True)
class SizeEstimate:
    """Diameter and extinction coefficient of a core read from its first excitonic peak.

    The relative uncertainties are those the relations are taken to carry (a conservative
    choice, see :mod:`service.nano.materials`), not a measurement error of the spectrum.
    """

    material: str
    wavelength_nm: float
    diameter_nm: float
    extinction_per_m_per_cm: float
    diameter_relative_uncertainty: float
    extinction_relative_uncertainty: float
    source: str


def _polynomial(coefficients: tuple[float, ...], x: float) -> float:
    """Evaluate a polynomial given highest power first (Horner's scheme)."""
    result = 0.0
    for coefficient in coefficients:
        result = result * x + coefficient
    return result


def wavelength_range_nm(material: str | Material) -> tuple[float, float]:
    """The (low, high) first-exciton wavelength span, in nm, over which ``material`` is sized.

    Raises:
        UnknownMaterialError: if ``material`` has no sizing relation.

    >>> wavelength_range_nm("CdSe")
    (340.0, 663.0)
    """
    entry = get_material(material, role="core")
    assert entry.wavelength_range_nm is not None  # guaranteed for every core entry
    return entry.wavelength_range_nm


def diameter_range_nm(material: str | Material) -> tuple[float, float]:
    """The (low, high) diameter span, in nm, that the wavelength range maps onto.

    Raises:
        UnknownMaterialError: if ``material`` has no sizing relation.
    """
    entry = get_material(material, role="core")
    low, high = wavelength_range_nm(entry)
    assert entry.sizing_coefficients is not None
    return (
        _polynomial(entry.sizing_coefficients, low),
        _polynomial(entry.sizing_coefficients, high),
    )


def diameter_from_wavelength(material: str | Material, wavelength_nm: float) -> float:
    """Core diameter in nm from the first excitonic absorption peak wavelength in nm.

    Parameters:
        material: ``"CdTe"``, ``"CdSe"`` or ``"CdS"``.
        wavelength_nm: wavelength of the first excitonic absorption peak, nm.

    Returns:
        The diameter D in nm from the published polynomial.

    Raises:
        UnknownMaterialError: if there is no sizing relation for ``material``.
        OutOfRangeError: if ``wavelength_nm`` is outside :func:`wavelength_range_nm`.

    >>> round(diameter_from_wavelength("CdSe", 550), 2)
    3.04
    """
    entry = get_material(material, role="core")
    low, high = wavelength_range_nm(entry)
    value = float(wavelength_nm)
    if not (low <= value <= high):  # also rejects NaN
        raise OutOfRangeError(entry.formula, "first-exciton wavelength", value, low, high, "nm")
    assert entry.sizing_coefficients is not None
    return _polynomial(entry.sizing_coefficients, value)


def extinction_coefficient(material: str | Material, diameter_nm: float) -> float:
    """Molar extinction coefficient of the particles at the first excitonic peak, M⁻¹ cm⁻¹.

    Parameters:
        material: ``"CdTe"``, ``"CdSe"`` or ``"CdS"``.
        diameter_nm: core diameter, nm, within :func:`diameter_range_nm`.

    Returns:
        ε = prefactor · D ** exponent, per mole of particles, in M⁻¹ cm⁻¹.

    Raises:
        UnknownMaterialError: if there is no extinction relation for ``material``.
        OutOfRangeError: if ``diameter_nm`` lies outside the pinned diameter span.

    >>> f"{extinction_coefficient('CdSe', 3.0):.4g}"
    '1.077e+05'
    """
    entry = get_material(material, role="core")
    low, high = diameter_range_nm(entry)
    value = float(diameter_nm)
    if not (low <= value <= high):  # the ends are D at the ends of the wavelength span
        raise OutOfRangeError(entry.formula, "diameter", value, low, high, "nm")
    assert entry.extinction_prefactor is not None and entry.extinction_exponent is not None
    return entry.extinction_prefactor * value**entry.extinction_exponent


def size_from_wavelength(material: str | Material, wavelength_nm: float) -> SizeEstimate:
    """Diameter and extinction coefficient from the first excitonic peak, with uncertainties.

    Parameters:
        material: ``"CdTe"``, ``"CdSe"`` or ``"CdS"``.
        wavelength_nm: wavelength of the first excitonic absorption peak, nm.

    Returns:
        A :class:`SizeEstimate`.

    Raises:
        UnknownMaterialError: if there is no sizing relation for ``material``.
        OutOfRangeError: if ``wavelength_nm`` is outside :func:`wavelength_range_nm`.
    """
    entry = get_material(material, role="core")
    diameter_nm = diameter_from_wavelength(entry, wavelength_nm)
    assert entry.diameter_relative_uncertainty is not None
    assert entry.extinction_relative_uncertainty is not None
    return SizeEstimate(
        material=entry.formula,
        wavelength_nm=float(wavelength_nm),
        diameter_nm=diameter_nm,
        extinction_per_m_per_cm=extinction_coefficient(entry, diameter_nm),
        diameter_relative_uncertainty=entry.diameter_relative_uncertainty,
        extinction_relative_uncertainty=entry.extinction_relative_uncertainty,
        source=entry.relation_source or "",
    )
