"""What the rules look at: plain, frozen facts about a subject, built by the store layer.

The evaluator never touches the database; the store turns a procedure (its reagent
draws and steps) into a :class:`ProcedureSubject` and hands it over.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Literal, Mapping, Optional

__all__ = ["ReagentFacts", "StepFacts", "ProcedureSubject", "INERT_ATMOSPHERES"]

INERT_ATMOSPHERES = frozenset({"argon", "nitrogen", "glovebox", "vacuum"})


@dataclass(frozen=True)
class ReagentFacts:
    """One reagent draw of a procedure, as the rules see it.

    ``element_mass_ug`` is the element content of the amount drawn (per batch at the
    procedure's scale). For a mixture, flags are the union of its components' flags and
    ``flash_point_c`` the lowest flash point of its liquid components.
    """

    name: str
    amount_text: str
    state: Literal["solid", "liquid", "gas", "solution"]
    element_mass_ug: Mapping[str, int] = field(default_factory=dict)
    flags: frozenset[str] = frozenset()
    carcinogen_category: Optional[str] = None  # CLP "1A", "1B", "2"
    flash_point_c: Optional[float] = None  # closed cup; None: none known
    flammable: bool = False  # a flammable liquid: None flash point then means unknown, not safe


@dataclass(frozen=True)
class StepFacts:
    position: int
    operation: str  # heat, inject, hold, cool, precipitate, centrifuge, mix, degas, …
    temperature_c: Optional[float] = None
    atmosphere: Optional[str] = None  # air, argon, nitrogen, glovebox, vacuum
    duration_min: Optional[float] = None


@dataclass(frozen=True)
class ProcedureSubject:
    """A planned synthesis at ``scale`` (1.0 = as written)."""

    title: str
    reagents: tuple[ReagentFacts, ...]
    steps: tuple[StepFacts, ...]
    scale: float = 1.0
    last_approved_scale: Optional[float] = None  # None: never approved before
