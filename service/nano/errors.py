"""Errors raised by the nanocrystal computations.

All of them are :class:`ValueError` subclasses that carry the offending value and
what would have been accepted, so that an API layer can report them field by field.
"""

from __future__ import annotations

__all__ = [
    "NanoError",
    "UnknownMaterialError",
    "OutOfRangeError",
    "NonPositiveQuantityError",
    "require_positive",
]


class NanoError(ValueError):
    """Base class of every error raised by :mod:`service.nano`."""


class UnknownMaterialError(NanoError):
    """A material that the table has no data for (or none for the requested role)."""

    def __init__(self, material: str, known: tuple[str, ...], role: str = "material") -> None:
        self.material = material
        self.known = known
        self.role = role
        super().__init__(
            f"no {role} data for {material!r}; known: {', '.join(known)}"
        )


class OutOfRangeError(NanoError):
    """A value outside the range over which an empirical relation is used.

    Carries ``material``, ``quantity``, ``value``, ``low``, ``high`` and ``unit``.
    Relations are never extrapolated.
    """

    def __init__(
        self, material: str, quantity: str, value: float, low: float, high: float, unit: str
    ) -> None:
        self.material = material
        self.quantity = quantity
        self.value = value
        self.low = low
        self.high = high
        self.unit = unit
        super().__init__(
            f"{material}: {quantity} {value:g} {unit} is outside the valid range "
            f"{low:g}–{high:g} {unit}; the relation is not extrapolated"
        )


class NonPositiveQuantityError(NanoError):
    """A quantity that must be a positive finite number (absorbance, path length, volume…)."""

    def __init__(self, name: str, value: object, unit: str = "", allow_zero: bool = False) -> None:
        self.name = name
        self.value = value
        self.unit = unit
        self.allow_zero = allow_zero
        shown = f"{value} {unit}".strip()
        kind = "non-negative" if allow_zero else "positive"
        super().__init__(f"{name} must be a {kind} finite number, got {shown}")


def require_positive(name: str, value: float, unit: str = "", allow_zero: bool = False) -> float:
    """Return ``value`` as a float if it is a positive (or, if allowed, zero) finite number.

    Raises:
        NonPositiveQuantityError: if ``value`` is negative, zero (unless ``allow_zero``), NaN,
            infinite or not a number.
    """
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise NonPositiveQuantityError(name, value, unit, allow_zero)
    number = float(value)
    acceptable = number >= 0.0 if allow_zero else number > 0.0
    if not (acceptable and number != float("inf")):  # NaN fails both comparisons
        raise NonPositiveQuantityError(name, value, unit, allow_zero)
    return number
