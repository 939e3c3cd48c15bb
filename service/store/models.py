"""ORM models: persistence only (no serialisation, URLs or business rules here)."""

from __future__ import annotations

import datetime as dt
from decimal import Decimal
from typing import Any, Optional

from sqlalchemy import (
    JSON,
    BigInteger,
    Boolean,
    CheckConstraint,
    Date,
    Float,
    ForeignKey,
    Integer,
    String,
    Text,
    UniqueConstraint,
    false,
)
from sqlalchemy.orm import DeclarativeBase, Mapped, mapped_column, relationship

from service import vocab
from service.store import audit_chain  # noqa: F401  (the audit trail's tables join the metadata)
from service.store.base import ExactDecimal, UTCDateTime, metadata, utcnow  # noqa: F401  (utcnow re-exported)

__all__ = [
    "Base",
    "Site",
    "Lab",
    "Location",
    "Substance",
    "Stock",
    "StockElement",
    "Mixture",
    "MixtureComponent",
    "MixtureElement",
    "User",
    "WasteDetermination",
    "Membership",
    "ApiToken",
    "LoginAttempt",
    "Procedure",
    "ProcedureStep",
    "ReagentDraw",
    "WastePlanItem",
    "ProcedureDecision",
    "Run",
    "RunDraw",
    "RunOutput",
    "RunLoss",
    "WasteContainer",
    "WasteEntry",
    "WasteEntryComponent",
    "WasteEntryElement",
    "WasteContainerTotals",
    "WasteContainerElement",
    "WasteContainerComponent",
    "StockMovement",
    "HoldingChange",
    "WasteMonthTotal",
    "LedgerMonthTotal",
    "IdempotencyKey",
    "utcnow",
]


class Base(DeclarativeBase):
    metadata = metadata
    type_annotation_map = {dt.datetime: UTCDateTime, dict[str, Any]: JSON, list[Any]: JSON}


def _one_of(column: str, values: tuple[str, ...]) -> CheckConstraint:
    """CHECK (<column> IN (<values>)), named ck_<table>_<column> by the naming convention."""
    if any("'" in value for value in values):
        raise ValueError(f"a vocabulary word for {column} contains a quote")
    quoted = ", ".join(f"'{value}'" for value in values)
    return CheckConstraint(f"{column} IN ({quoted})", name=column)


class _Lifecycle:
    created_at: Mapped[dt.datetime] = mapped_column(default=utcnow)
    updated_at: Mapped[dt.datetime] = mapped_column(default=utcnow, onupdate=utcnow)
    retired_at: Mapped[Optional[dt.datetime]] = mapped_column(default=None)


class Site(Base):
    """The one site this database belongs to (a single row, id 1): its name heads every page and document."""

    __tablename__ = "site"
    id: Mapped[int] = mapped_column(primary_key=True)
    name: Mapped[str] = mapped_column(String(200))
    updated_at: Mapped[dt.datetime] = mapped_column(default=utcnow, onupdate=utcnow)


class Lab(_Lifecycle, Base):
    __tablename__ = "labs"
    id: Mapped[int] = mapped_column(primary_key=True)
    code: Mapped[str] = mapped_column(String(40), unique=True)
    name: Mapped[str] = mapped_column(String(200))
    building: Mapped[Optional[str]] = mapped_column(String(100))


class Location(_Lifecycle, Base):
    __tablename__ = "locations"
    __table_args__ = (UniqueConstraint("building", "room", "storage"), _one_of("kind", vocab.LOCATION_KINDS))
    id: Mapped[int] = mapped_column(primary_key=True)
    lab_id: Mapped[Optional[int]] = mapped_column(ForeignKey("labs.id"))
    building: Mapped[str] = mapped_column(String(100))
    room: Mapped[str] = mapped_column(String(100))
    storage: Mapped[str] = mapped_column(String(200))
    kind: Mapped[str] = mapped_column(String(40))  # vocab.LOCATION_KINDS
    # An accumulation area: when its open containers first went over a limit (set and cleared by the store in
    # the transaction of the entry, reversal or collection that crossed it; store/areas.py)
    over_limit_since: Mapped[Optional[dt.datetime]] = mapped_column(default=None)


class Substance(_Lifecycle, Base):
    __tablename__ = "substances"
    id: Mapped[int] = mapped_column(primary_key=True)
    key: Mapped[str] = mapped_column(String(80), unique=True)
    name: Mapped[str] = mapped_column(String(200))
    synonyms: Mapped[list[Any]] = mapped_column(default=list)
    formula: Mapped[str] = mapped_column(String(200))
    cas: Mapped[str] = mapped_column(String(20), index=True)
    state: Mapped[str] = mapped_column(String(10))
    density_g_per_ml: Mapped[Optional[float]] = mapped_column(Float)
    flash_point_c: Mapped[Optional[float]] = mapped_column(Float)
    boiling_point_c: Mapped[Optional[float]] = mapped_column(Float)
    autoignition_c: Mapped[Optional[float]] = mapped_column(Float)
    hazard: Mapped[dict[str, Any]] = mapped_column(default=dict)
    flags: Mapped[list[Any]] = mapped_column(default=list)
    source: Mapped[str] = mapped_column(Text)
    physical_source: Mapped[Optional[str]] = mapped_column(Text)
    origin: Mapped[str] = mapped_column(String(20), default="catalogue")  # catalogue | local


class Stock(_Lifecycle, Base):
    """A held quantity. The amount is kept exactly: µg for a mass, µL for a volume."""

    __tablename__ = "stocks"
    id: Mapped[int] = mapped_column(primary_key=True)
    label: Mapped[str] = mapped_column(String(80), unique=True)
    substance_id: Mapped[int] = mapped_column(ForeignKey("substances.id"), index=True)
    lab_id: Mapped[int] = mapped_column(ForeignKey("labs.id"), index=True)
    location_id: Mapped[int] = mapped_column(ForeignKey("locations.id"), index=True)
    amount_text: Mapped[str] = mapped_column(String(60))
    quantity_kind: Mapped[str] = mapped_column(String(10))  # mass | volume
    quantity_micro: Mapped[int] = mapped_column(BigInteger)  # µg or µL
    purity_percent: Mapped[float] = mapped_column(Float, default=100.0)
    density_g_per_ml: Mapped[Optional[float]] = mapped_column(Float)
    opened_on: Mapped[Optional[dt.date]] = mapped_column(Date)
    expires_on: Mapped[Optional[dt.date]] = mapped_column(Date)
    # A run's product put into the inventory: its element rows are the output's element masses as
    # recorded (never recomputed from the formula); an output becomes at most one stock.
    origin_run_id: Mapped[Optional[int]] = mapped_column(ForeignKey("runs.id"), index=True, default=None)
    origin_output_id: Mapped[Optional[int]] = mapped_column(ForeignKey("run_outputs.id"), unique=True, default=None)
    substance: Mapped[Substance] = relationship(lazy="joined")
    elements: Mapped[list["StockElement"]] = relationship(
        cascade="all, delete-orphan", lazy="selectin", order_by="StockElement.element"
    )


class StockElement(Base):
    __tablename__ = "stock_elements"
    __table_args__ = (_one_of("element", vocab.ELEMENT_SYMBOLS),)
    stock_id: Mapped[int] = mapped_column(ForeignKey("stocks.id"), primary_key=True)
    element: Mapped[str] = mapped_column(String(3), primary_key=True, index=True)
    mass_ug: Mapped[int] = mapped_column(BigInteger)


class Mixture(_Lifecycle, Base):
    __tablename__ = "mixtures"
    id: Mapped[int] = mapped_column(primary_key=True)
    label: Mapped[str] = mapped_column(String(80), unique=True)
    name: Mapped[str] = mapped_column(String(200))
    lab_id: Mapped[int] = mapped_column(ForeignKey("labs.id"), index=True)
    location_id: Mapped[int] = mapped_column(ForeignKey("locations.id"), index=True)
    volume_text: Mapped[str] = mapped_column(String(60))
    volume_ul: Mapped[int] = mapped_column(BigInteger)
    density_g_per_ml: Mapped[Optional[float]] = mapped_column(Float)
    prepared_on: Mapped[Optional[dt.date]] = mapped_column(Date)
    expires_on: Mapped[Optional[dt.date]] = mapped_column(Date)
    # True: bought or received ready-made, its element content computed from the stated concentrations;
    # False: prepared here, its element content the sum of what its components drew from stocks and mixtures.
    received_as_solution: Mapped[bool] = mapped_column(Boolean, default=False, server_default=false())
    components: Mapped[list["MixtureComponent"]] = relationship(
        cascade="all, delete-orphan", lazy="selectin", order_by="MixtureComponent.position",
        foreign_keys="MixtureComponent.mixture_id",
    )
    elements: Mapped[list["MixtureElement"]] = relationship(
        cascade="all, delete-orphan", lazy="selectin", order_by="MixtureElement.element"
    )


class MixtureComponent(Base):
    __tablename__ = "mixture_components"
    id: Mapped[int] = mapped_column(primary_key=True)
    mixture_id: Mapped[int] = mapped_column(ForeignKey("mixtures.id"), index=True)
    position: Mapped[int] = mapped_column(Integer)
    substance_id: Mapped[int] = mapped_column(ForeignKey("substances.id"))
    molarity_text: Mapped[Optional[str]] = mapped_column(String(60))
    mass_fraction: Mapped[Optional[str]] = mapped_column(String(30))  # decimal text, exact
    volume_fraction: Mapped[Optional[str]] = mapped_column(String(30))
    # Provenance of a prepared mixture: the stock or mixture drawn from, the amount as entered and the
    # element masses (µg) it carried, which left the source in the same transaction.
    source_stock_id: Mapped[Optional[int]] = mapped_column(ForeignKey("stocks.id"), index=True)
    source_mixture_id: Mapped[Optional[int]] = mapped_column(ForeignKey("mixtures.id"), index=True)
    amount_text: Mapped[Optional[str]] = mapped_column(String(60))
    element_mass_ug: Mapped[Optional[dict[str, Any]]] = mapped_column(JSON)
    substance: Mapped[Substance] = relationship(lazy="joined")


class MixtureElement(Base):
    __tablename__ = "mixture_elements"
    __table_args__ = (_one_of("element", vocab.ELEMENT_SYMBOLS),)
    mixture_id: Mapped[int] = mapped_column(ForeignKey("mixtures.id"), primary_key=True)
    element: Mapped[str] = mapped_column(String(3), primary_key=True, index=True)
    mass_ug: Mapped[int] = mapped_column(BigInteger)


# --- identity -------------------------------------------------------------------

class User(_Lifecycle, Base):
    __tablename__ = "users"
    __table_args__ = (_one_of("role", vocab.ROLES),)
    id: Mapped[int] = mapped_column(primary_key=True)
    email: Mapped[str] = mapped_column(String(254), unique=True)
    display_name: Mapped[str] = mapped_column(String(200))
    role: Mapped[str] = mapped_column(String(20))  # vocab.ROLES
    password_hash: Mapped[str] = mapped_column(String(300))
    # Raised by sign-out and a password change: session cookies carrying an older value stop working.
    session_version: Mapped[int] = mapped_column(default=0, server_default="0")
    memberships: Mapped[list["Membership"]] = relationship(cascade="all, delete-orphan", lazy="selectin")

    @property
    def lab_ids(self) -> set[int]:
        return {m.lab_id for m in self.memberships}


class Membership(Base):
    __tablename__ = "memberships"
    user_id: Mapped[int] = mapped_column(ForeignKey("users.id"), primary_key=True)
    lab_id: Mapped[int] = mapped_column(ForeignKey("labs.id"), primary_key=True)


class ApiToken(Base):
    """A personal API token; only its SHA-256 is kept."""

    __tablename__ = "api_tokens"
    id: Mapped[int] = mapped_column(primary_key=True)
    user_id: Mapped[int] = mapped_column(ForeignKey("users.id"), index=True)
    name: Mapped[str] = mapped_column(String(100))
    prefix: Mapped[str] = mapped_column(String(12))
    token_hash: Mapped[str] = mapped_column(String(64), unique=True)
    created_at: Mapped[dt.datetime] = mapped_column(default=utcnow)
    last_used_at: Mapped[Optional[dt.datetime]] = mapped_column(default=None)
    revoked_at: Mapped[Optional[dt.datetime]] = mapped_column(default=None)


class LoginAttempt(Base):
    __tablename__ = "login_attempts"
    id: Mapped[int] = mapped_column(primary_key=True)
    email: Mapped[str] = mapped_column(String(254), index=True)
    address: Mapped[str] = mapped_column(String(64), index=True)
    at: Mapped[dt.datetime] = mapped_column(default=utcnow, index=True)
    succeeded: Mapped[bool] = mapped_column(default=False)


# --- procedures -----------------------------------------------------------------

class Procedure(_Lifecycle, Base):
    """One revision of a registered synthesis plan; revisions share a ``family_id``."""

    __tablename__ = "procedures"
    __table_args__ = (_one_of("state", vocab.PROCEDURE_STATES),)
    id: Mapped[int] = mapped_column(primary_key=True)
    family_id: Mapped[Optional[int]] = mapped_column(Integer, index=True)  # id of revision 1
    revision: Mapped[int] = mapped_column(Integer, default=1)
    revision_of_id: Mapped[Optional[int]] = mapped_column(ForeignKey("procedures.id"))
    lab_id: Mapped[int] = mapped_column(ForeignKey("labs.id"), index=True)
    researcher_id: Mapped[int] = mapped_column(ForeignKey("users.id"), index=True)
    title: Mapped[str] = mapped_column(String(300))
    summary: Mapped[Optional[str]] = mapped_column(Text)
    scale: Mapped[float] = mapped_column(Float, default=1.0)
    state: Mapped[str] = mapped_column(String(20), default="draft", index=True)
    submitted_at: Mapped[Optional[dt.datetime]] = mapped_column(default=None)
    decided_at: Mapped[Optional[dt.datetime]] = mapped_column(default=None)
    decided_by_id: Mapped[Optional[int]] = mapped_column(ForeignKey("users.id"))
    decision_comment: Mapped[Optional[str]] = mapped_column(Text)
    steps: Mapped[list["ProcedureStep"]] = relationship(
        cascade="all, delete-orphan", lazy="selectin", order_by="ProcedureStep.position"
    )
    draws: Mapped[list["ReagentDraw"]] = relationship(
        cascade="all, delete-orphan", lazy="selectin", order_by="ReagentDraw.position"
    )
    waste_plan: Mapped[list["WastePlanItem"]] = relationship(
        cascade="all, delete-orphan", lazy="selectin", order_by="WastePlanItem.position"
    )


class ProcedureStep(Base):
    __tablename__ = "procedure_steps"
    id: Mapped[int] = mapped_column(primary_key=True)
    procedure_id: Mapped[int] = mapped_column(ForeignKey("procedures.id"), index=True)
    position: Mapped[int] = mapped_column(Integer)
    operation: Mapped[str] = mapped_column(String(40))
    temperature_c: Mapped[Optional[float]] = mapped_column(Float)
    atmosphere: Mapped[Optional[str]] = mapped_column(String(20))
    duration_min: Mapped[Optional[float]] = mapped_column(Float)
    note: Mapped[Optional[str]] = mapped_column(Text)


class ReagentDraw(Base):
    """A planned draw from a stock or a mixture, at scale 1."""

    __tablename__ = "reagent_draws"
    __table_args__ = (_one_of("amount_kind", ("mass", "volume")),)
    id: Mapped[int] = mapped_column(primary_key=True)
    procedure_id: Mapped[int] = mapped_column(ForeignKey("procedures.id"), index=True)
    position: Mapped[int] = mapped_column(Integer)
    stock_id: Mapped[Optional[int]] = mapped_column(ForeignKey("stocks.id"))
    mixture_id: Mapped[Optional[int]] = mapped_column(ForeignKey("mixtures.id"))
    amount_text: Mapped[str] = mapped_column(String(60))
    # The amount as parsed when the draw was written: "mass" in exact µg or "volume" in exact µL
    # (``service.chem.units.exact_micro``), so reading a procedure parses no amount text.
    amount_kind: Mapped[str] = mapped_column(String(10))
    amount_micro: Mapped[Decimal] = mapped_column(ExactDecimal)
    # 0-based position of the step it is added at; None: in the vessel from the start
    step: Mapped[Optional[int]] = mapped_column(Integer)
    stock: Mapped[Optional[Stock]] = relationship(lazy="joined")
    mixture: Mapped[Optional[Mixture]] = relationship(lazy="joined")


class WastePlanItem(Base):
    __tablename__ = "waste_plan_items"
    id: Mapped[int] = mapped_column(primary_key=True)
    procedure_id: Mapped[int] = mapped_column(ForeignKey("procedures.id"), index=True)
    position: Mapped[int] = mapped_column(Integer)
    stream: Mapped[str] = mapped_column(String(60))
    contents: Mapped[str] = mapped_column(Text)
    expected_amount: Mapped[Optional[str]] = mapped_column(String(60))


class ProcedureDecision(Base):
    """The review history of a procedure: every transition with its actor and comment."""

    __tablename__ = "procedure_decisions"
    id: Mapped[int] = mapped_column(primary_key=True)
    procedure_id: Mapped[int] = mapped_column(ForeignKey("procedures.id"), index=True)
    actor_id: Mapped[int] = mapped_column(ForeignKey("users.id"))
    from_state: Mapped[str] = mapped_column(String(20))
    to_state: Mapped[str] = mapped_column(String(20))
    comment: Mapped[Optional[str]] = mapped_column(Text)
    highest_level: Mapped[Optional[str]] = mapped_column(String(10))
    at: Mapped[dt.datetime] = mapped_column(default=utcnow)


# --- runs and waste -------------------------------------------------------------

class Run(Base):
    """One batch made under an approved procedure."""

    __tablename__ = "runs"
    __table_args__ = (_one_of("state", vocab.RUN_STATES),)
    id: Mapped[int] = mapped_column(primary_key=True)
    procedure_id: Mapped[int] = mapped_column(ForeignKey("procedures.id"), index=True)
    lab_id: Mapped[int] = mapped_column(ForeignKey("labs.id"), index=True)
    researcher_id: Mapped[int] = mapped_column(ForeignKey("users.id"))
    scale: Mapped[float] = mapped_column(Float, default=1.0)
    state: Mapped[str] = mapped_column(String(10), default="open")  # vocab.RUN_STATES
    note: Mapped[Optional[str]] = mapped_column(Text)
    started_at: Mapped[dt.datetime] = mapped_column(default=utcnow)
    closed_at: Mapped[Optional[dt.datetime]] = mapped_column(default=None)
    draws: Mapped[list["RunDraw"]] = relationship(cascade="all, delete-orphan", lazy="selectin", order_by="RunDraw.id")
    outputs: Mapped[list["RunOutput"]] = relationship(cascade="all, delete-orphan", lazy="selectin",
                                                      order_by="RunOutput.id")
    losses: Mapped[list["RunLoss"]] = relationship(cascade="all, delete-orphan", lazy="selectin", order_by="RunLoss.id")


class RunDraw(Base):
    """What a run actually took from a stock or mixture (the inventory was decremented)."""

    __tablename__ = "run_draws"
    id: Mapped[int] = mapped_column(primary_key=True)
    run_id: Mapped[int] = mapped_column(ForeignKey("runs.id"), index=True)
    stock_id: Mapped[Optional[int]] = mapped_column(ForeignKey("stocks.id"))
    mixture_id: Mapped[Optional[int]] = mapped_column(ForeignKey("mixtures.id"))
    amount_text: Mapped[str] = mapped_column(String(60))
    element_mass_ug: Mapped[dict[str, Any]] = mapped_column(default=dict)


class RunOutput(Base):
    """A product of a run and how its metal content is known."""

    __tablename__ = "run_outputs"
    id: Mapped[int] = mapped_column(primary_key=True)
    run_id: Mapped[int] = mapped_column(ForeignKey("runs.id"), index=True)
    label: Mapped[str] = mapped_column(String(120))
    method: Mapped[str] = mapped_column(String(20))  # measured | estimated | by_difference
    description: Mapped[Optional[str]] = mapped_column(Text)
    element_mass_ug: Mapped[dict[str, Any]] = mapped_column(default=dict)
    relative_uncertainty: Mapped[Optional[float]] = mapped_column(Float)
    basis: Mapped[dict[str, Any]] = mapped_column(default=dict)  # assay or estimate inputs, as entered
    at: Mapped[dt.datetime] = mapped_column(default=utcnow, index=True)  # when it was recorded


class RunLoss(Base):
    __tablename__ = "run_losses"
    id: Mapped[int] = mapped_column(primary_key=True)
    run_id: Mapped[int] = mapped_column(ForeignKey("runs.id"), index=True)
    description: Mapped[str] = mapped_column(Text)
    element_mass_ug: Mapped[dict[str, Any]] = mapped_column(default=dict)
    at: Mapped[dt.datetime] = mapped_column(default=utcnow, index=True)  # when it was recorded


class WasteContainer(_Lifecycle, Base):
    __tablename__ = "waste_containers"
    __table_args__ = (_one_of("stream", vocab.STREAMS), _one_of("state", vocab.CONTAINER_STATES))
    id: Mapped[int] = mapped_column(primary_key=True)
    label: Mapped[str] = mapped_column(String(80), unique=True)
    lab_id: Mapped[int] = mapped_column(ForeignKey("labs.id"), index=True)
    location_id: Mapped[int] = mapped_column(ForeignKey("locations.id"), index=True)
    stream: Mapped[str] = mapped_column(String(60), index=True)
    form: Mapped[str] = mapped_column(String(10))  # liquid | solid
    capacity_text: Mapped[str] = mapped_column(String(60))
    capacity_micro: Mapped[int] = mapped_column(BigInteger)  # µL for liquids, µg for solids
    acute_hazardous: Mapped[bool] = mapped_column(default=False)
    state: Mapped[str] = mapped_column(String(20), default="open", index=True)
    first_entry_at: Mapped[Optional[dt.datetime]] = mapped_column(default=None)
    full_at: Mapped[Optional[dt.datetime]] = mapped_column(default=None)
    pickup_requested_at: Mapped[Optional[dt.datetime]] = mapped_column(default=None)
    collected_at: Mapped[Optional[dt.datetime]] = mapped_column(default=None)
    # Running totals of the entries, kept by the store in the transaction that adds each entry.
    totals: Mapped[Optional["WasteContainerTotals"]] = relationship(cascade="all, delete-orphan", lazy="selectin")
    element_totals: Mapped[list["WasteContainerElement"]] = relationship(
        cascade="all, delete-orphan", lazy="selectin", order_by="WasteContainerElement.element"
    )
    component_totals: Mapped[list["WasteContainerComponent"]] = relationship(
        cascade="all, delete-orphan", lazy="selectin", order_by="WasteContainerComponent.substance_id"
    )
    # The safety officer's determinations, oldest first; the last one is the one in force.
    determinations: Mapped[list["WasteDetermination"]] = relationship(
        lazy="selectin", order_by="WasteDetermination.id"
    )


class WasteEntry(Base):
    """What one run or clean-up put into a container. Append-only: corrections reverse."""

    __tablename__ = "waste_entries"
    id: Mapped[int] = mapped_column(primary_key=True)
    container_id: Mapped[int] = mapped_column(ForeignKey("waste_containers.id"), index=True)
    run_id: Mapped[Optional[int]] = mapped_column(ForeignKey("runs.id"), index=True)
    actor_id: Mapped[Optional[int]] = mapped_column(ForeignKey("users.id"))
    at: Mapped[dt.datetime] = mapped_column(default=utcnow, index=True)
    description: Mapped[str] = mapped_column(Text)
    volume_ul: Mapped[int] = mapped_column(BigInteger, default=0)  # signed
    mass_ug: Mapped[int] = mapped_column(BigInteger, default=0)  # signed, solids
    filterable_solids_percent: Mapped[Optional[float]] = mapped_column(Float)
    ph: Mapped[Optional[float]] = mapped_column(Float)  # as measured when added; None on reversals
    reverses_entry_id: Mapped[Optional[int]] = mapped_column(ForeignKey("waste_entries.id"), unique=True)
    components: Mapped[list["WasteEntryComponent"]] = relationship(cascade="all, delete-orphan", lazy="selectin")
    elements: Mapped[list["WasteEntryElement"]] = relationship(cascade="all, delete-orphan", lazy="selectin")


class WasteEntryComponent(Base):
    __tablename__ = "waste_entry_components"
    entry_id: Mapped[int] = mapped_column(ForeignKey("waste_entries.id"), primary_key=True)
    substance_id: Mapped[int] = mapped_column(ForeignKey("substances.id"), primary_key=True)
    volume_ul: Mapped[int] = mapped_column(BigInteger)  # signed
    substance: Mapped[Substance] = relationship(lazy="joined")


class WasteEntryElement(Base):
    __tablename__ = "waste_entry_elements"
    __table_args__ = (_one_of("element", vocab.ELEMENT_SYMBOLS),)
    entry_id: Mapped[int] = mapped_column(ForeignKey("waste_entries.id"), primary_key=True)
    element: Mapped[str] = mapped_column(String(3), primary_key=True, index=True)
    mass_ug: Mapped[int] = mapped_column(BigInteger)  # signed
    # how the mass was given: {"kind": "mass", "mass"}, {"kind": "assay", "concentration", "volume"},
    # {"kind": "share", "percent", "of_ug", "remaining_ug"} or {"kind": "reversal", "entry_id"};
    # None for entries made before it was recorded
    basis: Mapped[Optional[dict[str, Any]]] = mapped_column(default=None)


class WasteDetermination(Base):
    """A safety officer's determination of a container's waste codes. Append-only: a new one replaces it."""

    __tablename__ = "waste_determinations"
    id: Mapped[int] = mapped_column(primary_key=True)
    container_id: Mapped[int] = mapped_column(ForeignKey("waste_containers.id"), index=True)
    # [{"system": "RCRA", "code": "D006", "description": "..." or None}, ...]
    codes: Mapped[list[Any]] = mapped_column()
    comment: Mapped[Optional[str]] = mapped_column(Text)
    actor_id: Mapped[int] = mapped_column(ForeignKey("users.id"))
    at: Mapped[dt.datetime] = mapped_column(default=utcnow, index=True)
    actor: Mapped["User"] = relationship(lazy="joined")


class WasteContainerTotals(Base):
    """The sums over a container's entries (derived rows, one per container)."""

    __tablename__ = "waste_container_totals"
    container_id: Mapped[int] = mapped_column(ForeignKey("waste_containers.id"), primary_key=True)
    entries: Mapped[int] = mapped_column(Integer, default=0)
    volume_ul: Mapped[int] = mapped_column(BigInteger, default=0)
    mass_ug: Mapped[int] = mapped_column(BigInteger, default=0)
    # Σ volume_ul × filterable_solids_percent × 10⁶, each entry's term rounded once (half to even),
    # so that a reversal cancels its entry exactly.
    solids_percent_ul_e6: Mapped[int] = mapped_column(BigInteger, default=0)
    # The pH last recorded on an entry that is neither a reversal nor reversed (None: none).
    ph: Mapped[Optional[float]] = mapped_column(Float)


class WasteContainerElement(Base):
    __tablename__ = "waste_container_elements"
    __table_args__ = (_one_of("element", vocab.ELEMENT_SYMBOLS),)
    container_id: Mapped[int] = mapped_column(ForeignKey("waste_containers.id"), primary_key=True)
    element: Mapped[str] = mapped_column(String(3), primary_key=True)
    mass_ug: Mapped[int] = mapped_column(BigInteger)


class WasteContainerComponent(Base):
    __tablename__ = "waste_container_components"
    container_id: Mapped[int] = mapped_column(ForeignKey("waste_containers.id"), primary_key=True)
    substance_id: Mapped[int] = mapped_column(ForeignKey("substances.id"), primary_key=True)
    volume_ul: Mapped[int] = mapped_column(BigInteger)
    substance: Mapped[Substance] = relationship(lazy="joined")


# --- stocks leaving the inventory -------------------------------------------------

class StockMovement(Base):
    """An amount that left a stock other than by a run: disposed of, transferred to another lab, shipped out.

    ``element_mass_ug`` is exactly what the stock's element rows dropped by; a disposal names the
    waste entry it became, a transfer the new stock in the other lab. Append-only.
    """

    __tablename__ = "stock_movements"
    __table_args__ = (_one_of("kind", vocab.MOVEMENT_KINDS),)
    id: Mapped[int] = mapped_column(primary_key=True)
    stock_id: Mapped[int] = mapped_column(ForeignKey("stocks.id"), index=True)
    kind: Mapped[str] = mapped_column(String(10), index=True)  # vocab.MOVEMENT_KINDS
    amount_text: Mapped[str] = mapped_column(String(60))
    quantity_micro: Mapped[int] = mapped_column(BigInteger)  # µg or µL moved, in the stock's own kind
    element_mass_ug: Mapped[dict[str, Any]] = mapped_column(default=dict)
    waste_entry_id: Mapped[Optional[int]] = mapped_column(ForeignKey("waste_entries.id"))
    to_stock_id: Mapped[Optional[int]] = mapped_column(ForeignKey("stocks.id"))
    destination: Mapped[Optional[str]] = mapped_column(String(300))
    note: Mapped[Optional[str]] = mapped_column(Text)
    actor_id: Mapped[Optional[int]] = mapped_column(ForeignKey("users.id"))
    at: Mapped[dt.datetime] = mapped_column(default=utcnow, index=True)


# --- the element content of the inventory, change by change -------------------------

class HoldingChange(Base):
    """One element's change in one stock or mixture, signed (+ into the inventory, − out of it).

    Written in the transaction of the change itself (receipt, draw, preparation, movement, correction,
    retirement), so that the element on hand at any moment is the sum of the rows before it; the site
    element ledger's opening and closing figures are such sums. Append-only.
    """

    __tablename__ = "holding_changes"
    __table_args__ = (_one_of("element", vocab.ELEMENT_SYMBOLS), _one_of("kind", vocab.HOLDING_CHANGE_KINDS))
    id: Mapped[int] = mapped_column(primary_key=True)
    at: Mapped[dt.datetime] = mapped_column(default=utcnow, index=True)
    element: Mapped[str] = mapped_column(String(3), index=True)
    mass_ug: Mapped[int] = mapped_column(BigInteger)  # signed
    kind: Mapped[str] = mapped_column(String(20), index=True)  # vocab.HOLDING_CHANGE_KINDS
    lab_id: Mapped[int] = mapped_column(ForeignKey("labs.id"), index=True)
    stock_id: Mapped[Optional[int]] = mapped_column(ForeignKey("stocks.id"), index=True)
    mixture_id: Mapped[Optional[int]] = mapped_column(ForeignKey("mixtures.id"), index=True)
    run_id: Mapped[Optional[int]] = mapped_column(ForeignKey("runs.id"), index=True)
    movement_id: Mapped[Optional[int]] = mapped_column(ForeignKey("stock_movements.id"))
    into_mixture_id: Mapped[Optional[int]] = mapped_column(ForeignKey("mixtures.id"))
    # Set as objects by the store, so that a change recorded before its records have ids links at the flush.
    stock: Mapped[Optional[Stock]] = relationship(foreign_keys=[stock_id], lazy="raise")
    mixture: Mapped[Optional[Mixture]] = relationship(foreign_keys=[mixture_id], lazy="raise")
    run: Mapped[Optional["Run"]] = relationship(foreign_keys=[run_id], lazy="raise")
    movement: Mapped[Optional["StockMovement"]] = relationship(foreign_keys=[movement_id], lazy="raise")
    into_mixture: Mapped[Optional[Mixture]] = relationship(foreign_keys=[into_mixture_id], lazy="raise")


# --- monthly totals of the records (derived rows, kept by store/month_totals.py) ------

class WasteMonthTotal(Base):
    """Net element mass put into one container in one UTC month ('YYYY-MM'), and of it what disposals put."""

    __tablename__ = "waste_month_totals"
    __table_args__ = (_one_of("element", vocab.ELEMENT_SYMBOLS),)
    month: Mapped[str] = mapped_column(String(7), primary_key=True)
    container_id: Mapped[int] = mapped_column(ForeignKey("waste_containers.id"), primary_key=True)
    element: Mapped[str] = mapped_column(String(3), primary_key=True)
    mass_ug: Mapped[int] = mapped_column(BigInteger)
    disposed_ug: Mapped[int] = mapped_column(BigInteger)


class LedgerMonthTotal(Base):
    """One element's sum of one flow in one UTC month: ``holding:<kind>``, run_draw, run_output, run_loss, shipment."""

    __tablename__ = "ledger_month_totals"
    __table_args__ = (_one_of("element", vocab.ELEMENT_SYMBOLS),)
    month: Mapped[str] = mapped_column(String(7), primary_key=True)
    element: Mapped[str] = mapped_column(String(3), primary_key=True)
    flow: Mapped[str] = mapped_column(String(40), primary_key=True)
    mass_ug: Mapped[int] = mapped_column(BigInteger)


# --- retried requests -------------------------------------------------------------

class IdempotencyKey(Base):
    """The first answer to an API write sent with an ``Idempotency-Key`` header, per user.

    Saved in the transaction of the write itself, so a key is kept exactly when its write is.
    """

    __tablename__ = "idempotency_keys"
    __table_args__ = (UniqueConstraint("user_id", "key"),)
    id: Mapped[int] = mapped_column(primary_key=True)
    user_id: Mapped[int] = mapped_column(ForeignKey("users.id"))
    key: Mapped[str] = mapped_column(String(200))
    request_sha256: Mapped[str] = mapped_column(String(64))  # method, path and body of the first request
    status: Mapped[int] = mapped_column(Integer)
    content_type: Mapped[str] = mapped_column(String(100))
    location: Mapped[Optional[str]] = mapped_column(String(500), default=None)
    body: Mapped[str] = mapped_column(Text)
    created_at: Mapped[dt.datetime] = mapped_column(default=utcnow)
