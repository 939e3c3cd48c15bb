"""Particle concentration (Beer–Lambert) and element masses in a nanocrystal dispersion.

Chain: first-exciton wavelength → core diameter and ε (:mod:`service.nano.sizing`) →
particle molarity c = A / (ε · l) × dilution → particles in the volume → atoms per particle
(:mod:`service.nano.particles`, core plus an optional shell) → mass of each element.

Uncertainty (method): first-order propagation in quadrature of the relative uncertainties the
relations carry, treated as independent. For element e with atoms G_e(D, t) per particle,
``u_e² = u_ε² + (s_D · u_D)² + (s_t · u_t)²`` with the log-sensitivities
``s_D = ∂ln G_e/∂ln D`` (3 for a bare core) and ``s_t = ∂ln G_e/∂ln t``. Because ε rises
with D, the ε and D errors partly cancel in reality; treating them as independent overstates
the uncertainty (a conservative choice). Errors of the measured absorbance, path length and
volume are not included. The values of u_ε, u_D and u_t are in :mod:`service.nano.materials`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from types import MappingProxyType
from typing import Mapping

from service.chem.formula import atomic_weight
from service.nano.errors import NanoError, require_positive
from service.nano.materials import Material, get_material
from service.nano.particles import (
    atoms_per_particle,
    shell_atoms_per_particle,
    shell_thickness_from_monolayers,
)
from service.nano.sizing import size_from_wavelength

__all__ = ["MetalEstimate", "particle_concentration", "estimate_metal_content"]

_MOL_PER_M3_PER_MOL_PER_L = 1000.0
_M3_PER_ML = 1e-6
_UG_PER_KG = 1e9
_KG_PER_G = 1e-3


@dataclass(frozen=True)
class MetalEstimate:
    """Element content of a volume of core or core–shell nanocrystal dispersion.

    Masses are in µg; ``metal_mass_ug_by_element`` holds the cations of core and shell
    (Cd, Zn), ``element_mass_ug_by_element`` every element (also Se, S, Te).
    ``relative_uncertainty`` is the largest of the metals' relative uncertainties.
    """

    core: str
    shell: str | None
    shell_monolayers: float
    wavelength_nm: float
    core_diameter_nm: float
    outer_diameter_nm: float
    extinction_per_m_per_cm: float
    particle_concentration_mol_per_l: float
    volume_ml: float
    particle_amount_mol: float
    atoms_per_particle: Mapping[str, float]
    element_mass_ug_by_element: Mapping[str, float]
    metal_mass_ug_by_element: Mapping[str, float]
    relative_uncertainty_by_element: Mapping[str, float]
    relative_uncertainty: float


def particle_concentration(
    absorbance: float,
    extinction_per_m_per_cm: float,
    path_length_cm: float = 1.0,
    dilution_factor: float = 1.0,
) -> float:
    """Particle molar concentration in mol/L from Beer–Lambert, c = A / (ε · l) × dilution.

    Parameters:
        absorbance: absorbance at the first excitonic peak of the measured (diluted) sample.
        extinction_per_m_per_cm: molar extinction coefficient ε of the particles, M⁻¹ cm⁻¹.
        path_length_cm: cuvette path length l, cm.
        dilution_factor: stock volume over measured-aliquot volume (1 if undiluted).

    Returns:
        Concentration of particles in the undiluted dispersion, mol/L.

    Raises:
        NonPositiveQuantityError: if any argument is not a positive finite number.

    >>> particle_concentration(0.5, 2.0e5, path_length_cm=1.0, dilution_factor=10)
    2.5e-05
    """
    a = require_positive("absorbance", absorbance)
    epsilon = require_positive("extinction_per_m_per_cm", extinction_per_m_per_cm, "M⁻¹ cm⁻¹")
    length = require_positive("path_length_cm", path_length_cm, "cm")
    dilution = require_positive("dilution_factor", dilution_factor)
    return a / (epsilon * length) * dilution


def _shell_sensitivities(core_diameter_nm: float, thickness_nm: float) -> tuple[float, float]:
    """∂ln V_shell/∂ln D and ∂ln V_shell/∂ln t for V = (D + 2t)³ − D³."""
    d, t = core_diameter_nm, thickness_nm
    outer = d + 2.0 * t
    volume = outer**3 - d**3
    return d * (3.0 * outer**2 - 3.0 * d**2) / volume, t * 6.0 * outer**2 / volume


def _relative_uncertainties(
    core: Mapping[str, float],
    shell: Mapping[str, float],
    sensitivities: tuple[float, float],
    u_extinction: float,
    u_diameter: float,
    u_thickness: float,
) -> dict[str, float]:
    """Per-element relative uncertainty of the mass, by the method in the module docstring."""
    shell_d, shell_t = sensitivities
    result = {}
    for symbol in {**core, **shell}:
        in_core, in_shell = core.get(symbol, 0.0), shell.get(symbol, 0.0)
        total = in_core + in_shell
        s_d = (3.0 * in_core + shell_d * in_shell) / total
        s_t = shell_t * in_shell / total
        result[symbol] = math.sqrt(
            u_extinction**2 + (s_d * u_diameter) ** 2 + (s_t * u_thickness) ** 2
        )
    return result


def estimate_metal_content(
    core: str | Material,
    wavelength_nm: float,
    absorbance: float,
    volume_ml: float,
    path_length_cm: float = 1.0,
    dilution_factor: float = 1.0,
    shell: str | Material | None = None,
    shell_monolayers: float = 0.0,
) -> MetalEstimate:
    """Mass of each element in ``volume_ml`` of a core (or core–shell) dispersion.

    The core's ε comes from the core relation even when a shell is present; a shell changes
    ε, so for core–shell particles this is an approximation (common practice: measure the
    core before shelling). Shell thickness = monolayers × the table's monolayer thickness
    (common practice).

    Parameters:
        core: core material, ``"CdTe"``, ``"CdSe"`` or ``"CdS"``.
        wavelength_nm: first excitonic peak of the core, nm.
        absorbance: absorbance at that peak of the measured sample.
        volume_ml: volume of the undiluted dispersion, mL.
        path_length_cm: cuvette path length, cm.
        dilution_factor: stock volume over measured-aliquot volume.
        shell: shell material (``"ZnS"``, ``"CdS"``) or None.
        shell_monolayers: number of shell monolayers (0 for none).

    Returns:
        A :class:`MetalEstimate`.

    Raises:
        UnknownMaterialError: for an unknown core or shell material.
        OutOfRangeError: if ``wavelength_nm`` is outside the core relation's range.
        NonPositiveQuantityError: for a non-positive absorbance, path, dilution or volume,
            or a negative number of monolayers.
        NanoError: if ``shell_monolayers`` is given without a ``shell``.
    """
    core_entry = get_material(core, role="core")
    size = size_from_wavelength(core_entry, wavelength_nm)
    volume = require_positive("volume_ml", volume_ml, "mL")
    molarity = particle_concentration(
        absorbance, size.extinction_per_m_per_cm, path_length_cm, dilution_factor
    )
    particles_mol = molarity * _MOL_PER_M3_PER_MOL_PER_L * volume * _M3_PER_ML

    if shell is None and shell_monolayers:
        raise NanoError(f"shell_monolayers is {shell_monolayers} but no shell material is given")
    shell_entry = get_material(shell, role="shell") if shell is not None else None
    core_atoms = atoms_per_particle(core_entry, size.diameter_nm)
    shell_atoms: Mapping[str, float] = {}
    thickness_nm, u_thickness, sensitivities = 0.0, 0.0, (0.0, 0.0)
    if shell_entry is not None:
        thickness_nm = shell_thickness_from_monolayers(shell_entry, shell_monolayers)
        if thickness_nm > 0:
            shell_atoms = shell_atoms_per_particle(shell_entry, size.diameter_nm, thickness_nm)
            sensitivities = _shell_sensitivities(size.diameter_nm, thickness_nm)
            u_thickness = shell_entry.monolayer_relative_uncertainty or 0.0
    symbols = {**core_atoms, **shell_atoms}
    atoms = {s: core_atoms.get(s, 0.0) + shell_atoms.get(s, 0.0) for s in symbols}

    masses = {
        symbol: particles_mol * count * atomic_weight(symbol) * _KG_PER_G * _UG_PER_KG
        for symbol, count in atoms.items()
    }
    metals = {core_entry.metal} | ({shell_entry.metal} if shell_atoms and shell_entry else set())
    uncertainties = _relative_uncertainties(
        core_atoms,
        shell_atoms,
        sensitivities,
        size.extinction_relative_uncertainty,
        size.diameter_relative_uncertainty,
        u_thickness,
    )
    return MetalEstimate(
        core=core_entry.formula,
        shell=shell_entry.formula if shell_entry is not None else None,
        shell_monolayers=float(shell_monolayers) if shell_entry is not None else 0.0,
        wavelength_nm=size.wavelength_nm,
        core_diameter_nm=size.diameter_nm,
        outer_diameter_nm=size.diameter_nm + 2.0 * thickness_nm,
        extinction_per_m_per_cm=size.extinction_per_m_per_cm,
        particle_concentration_mol_per_l=molarity,
        volume_ml=volume,
        particle_amount_mol=particles_mol,
        atoms_per_particle=MappingProxyType(dict(sorted(atoms.items()))),
        element_mass_ug_by_element=MappingProxyType(dict(sorted(masses.items()))),
        metal_mass_ug_by_element=MappingProxyType({m: masses[m] for m in sorted(metals)}),
        relative_uncertainty_by_element=MappingProxyType(dict(sorted(uncertainties.items()))),
        relative_uncertainty=max(uncertainties[m] for m in metals),
    )
