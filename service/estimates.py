"""Metal content estimated from absorbance: the request body to the pure calculation and back."""

from __future__ import annotations

from typing import Any

from service.chem.units import parse_quantity, to_decimal
from service.nano import estimate_metal_content
from service.schemas import EstimateIn

__all__ = ["estimate", "as_dict", "CAUTION"]

CAUTION = ("An estimate from the first excitonic absorption peak (empirical sizing and extinction relations, "
           "spherical particles of bulk density). It carries the stated relative uncertainty; an elemental assay "
           "is the better basis for waste records.")


def estimate(body: EstimateIn):
    """The :class:`service.nano.MetalEstimate` for the dispersion described by ``body``."""
    volume_ml = float(to_decimal(parse_quantity(body.volume, expect="volume", field="volume"), "mL"))
    return estimate_metal_content(
        body.core, body.wavelength_nm, body.absorbance, volume_ml, path_length_cm=body.path_length_cm,
        dilution_factor=body.dilution_factor, shell=body.shell, shell_monolayers=body.shell_monolayers)


def masses_ug(result) -> dict[str, int]:
    """Element masses of an estimate, rounded to integer µg for the ledger."""
    return {s: int(round(ug)) for s, ug in sorted(result.element_mass_ug_by_element.items())}


def as_dict(result) -> dict[str, Any]:
    """A JSON-ready view of an estimate, units in the names."""
    return {
        "core": result.core, "shell": result.shell, "shell_monolayers": result.shell_monolayers,
        "wavelength_nm": result.wavelength_nm, "core_diameter_nm": result.core_diameter_nm,
        "outer_diameter_nm": result.outer_diameter_nm,
        "extinction_per_m_per_cm": result.extinction_per_m_per_cm,
        "particle_concentration_mol_per_l": result.particle_concentration_mol_per_l,
        "volume_ml": result.volume_ml, "particle_amount_mol": result.particle_amount_mol,
        "atoms_per_particle": dict(result.atoms_per_particle),
        "elements": [{"element": s, "mass_ug": ug, "mass_mg": ug / 1000,
                      "relative_uncertainty": result.relative_uncertainty_by_element.get(s)}
                     for s, ug in masses_ug(result).items()],
        "relative_uncertainty": result.relative_uncertainty,
        "source": "Yu, Qu, Guo, Peng, Chem. Mater. 2003, 15, 2854-2860 (sizing and extinction relations)",
        "caution": CAUTION,
    }
