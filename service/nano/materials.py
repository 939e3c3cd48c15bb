"""Material data for nanocrystal estimates: one small frozen table, each value with its source.

These are physical constants and published fit coefficients from the literature, not site
policy, which is why they live in code rather than in a rule pack.

Sources:
    * Sizing and extinction relations: W. W. Yu, L. Qu, W. Guo, X. Peng, *Chem. Mater.*
      2003, 15, 2854–2860 (D and λ in nm, ε in M⁻¹ cm⁻¹ at the first excitonic peak).
    * Bulk densities: S. O. Kasap, *Principles of Electronic Materials and Devices*, table of
      semiconductor properties (CdSe, CdS, CdTe); ZnS zinc blende from a secondary copy of
      handbook data (4.09–4.11 g/cm³; the low end is pinned).
    * Monolayer thicknesses of shells: common practice in the field, not a measured constant.

Wavelength ranges (conservative choice): the paper's own validity ranges are read from its
figures, which could not be confirmed here. Each span is instead derived from the equations:
the λ interval, rounded inwards to whole nanometres, over which D(λ) increases monotonically
and stays between 1 nm and 9 nm. For CdS the fitted D(λ) never drops below 1.30 nm, so the
lower end is the turning point of the cubic (274.6 nm). The paper's data may cover a
narrower span than this — verify against its figures.

Relative uncertainties (conservative choice, *not* the paper's stated scatter — verify):
10 % on the diameter from λ and 25 % on ε from λ (covering the whole chain λ → D → ε);
20 % on the shell thickness assumed per monolayer.
"""

from __future__ import annotations

from dataclasses import dataclass
from types import MappingProxyType
from typing import Mapping

from service.nano.errors import UnknownMaterialError

__all__ = ["Material", "MATERIALS", "CORE_MATERIALS", "SHELL_MATERIALS", "get_material"]

_YU_2003 = "Yu, Qu, Guo, Peng, Chem. Mater. 2003, 15, 2854-2860"
_KASAP = "Kasap, Principles of Electronic Materials and Devices (table; seen)"
_RANGE_NOTE = (
    "conservative choice: λ span where the fitted D(λ) is monotonic and within 1-9 nm, "
    "rounded inwards; not the paper's own range (verify)"
)
_UNCERTAINTY_NOTE = "conservative choice, not the paper's stated scatter (verify)"
_MONOLAYER_NOTE = "common practice"


@dataclass(frozen=True)
class Material:
    """Data for one semiconductor: bulk density, and where known its optical relations.

    ``sizing_coefficients`` give D (nm) as a polynomial in λ (nm), highest power first, as
    printed in the source. ``ε = extinction_prefactor · D ** extinction_exponent`` in
    M⁻¹ cm⁻¹. A material without relations (ZnS) can serve only as a shell.
    """

    formula: str
    metal: str
    density_g_per_cm3: float
    density_source: str
    sizing_coefficients: tuple[float, ...] | None = None
    extinction_prefactor: float | None = None
    extinction_exponent: float | None = None
    relation_source: str | None = None
    wavelength_range_nm: tuple[float, float] | None = None
    range_note: str | None = None
    diameter_relative_uncertainty: float | None = None
    extinction_relative_uncertainty: float | None = None
    uncertainty_note: str | None = None
    monolayer_thickness_nm: float | None = None
    monolayer_relative_uncertainty: float | None = None
    monolayer_source: str | None = None

    @property
    def has_optical_relations(self) -> bool:
        """True if the material can be sized from its first excitonic peak."""
        return self.sizing_coefficients is not None


_TABLE = (
    Material(
        formula="CdTe",
        metal="Cd",
        density_g_per_cm3=5.85,
        density_source=_KASAP,
        sizing_coefficients=(9.8127e-7, -1.7147e-3, 1.0064, -194.84),
        extinction_prefactor=10043.0,
        extinction_exponent=2.12,
        relation_source=_YU_2003,
        wavelength_range_nm=(465.0, 745.0),  # D(464.25 nm) = 1 nm, D(745.29 nm) = 9 nm
        range_note=_RANGE_NOTE,
        diameter_relative_uncertainty=0.10,
        extinction_relative_uncertainty=0.25,
        uncertainty_note=_UNCERTAINTY_NOTE,
    ),
    Material(
        formula="CdSe",
        metal="Cd",
        density_g_per_cm3=5.81,
        density_source=_KASAP,
        sizing_coefficients=(1.6122e-9, -2.6575e-6, 1.6242e-3, -0.4277, 41.57),
        extinction_prefactor=5857.0,
        extinction_exponent=2.65,
        relation_source=_YU_2003,
        wavelength_range_nm=(340.0, 663.0),  # D(339.59 nm) = 1 nm, D(663.23 nm) = 9 nm
        range_note=_RANGE_NOTE,
        diameter_relative_uncertainty=0.10,
        extinction_relative_uncertainty=0.25,
        uncertainty_note=_UNCERTAINTY_NOTE,
    ),
    Material(
        formula="CdS",
        metal="Cd",
        density_g_per_cm3=4.82,
        density_source=_KASAP,
        sizing_coefficients=(-6.6521e-8, 1.9557e-4, -9.2352e-2, 13.29),
        extinction_prefactor=21536.0,
        extinction_exponent=2.3,
        relation_source=_YU_2003,
        wavelength_range_nm=(275.0, 523.0),  # minimum of D(λ) at 274.58 nm; D(523.56 nm) = 9 nm
        range_note=_RANGE_NOTE,
        diameter_relative_uncertainty=0.10,
        extinction_relative_uncertainty=0.25,
        uncertainty_note=_UNCERTAINTY_NOTE,
        monolayer_thickness_nm=0.35,
        monolayer_relative_uncertainty=0.20,
        monolayer_source=_MONOLAYER_NOTE,
    ),
    Material(
        formula="ZnS",
        metal="Zn",
        density_g_per_cm3=4.09,
        density_source="zinc blende, handbook value via a secondary copy (4.09-4.11; 2nd)",
        monolayer_thickness_nm=0.31,
        monolayer_relative_uncertainty=0.20,
        monolayer_source=_MONOLAYER_NOTE,
    ),
)

MATERIALS: Mapping[str, Material] = MappingProxyType({m.formula: m for m in _TABLE})
CORE_MATERIALS: tuple[str, ...] = tuple(m.formula for m in _TABLE if m.has_optical_relations)
SHELL_MATERIALS: tuple[str, ...] = tuple(
    m.formula for m in _TABLE if m.monolayer_thickness_nm is not None
)


def get_material(name: str | Material, role: str = "material") -> Material:
    """Look up a material by formula (``"CdSe"``; case is ignored).

    Parameters:
        name: the formula as in :data:`MATERIALS`, or a :class:`Material` (returned as is).
        role: ``"material"`` (any entry), ``"core"`` (needs optical relations) or
            ``"shell"`` (needs a monolayer thickness).

    Returns:
        The :class:`Material` entry.

    Raises:
        UnknownMaterialError: if the table has no entry, or none usable in ``role``.

    >>> get_material("cdse").density_g_per_cm3
    5.81
    """
    known = {"material": tuple(MATERIALS), "core": CORE_MATERIALS, "shell": SHELL_MATERIALS}
    if role not in known:
        raise ValueError(f"role must be one of {', '.join(known)}, got {role!r}")
    if isinstance(name, Material):
        material = name
    else:
        by_lower = {key.lower(): value for key, value in MATERIALS.items()}
        material = by_lower.get(str(name).strip().lower())
        if material is None:
            raise UnknownMaterialError(str(name), known[role], role)
    usable = {
        "material": True,
        "core": material.has_optical_relations,
        "shell": material.monolayer_thickness_nm is not None,
    }
    if not usable[role]:
        raise UnknownMaterialError(material.formula, known[role], role)
    return material
