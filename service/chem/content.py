"""Element content of held and prepared materials, exact to the microgram.

- A pure substance: mass × purity × mass fraction of the element (from the formula).
- A solution component given by molarity: molarity × volume × atoms of the element per
  formula unit × standard atomic weight.
- A component given by mass fraction: mixture volume × mixture density × mass fraction.
- A component given by volume fraction: mixture volume × volume fraction × component density.

All arithmetic is Decimal; totals are rounded once, half to even, to integer
micrograms, so that sums kept in the ledger never drift.
"""

from __future__ import annotations

from dataclasses import dataclass
from decimal import ROUND_HALF_EVEN, Decimal
from fractions import Fraction
from typing import Iterable, Mapping, Optional

from service.chem.formula import atomic_weight_decimal, parse_formula
from service.chem.units import QuantityError, mass_g, parse_quantity, to_decimal

__all__ = [
    "Component",
    "element_mass_fractions",
    "substance_element_masses_ug",
    "mixture_element_masses_ug",
    "mixture_element_ug_per_ml",
    "round_ug",
    "share_ug",
    "total_ug",
]

_UG_PER_G = Decimal(1_000_000)


def round_ug(value: Decimal) -> int:
    """Round a mass in micrograms to an integer, half to even."""
    return int(value.quantize(Decimal(1), rounding=ROUND_HALF_EVEN))


def share_ug(masses_ug: Mapping[str, int], part: int, whole: int) -> dict[str, int]:
    """The element masses (µg) in ``part`` of ``whole`` (both integers in one unit), exactly.

    Each element's mass × part / whole is an exact fraction, rounded once, half to even; so taking
    the result away from ``masses_ug`` leaves exactly what was not taken, and taking everything
    (``part == whole``) takes every microgram.

    >>> share_ug({"Cd": 15_000, "Se": 11_001}, 1, 3)
    {'Cd': 5000, 'Se': 3667}
    >>> share_ug({"Cd": 5}, 1, 2)  # 2.5 rounds to even
    {'Cd': 2}
    """
    if isinstance(part, bool) or isinstance(whole, bool) or not isinstance(part, int) or not isinstance(whole, int):
        raise TypeError("part and whole must be integers")
    if whole <= 0 or part < 0:
        raise ValueError(f"a share needs 0 <= part and 0 < whole, not {part} of {whole}")
    return {s: round(Fraction(ug * part, whole)) for s, ug in masses_ug.items()}


def element_mass_fractions(formula: str) -> dict[str, Decimal]:
    """Mass fraction of each element in ``formula``, as Decimals summing to 1.

    >>> round(element_mass_fractions("CdO")["Cd"], 4)
    Decimal('0.8754')
    """
    parsed = parse_formula(formula)
    masses = {s: Decimal(repr(n)) * atomic_weight_decimal(s) for s, n in parsed.atoms.items()}
    total = sum(masses.values())
    return {s: m / total for s, m in masses.items()}


def substance_element_masses_ug(
    amount: str,
    formula: str,
    *,
    purity: Decimal | float = 1,
    density_g_per_ml: Optional[float] = None,
    substance: str = "substance",
) -> dict[str, int]:
    """Element masses (µg) in ``amount`` (a mass or volume text) of a pure substance.

    Raises QuantityError for a bad amount and MissingDensityError (naming ``substance``)
    when a volume has no density.

    >>> substance_element_masses_ug("100 mg", "CdO")["Cd"]
    87541
    """
    purity_d = _fraction(purity, "purity")
    quantity = parse_quantity(amount, expect=("mass", "volume"), field="amount")
    grams = mass_g(quantity, density_g_per_ml=density_g_per_ml, substance=substance, field="amount")
    return {
        s: round_ug(grams * purity_d * f * _UG_PER_G) for s, f in element_mass_fractions(formula).items()
    }


@dataclass(frozen=True)
class Component:
    """One component of a mixture: exactly one of molarity, mass or volume fraction."""

    substance: str
    formula: str
    molarity: Optional[str] = None  # "0.2 mol/L"
    mass_fraction: Optional[Decimal] = None  # 0–1
    volume_fraction: Optional[Decimal] = None  # 0–1
    density_g_per_ml: Optional[float] = None  # of the component (for volume fractions)


def mixture_element_ug_per_ml(
    components: Iterable[Component], *, density_g_per_ml: Optional[float] = None, name: str = "mixture"
) -> dict[str, Decimal]:
    """Element content per millilitre of a mixture, in µg/mL (unrounded Decimals).

    A mass-fraction component needs the mixture density; a volume-fraction component
    needs the component's density.
    """
    per_ml: dict[str, Decimal] = {}
    for index, comp in enumerate(components):
        field = f"components[{index}]"
        given = [v is not None for v in (comp.molarity, comp.mass_fraction, comp.volume_fraction)]
        if sum(given) != 1:
            raise QuantityError("", "give exactly one of molarity, mass_fraction or volume_fraction", field)
        if comp.molarity is not None:
            molar = to_decimal(parse_quantity(comp.molarity, expect="molarity", field=f"{field}.molarity"), "mol/mL")
            atoms = parse_formula(comp.formula).atoms
            masses = {s: molar * Decimal(repr(n)) * atomic_weight_decimal(s) * _UG_PER_G for s, n in atoms.items()}
        else:
            if comp.mass_fraction is not None:
                grams_per_ml = _density(density_g_per_ml, name, field) * _fraction(comp.mass_fraction, f"{field}.mass_fraction")
            else:
                grams_per_ml = _density(comp.density_g_per_ml, comp.substance, field) * _fraction(
                    comp.volume_fraction, f"{field}.volume_fraction"
                )
            masses = {s: grams_per_ml * f * _UG_PER_G for s, f in element_mass_fractions(comp.formula).items()}
        for symbol, value in masses.items():
            per_ml[symbol] = per_ml.get(symbol, Decimal(0)) + value
    return per_ml


def mixture_element_masses_ug(
    volume: str,
    components: Iterable[Component],
    *,
    density_g_per_ml: Optional[float] = None,
    name: str = "mixture",
) -> dict[str, int]:
    """Element masses (µg) in ``volume`` (text, e.g. "10.0 mL") of a mixture.

    >>> mixture_element_masses_ug("10.0 mL", [Component("cadmium oleate", "Cd(C18H33O2)2", molarity="0.20 mol/L")])["Cd"]
    224828
    """
    quantity = parse_quantity(volume, expect="volume", field="volume")
    volume_ml = to_decimal(quantity, "mL")
    per_ml = mixture_element_ug_per_ml(components, density_g_per_ml=density_g_per_ml, name=name)
    return {s: round_ug(v * volume_ml) for s, v in per_ml.items()}


def _fraction(value: Decimal | float | None, field: str) -> Decimal:
    number = Decimal(repr(value)) if isinstance(value, float) else Decimal(value)
    if not (0 <= number <= 1):
        raise QuantityError(str(value), "must be a fraction between 0 and 1", field)
    return number


def _density(value: Optional[float], substance: str, field: str) -> Decimal:
    if value is None:
        raise QuantityError("", f"{substance!r} needs a density (g/mL) for a fraction by mass or volume", field)
    return Decimal(repr(float(value)))


def total_ug(parts: Iterable[Mapping[str, int]]) -> dict[str, int]:
    """Sum element masses (µg) of several parts, by element."""
    out: dict[str, int] = {}
    for part in parts:
        for symbol, ug in part.items():
            out[symbol] = out.get(symbol, 0) + ug
    return out
