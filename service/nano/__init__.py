"""Nanocrystal computations: core size and extinction from the first excitonic peak,
particle concentration by Beer–Lambert, atoms per particle and element content.

Pure computation: no Flask, no database, no I/O. Everything a number depends on is an
argument; results are frozen dataclasses.
"""

from service.nano.errors import (
    NanoError,
    NonPositiveQuantityError,
    OutOfRangeError,
    UnknownMaterialError,
)
from service.nano.estimate import MetalEstimate, estimate_metal_content, particle_concentration
from service.nano.materials import (
    CORE_MATERIALS,
    MATERIALS,
    SHELL_MATERIALS,
    Material,
    get_material,
)
from service.nano.particles import (
    AVOGADRO_PER_MOL,
    atoms_per_particle,
    formula_units_in_volume,
    formula_units_per_particle,
    shell_atoms_per_particle,
    shell_thickness_from_monolayers,
    sphere_volume_nm3,
)
from service.nano.sizing import (
    SizeEstimate,
    diameter_from_wavelength,
    diameter_range_nm,
    extinction_coefficient,
    size_from_wavelength,
    wavelength_range_nm,
)

__all__ = [
    "AVOGADRO_PER_MOL",
    "CORE_MATERIALS",
    "MATERIALS",
    "SHELL_MATERIALS",
    "Material",
    "MetalEstimate",
    "NanoError",
    "NonPositiveQuantityError",
    "OutOfRangeError",
    "SizeEstimate",
    "UnknownMaterialError",
    "atoms_per_particle",
    "diameter_from_wavelength",
    "diameter_range_nm",
    "estimate_metal_content",
    "extinction_coefficient",
    "formula_units_in_volume",
    "formula_units_per_particle",
    "get_material",
    "particle_concentration",
    "shell_atoms_per_particle",
    "shell_thickness_from_monolayers",
    "size_from_wavelength",
    "sphere_volume_nm3",
    "wavelength_range_nm",
]
