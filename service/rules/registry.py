"""The measure registry and the number helpers every measure uses.

A measure turns a subject (see :mod:`service.rules.subjects`) into a
:class:`MeasureResult` in the measure's unit, or ``None`` when it does not apply (the rule
is then skipped). A parameterised measure is named ``name:<argument>``
(``element_mass:Cd``); a module that brings a new kind of argument registers it with
:func:`parameter`. The measures themselves live in :mod:`service.rules.measures`
(procedures) and :mod:`service.rules.container_measures` (waste containers); both import
this module and neither imports the other.
"""

from __future__ import annotations

from dataclasses import dataclass
from decimal import Decimal
from typing import Callable, Optional

from service import vocab

__all__ = ["MeasureResult", "Measure", "MeasureNameError", "MEASURES", "measure", "parameter", "resolve_measure",
           "vocabulary", "dec", "plain", "text"]


@dataclass(frozen=True)
class MeasureResult:
    """A computed value (int for counts and µg, else float) in ``unit``, with a readable detail."""

    value: float
    unit: str
    detail: str = ""


@dataclass(frozen=True)
class Measure:
    """A named measure: its scope, pint unit ("" for dimensionless) and how to compute it."""

    name: str
    scope: str
    unit: str
    description: str
    compute: Callable[[object, Optional[str]], Optional[MeasureResult]]
    parameter: Optional[str] = None  # kind of the ":<argument>", e.g. "element"
    # True when the measure reads the subject's clock (its ``CLOCK_FIELDS``, e.g. days since the first
    # entry): its value changes with time alone. Every other measure must not read those fields.
    clock: bool = False


class MeasureNameError(ValueError):
    """A measure name that is unknown or has a missing, unexpected or bad argument."""


MEASURES: dict[str, Measure] = {}
_PARAMETER_LABELS = {"element": "<El>"}


def measure(name: str, *, scope: str, unit: str, parameter: Optional[str] = None, clock: bool = False):
    """Register the decorated function as measure ``name`` (description: its docstring's first line);
    ``clock``: it reads the subject's clock fields (see :class:`Measure`)."""

    def register(compute):
        description = (compute.__doc__ or "").strip().splitlines()[0]
        MEASURES[name] = Measure(name, scope, unit, description, compute, parameter, clock)
        return compute

    return register


def _check_element(symbol: str) -> str:
    """Return ``symbol`` if it is a chemical element symbol; raise MeasureNameError otherwise."""
    try:
        return vocab.element_symbol(symbol)
    except vocab.UnknownElementError as exc:
        raise MeasureNameError(str(exc)) from None


_PARAMETER_CHECKS = {"element": _check_element}


def parameter(kind: str, label: str, check: Callable[[str], str]) -> None:
    """Register a kind of measure argument: its label in the vocabulary (``<key>``) and its check.

    ``check`` returns the argument or raises :class:`MeasureNameError`.
    """
    _PARAMETER_LABELS[kind] = label
    _PARAMETER_CHECKS[kind] = check


def resolve_measure(name: str) -> tuple[Measure, Optional[str]]:
    """Look up ``name`` (``base`` or ``base:arg``) in the registry.

    :returns: the measure and its checked argument (None if it takes none)
    :raises MeasureNameError: unknown name, missing/unexpected argument, bad element symbol
    """
    base, sep, arg = name.partition(":")
    found = MEASURES.get(base)
    if found is None:
        known = ", ".join(sorted(entry["name"] for entry in vocabulary()))
        raise MeasureNameError(f"unknown measure {name!r}; known measures: {known}")
    if found.parameter is None:
        if sep:
            raise MeasureNameError(f"measure {base!r} takes no ':<argument>'")
        return found, None
    if not arg:
        raise MeasureNameError(f"measure {base!r} needs an argument: {base}:{_PARAMETER_LABELS[found.parameter]}")
    return found, _PARAMETER_CHECKS[found.parameter](arg)


def vocabulary() -> list[dict]:
    """The measure table for documentation: name, scope, unit, description, in registry order."""
    rows = []
    for entry in MEASURES.values():
        label = f"{entry.name}:{_PARAMETER_LABELS[entry.parameter]}" if entry.parameter else entry.name
        rows.append({"name": label, "scope": entry.scope, "unit": entry.unit, "description": entry.description})
    return rows


# ---------------------------------------------------------------- helpers ----


def dec(number: float) -> Decimal:
    """A float as the Decimal of its shortest repr (300.5 -> Decimal('300.5'))."""
    return Decimal(repr(float(number)))


def plain(number: Decimal) -> float | int:
    """An int when ``number`` is integral, else a float."""
    return int(number) if number == number.to_integral_value() else float(number)


def text(number: Decimal) -> str:
    """Decimal without exponent or trailing zeros: Decimal('151.0') -> '151'."""
    return f"{number.normalize():f}"
