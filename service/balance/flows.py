"""The flows of one run: what went in, and where it was recorded as going.

A :class:`Flow` is one line of a run's mass balance — a reagent draw (``input``), a product
(``product``), a waste entry (``waste``) or a declared loss (``loss``) — with its element
masses in integer micrograms, as the ledger stores them. Flows check themselves on
construction, so a balance never starts from impossible numbers.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from decimal import Decimal
from typing import Literal, Mapping, Optional

from service import vocab

__all__ = ["Flow", "BalanceError", "DuplicateByDifferenceError", "KINDS", "PRODUCT_METHODS"]

KINDS = ("input", "product", "waste", "loss")
PRODUCT_METHODS = ("measured", "estimated", "by_difference")


class BalanceError(ValueError):
    """Flows that cannot make a mass balance (a bad kind, mass, method or uncertainty)."""


class DuplicateByDifferenceError(BalanceError):
    """Two products both claim the remainder of the same element."""


@dataclass(frozen=True)
class Flow:
    """One line of a run's mass balance.

    :param label: what the line is, e.g. "CdO draw" or "supernatant 1 → container W-3"
    :param kind: ``input``, ``product``, ``waste`` or ``loss``
    :param element_mass_ug: element symbol → integer µg, ≥ 0 except for a waste correction
        entry (entries are append-only, so a correction may be negative); for a
        ``by_difference`` product the keys name the elements it takes the remainder of and the
        values are ignored
    :param method: products only — ``measured`` (default when None), ``estimated`` or
        ``by_difference``
    :param relative_uncertainty: estimated products only, required there: e.g. 0.15 for ±15 %
    :raises BalanceError: any of the above not respected
    """

    label: str
    kind: Literal["input", "product", "waste", "loss"]
    element_mass_ug: Mapping[str, int] = field(default_factory=dict)
    method: Optional[str] = None
    relative_uncertainty: Optional[float] = None

    def __post_init__(self) -> None:
        where = f"flow {self.label!r}"
        if self.kind not in KINDS:
            raise BalanceError(f"{where}: kind {self.kind!r} is not one of {', '.join(KINDS)}")
        for symbol, mass_ug in self.element_mass_ug.items():
            try:
                vocab.element_symbol(symbol)
            except vocab.UnknownElementError as exc:
                raise BalanceError(f"{where}: {exc}") from None
            if isinstance(mass_ug, bool) or not isinstance(mass_ug, int):
                raise BalanceError(f"{where}: {symbol} mass must be a whole number of µg, not {mass_ug!r}")
            if mass_ug < 0 and self.kind != "waste":
                raise BalanceError(f"{where}: {symbol} mass must not be negative (only a waste correction may be)")
        if self.method is not None and self.kind != "product":
            raise BalanceError(f"{where}: only a product has a method (measured, estimated, by_difference)")
        if self.kind == "product" and self.product_method not in PRODUCT_METHODS:
            raise BalanceError(f"{where}: method {self.method!r} is not one of {', '.join(PRODUCT_METHODS)}")
        estimated = self.kind == "product" and self.product_method == "estimated"
        if estimated and self.relative_uncertainty is None:
            raise BalanceError(f"{where}: an estimated product needs its relative uncertainty (e.g. 0.15 for ±15 %)")
        if not estimated and self.relative_uncertainty is not None:
            raise BalanceError(f"{where}: only an estimated product carries a relative uncertainty")
        if estimated:
            value = self.relative_uncertainty
            if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value) or value < 0:
                raise BalanceError(f"{where}: relative uncertainty must be a number ≥ 0, not {value!r}")

    @property
    def product_method(self) -> Optional[str]:
        """The product's method, ``measured`` when none was given; None for other kinds."""
        if self.kind != "product":
            return None
        return self.method or "measured"

    @property
    def by_difference(self) -> bool:
        """True for a product whose masses are the remainder of the balance."""
        return self.product_method == "by_difference"

    def uncertainty_fraction(self) -> Decimal:
        """The relative uncertainty as an exact Decimal (0 for anything not estimated)."""
        if self.relative_uncertainty is None:
            return Decimal(0)
        return Decimal(repr(float(self.relative_uncertainty)))
