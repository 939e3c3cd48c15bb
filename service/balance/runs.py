"""Mass balance of one run, per element: input − product − waste − losses = unaccounted.

All masses are integer micrograms and the arithmetic is exact. An element closes when
``|unaccounted| <= tolerance_fraction × input`` (exactly, in Decimal); the run closes when
every element does. Estimated products give an uncertainty band (their mass × their
relative uncertainty, rounded half to even to whole µg); an unaccounted part inside that band
is reported as within the estimate's uncertainty, but closing still follows the tolerance
alone — an estimate does not widen the site tolerance.

>>> flows = [Flow("CdO", "input", {"Cd": 1000}), Flow("dots", "product", {"Cd": 960})]
>>> run_balance(flows, tolerance_fraction=Decimal("0.05")).element("Cd").closes
True
"""

from __future__ import annotations

from dataclasses import dataclass
from decimal import ROUND_HALF_EVEN, Decimal
from typing import Iterable, Optional

from service.balance.flows import BalanceError, DuplicateByDifferenceError, Flow
from service.balance.hints import hints_for, notes_for

__all__ = ["WasteShare", "ElementBalance", "RunBalance", "run_balance"]

_PERCENT_PLACES = Decimal("0.01")


@dataclass(frozen=True)
class WasteShare:
    """One waste entry's share of an element, in µg."""

    label: str
    ug: int


@dataclass(frozen=True)
class ElementBalance:
    """The balance of one element.

    ``closure_percent`` is 100 × (input − |unaccounted|) / input, to 0.01 %; None without
    input, and below 0 when |unaccounted| exceeds the input. ``tolerance_ug`` is
    tolerance × input, exact. ``remaining_ug`` is input − the recorded products (a by-difference
    one left out), waste and losses: what a further waste entry may still take (equal to
    ``unaccounted_ug`` unless a product takes the remainder by difference).
    """

    element: str
    input_ug: int
    product_ug: int
    waste: tuple[WasteShare, ...]
    losses_ug: int
    unaccounted_ug: int
    closure_percent: Optional[Decimal]
    tolerance_ug: Decimal
    closes: bool
    by_difference: bool
    uncertainty_ug: int
    within_uncertainty: bool
    hints: tuple[str, ...]
    notes: tuple[str, ...]
    remaining_ug: int

    @property
    def waste_ug(self) -> int:
        """The element's total over all waste entries, in µg."""
        return sum(share.ug for share in self.waste)


@dataclass(frozen=True)
class RunBalance:
    """The balance of every element of a run, in element order."""

    tolerance_fraction: Decimal
    elements: tuple[ElementBalance, ...]

    @property
    def closes(self) -> bool:
        """True when every element closes within the tolerance."""
        return all(row.closes for row in self.elements)

    def element(self, symbol: str) -> ElementBalance:
        """The balance of one element; raises KeyError if the run has none for it."""
        for row in self.elements:
            if row.element == symbol:
                return row
        raise KeyError(symbol)

    def to_rows(self) -> list[dict]:
        """Plain dicts, one per element, units in the keys (for a DataFrame or JSON)."""
        return [
            {
                "element": row.element,
                "input_ug": row.input_ug,
                "product_ug": row.product_ug,
                "waste_ug": row.waste_ug,
                "waste": [{"label": share.label, "ug": share.ug} for share in row.waste],
                "losses_ug": row.losses_ug,
                "unaccounted_ug": row.unaccounted_ug,
                "remaining_ug": row.remaining_ug,
                "closure_percent": None if row.closure_percent is None else float(row.closure_percent),
                "tolerance_ug": float(row.tolerance_ug),
                "closes": row.closes,
                "by_difference": row.by_difference,
                "uncertainty_ug": row.uncertainty_ug,
                "within_uncertainty": row.within_uncertainty,
                "hints": list(row.hints),
                "notes": list(row.notes),
            }
            for row in self.elements
        ]


def _tolerance(value: object) -> Decimal:
    """The site tolerance as an exact Decimal in [0, 1); floats are refused (binary drift)."""
    if isinstance(value, bool) or not isinstance(value, (Decimal, int, str)):
        raise BalanceError(f"tolerance_fraction must be a Decimal such as Decimal('0.05'), not {value!r}")
    tolerance = Decimal(value)
    if not tolerance.is_finite() or not Decimal(0) <= tolerance < 1:
        raise BalanceError(f"tolerance_fraction must be at least 0 and below 1, not {value!r}")
    return tolerance


def _elements(flows: list[Flow]) -> list[str]:
    """Elements with a non-zero mass in any flow, or named by a by-difference product."""
    found = {el for f in flows for el, ug in f.element_mass_ug.items() if ug != 0 or f.by_difference}
    return sorted(found)


def _element(flows: list[Flow], element: str, tolerance: Decimal) -> ElementBalance:
    """The balance of ``element`` over ``flows``; raises DuplicateByDifferenceError."""
    mine = [f for f in flows if element in f.element_mass_ug]
    claims = [f.label for f in mine if f.by_difference]
    if len(claims) > 1:
        raise DuplicateByDifferenceError(
            f"{element}: only one product may take the remainder by difference; "
            f"{', '.join(repr(c) for c in claims)} both do — measure or estimate all but one"
        )
    total = {kind: sum(f.element_mass_ug[element] for f in mine if f.kind == kind and not f.by_difference)
             for kind in ("input", "product", "loss")}  # fmt: skip
    waste = tuple(WasteShare(f.label, f.element_mass_ug[element]) for f in mine if f.kind == "waste")
    recorded_out = total["product"] + sum(s.ug for s in waste) + total["loss"]
    remainder = total["input"] - recorded_out
    by_difference = bool(claims)
    clamped = by_difference and remainder < 0
    product_ug = total["product"] + (max(remainder, 0) if by_difference else 0)
    unaccounted = total["input"] - product_ug - sum(s.ug for s in waste) - total["loss"]
    estimated = [f for f in mine if f.product_method == "estimated"]
    band = sum((f.element_mass_ug[element] * f.uncertainty_fraction() for f in estimated), Decimal(0))
    band_ug = int(band.quantize(Decimal(1), rounding=ROUND_HALF_EVEN))
    tolerance_ug = tolerance * total["input"]
    closes = Decimal(abs(unaccounted)) <= tolerance_ug
    within = bool(estimated) and unaccounted != 0 and abs(unaccounted) <= band_ug
    closure = None
    if total["input"] > 0:
        exact = Decimal(100) * (total["input"] - abs(unaccounted)) / total["input"]
        closure = exact.quantize(_PERCENT_PLACES, rounding=ROUND_HALF_EVEN)
    hints = () if closes else hints_for(element, total["input"], unaccounted, has_estimate=bool(estimated))
    return ElementBalance(
        element=element,
        input_ug=total["input"],
        product_ug=product_ug,
        waste=waste,
        losses_ug=total["loss"],
        unaccounted_ug=unaccounted,
        closure_percent=closure,
        tolerance_ug=tolerance_ug,
        closes=closes,
        by_difference=by_difference,
        uncertainty_ug=band_ug,
        within_uncertainty=within,
        hints=hints,
        notes=notes_for(by_difference=by_difference, clamped=clamped, within_uncertainty=within, band_ug=band_ug),
        remaining_ug=remainder,
    )


def run_balance(flows: Iterable[Flow], *, tolerance_fraction: Decimal) -> RunBalance:
    """Balance every element of a run.

    :param flows: the run's inputs, products, waste entries and declared losses
    :param tolerance_fraction: the site tolerance as a fraction of input, e.g. Decimal("0.05")
    :returns: one :class:`ElementBalance` per element found in any flow, sorted by symbol
    :raises BalanceError: a bad tolerance or a flow that is not a :class:`Flow`
    :raises DuplicateByDifferenceError: two by-difference products for one element
    """
    tolerance = _tolerance(tolerance_fraction)
    flows = list(flows)
    if not all(isinstance(f, Flow) for f in flows):
        raise BalanceError("every flow must be a service.balance.Flow")
    rows = tuple(_element(flows, element, tolerance) for element in _elements(flows))
    return RunBalance(tolerance, rows)
