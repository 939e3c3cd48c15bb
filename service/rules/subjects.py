"""What the rules look at: plain, frozen facts about a subject, built by the store layer.

The evaluator never touches the database; the store turns a procedure (its reagent
draws and steps) into a :class:`ProcedureSubject` and hands it over.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from decimal import Decimal
from typing import ClassVar, Literal, Mapping, Optional

__all__ = ["ReagentFacts", "StepFacts", "ProcedureSubject", "ContainerComponent", "ContainerSubject", "INERT_ATMOSPHERES",
           "AreaContainer", "AreaSubject", "GeneratorMonthSubject"]

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
    step: Optional[int] = None  # 0-based position of the step it is added at; None: in the vessel from the start


@dataclass(frozen=True)
class StepFacts:
    """One step; ``position`` is 0-based as stored (shown to people as step position + 1)."""

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


@dataclass(frozen=True)
class ContainerComponent:
    """One liquid (or solid) constituent of a waste container, by share of the contents."""

    name: str
    key: Optional[str]  # catalogue key (e.g. "acetone"); None for an unlisted constituent
    volume_fraction: float  # 0–1 of the container's liquid volume (solids: mass fraction)
    flash_point_c: Optional[float] = None
    flags: frozenset[str] = frozenset()
    halogenated: bool = False
    density_g_per_ml: Optional[float] = None  # None: not known


@dataclass(frozen=True)
class ContainerSubject:
    """A waste accumulation container as the container-scope rules see it.

    ``volume_l`` is the liquid volume (0 for a solids container), ``mass_kg`` the solids
    mass; ``element_mass_ug`` the summed element masses of all entries;
    ``filterable_solids_percent`` decides whether the liquid itself counts as the
    toxicity-characteristic extract (< 0.5 %, 40 CFR 261.24(a)); ``ph`` is the pH most
    recently recorded on an entry that is neither a reversal nor reversed (None: none recorded).
    """

    label: str
    stream: str
    form: Literal["liquid", "solid"]
    volume_l: float
    mass_kg: float
    capacity_l: Optional[float]
    element_mass_ug: Mapping[str, int] = field(default_factory=dict)
    components: tuple[ContainerComponent, ...] = ()
    filterable_solids_percent: float = 0.0
    days_since_first_entry: Optional[float] = None
    days_since_full: Optional[float] = None
    acute_hazardous: bool = False
    ph: Optional[float] = None  # the pH most recently recorded on an entry that is not reversed
    # The fields that change with time alone; only measures registered with ``clock=True`` read them,
    # so the findings of all other rules can be kept while the records stay the same (rules.evaluate).
    CLOCK_FIELDS: ClassVar[tuple[str, ...]] = ("days_since_first_entry", "days_since_full")


@dataclass(frozen=True)
class AreaContainer:
    """One container of an accumulation area that has not been collected (open, full or pickup requested)."""

    label: str
    form: Literal["liquid", "solid"]
    volume_l: float  # liquid volume (0 for a solids container)
    mass_kg: float  # solids mass (0 for a liquids container)
    acute_hazardous: bool = False
    days_since_first_entry: Optional[float] = None


@dataclass(frozen=True)
class AreaSubject:
    """An accumulation area (a location of an accumulation kind) as the ``accumulation_area`` rules see it.

    ``containers`` are its containers not yet collected; ``days_over_limit`` counts whole calendar
    days (UTC) since the day its containers first went over a limit (None while under it).
    """

    label: str
    kind: str  # vocab.ACCUMULATION_AREA_KINDS
    containers: tuple[AreaContainer, ...] = ()
    days_over_limit: Optional[int] = None


@dataclass(frozen=True)
class GeneratorMonthSubject:
    """The hazardous waste a site generated in one calendar month (UTC), as the generator rules see it.

    ``non_acute_kg`` and ``acute_kg`` are exact; ``assumed_density_l`` is the liquid volume whose
    mass was taken with the pack's assumed density (no density in the catalogue).
    """

    month: str  # "2026-03"
    non_acute_kg: Decimal
    acute_kg: Decimal
    entries: int = 0
    assumed_density_l: Decimal = Decimal(0)
