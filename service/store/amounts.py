"""Element amounts as entered (a mass, or an assay: concentration × volume) -> exact integer µg.

The one conversion for every record that takes element amounts: run outputs and losses, and
waste entries. An assay gives concentration × volume, computed in Decimal and rounded to µg
once (half to even).

>>> from service.schemas import AssayIn, ElementAmountIn
>>> assay_ug(AssayIn(element="Cd", concentration="12.5 mg/L", volume="4.0 mL"))
50
>>> element_masses_ug([ElementAmountIn(element="Cd", mass="2.5 mg")])
{'Cd': 2500}
"""

from __future__ import annotations

from decimal import Decimal

from service.chem.content import round_ug
from service.chem.units import check_bounds, parse_quantity, to_decimal, ureg, whole_micro
from service.errors import InvalidInput
from service.schemas import AssayIn, ElementAmountIn

__all__ = ["mass_ug", "assay_ug", "element_masses_ug", "assay_masses_ug", "mg_text"]


def mass_ug(row: ElementAmountIn, field: str) -> int:
    """The mass of one element row in whole µg (``field`` names it in an error)."""
    return whole_micro(row.mass, "ug", expect="mass", field=f"{field}.mass")


def assay_ug(assay: AssayIn, field: str = "assay") -> int:
    """concentration × volume of one assay, in µg rounded once; like an element mass given as such, at
    most MAX_MASS (each factor is bounded by its schema type, their product by this)."""
    c = to_decimal(parse_quantity(assay.concentration, field=f"{field}.concentration"), "ug/mL")
    v = to_decimal(parse_quantity(assay.volume, expect="volume", field=f"{field}.volume"), "mL")
    ug = round_ug(c * v)
    check_bounds(ureg.Quantity(ug, "ug"), text=f"{assay.concentration} × {assay.volume}", field=field)
    return ug


def element_masses_ug(rows: list[ElementAmountIn], field: str = "elements") -> dict[str, int]:
    """Element amounts as {symbol: µg}; a repeated element is an error, not a silent sum."""
    out: dict[str, int] = {}
    for i, row in enumerate(rows):  # symbols are checked by the schema (ElementSymbol)
        if row.element in out:
            raise InvalidInput(f"{field}[{i}].element", f"{row.element} is given twice")
        out[row.element] = mass_ug(row, f"{field}[{i}]")
    return out


def assay_masses_ug(rows: list[AssayIn], field: str = "assays") -> dict[str, int]:
    """Assays as {symbol: µg}; several assays of one element add up (e.g. two fractions measured apart)."""
    out: dict[str, int] = {}
    for i, assay in enumerate(rows):
        out[assay.element] = out.get(assay.element, 0) + assay_ug(assay, f"{field}[{i}]")
    return out


def mg_text(ug: int) -> str:
    """µg as a short mg text, exact.

    >>> mg_text(3512), mg_text(500_000), mg_text(-200)
    ('3.512 mg', '500 mg', '-0.2 mg')
    """
    return f"{(Decimal(ug) / 1000).normalize():f} mg"
