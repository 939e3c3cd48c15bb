"""Chemical formulas: parsing, molar mass and element mass fractions.

Parsing is delegated to :mod:`periodictable` (CIAAW standard atomic weights). This
module adds what a laboratory catalogue needs on top of it: hydrate notation with a
middle dot (``CdCl2·2.5H2O``), a frozen result object, and an error that says where
the formula went wrong.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from decimal import Decimal
from functools import lru_cache
from types import MappingProxyType
from typing import Mapping

import periodictable
from pyparsing import ParseException

__all__ = ["Formula", "FormulaError", "parse_formula", "atomic_weight"]

# "·", "•", "*" or "." followed by an optional count and a group: "·2H2O", ".3H2O", "*H2O".
_HYDRATE = re.compile(r"[·•*.]\s*(\d+(?:\.\d+)?)?\s*")


class FormulaError(ValueError):
    """A formula that cannot be read.

    Carries the formula text and the 0-based position of the offending character, and
    prints a caret under it.
    """

    def __init__(self, text: str, position: int, reason: str) -> None:
        self.text = text
        self.position = max(0, min(position, len(text)))
        self.reason = reason
        super().__init__(str(self))

    def __str__(self) -> str:
        return (
            f"cannot read formula {self.text!r}: {self.reason} at position "
            f"{self.position + 1}\n  {self.text}\n  {' ' * self.position}^"
        )


@dataclass(frozen=True)
class Formula:
    """A parsed formula.

    ``atoms`` maps element symbols to the number of atoms per formula unit;
    ``molar_mass_g_per_mol`` uses the standard atomic weights shipped with periodictable.
    """

    text: str
    atoms: Mapping[str, float]
    molar_mass_g_per_mol: float

    def mass_fraction(self, element: str) -> float:
        """Mass fraction (0–1) of ``element`` in the formula; 0.0 if absent."""
        count = self.atoms.get(element, 0)
        return count * atomic_weight(element) / self.molar_mass_g_per_mol if count else 0.0

    def mass_fractions(self) -> dict[str, float]:
        """Mass fraction of every element present, by symbol."""
        return {symbol: self.mass_fraction(symbol) for symbol in self.atoms}

    @property
    def elements(self) -> tuple[str, ...]:
        return tuple(self.atoms)


def atomic_weight(symbol: str) -> float:
    """Standard atomic weight of ``symbol`` in g/mol.

    >>> atomic_weight("Cd")
    112.414
    """
    element = getattr(periodictable, symbol, None)
    if not isinstance(element, periodictable.core.Element):
        raise FormulaError(symbol, 0, f"unknown element {symbol!r}")
    return float(element.mass)


def atomic_weight_decimal(symbol: str) -> Decimal:
    """The standard atomic weight as a Decimal, for exact ledger arithmetic."""
    return Decimal(repr(atomic_weight(symbol)))


def _split_hydrate(text: str) -> list[tuple[int, str, str]]:
    """Split ``A·nB`` into [(0, A, "1"), (start of B, B, n)]; a plain formula is one part."""
    parts: list[tuple[int, str, str]] = []
    start, count = 0, "1"
    for match in _HYDRATE.finditer(text):
        parts.append((start, text[start : match.start()], count))
        start, count = match.end(), match.group(1) or "1"
    parts.append((start, text[start:], count))
    return parts


@lru_cache(maxsize=4096)
def parse_formula(text: str) -> Formula:
    """Parse a formula such as ``Cd(CH3COO)2(H2O)2``, ``CdCl2·2.5H2O`` or ``((C8H17)3P)``.

    Raises :class:`FormulaError` (a ValueError) naming the position of the problem.

    >>> round(parse_formula("CdO").mass_fraction("Cd"), 4)
    0.8754
    """
    if not isinstance(text, str) or not text.strip():
        raise FormulaError(str(text or ""), 0, "empty formula")
    pieces = []
    for offset, part, count in _split_hydrate(text):
        stripped = part.strip()
        if not stripped:
            raise FormulaError(text, offset, "missing group")
        if not re.fullmatch(r"[A-Za-z0-9()\[\]]+", stripped):
            # the first character outside the pattern (a space inside, or a letter or digit beyond ASCII)
            bad = part.find(stripped) + re.search(r"[^A-Za-z0-9()\[\]]", stripped).start()
            raise FormulaError(text, offset + bad, f"unexpected character {part[bad]!r}")
        try:
            parsed = periodictable.formula(stripped.replace("[", "(").replace("]", ")"))
        except ParseException as exc:
            raise FormulaError(text, offset + part.find(stripped) + exc.loc, "cannot parse") from None
        except ValueError as exc:  # periodictable: "unknown element Xx"
            symbol = str(exc).rsplit(" ", 1)[-1]
            where = part.find(symbol)
            raise FormulaError(text, offset + max(where, 0), f"unknown element {symbol!r}") from None
        pieces.append((parsed, float(count)))
    atoms: dict[str, float] = {}
    for parsed, count in pieces:
        for element, n in parsed.atoms.items():
            atoms[element.symbol] = atoms.get(element.symbol, 0) + n * count
    if not atoms:
        raise FormulaError(text, 0, "no elements")
    atoms = {k: (int(v) if float(v).is_integer() else v) for k, v in atoms.items()}
    molar_mass = sum(n * atomic_weight(symbol) for symbol, n in atoms.items())
    return Formula(text=text, atoms=MappingProxyType(atoms), molar_mass_g_per_mol=molar_mass)
