"""The shapes of the API's answers, as pydantic models for the OpenAPI document.

They describe what the views answer (the fields a client can rely on); views still build plain
dicts. Records may carry more fields than listed (``additionalProperties``).
tests/test_openapi.py checks real answers against these shapes.
"""

from __future__ import annotations

from typing import Any, Optional

from pydantic import BaseModel, ConfigDict, Field

__all__ = [
    "Error", "Index", "Lab", "Location", "Substance", "Stock", "Mixture", "User", "Token", "IssuedToken",
    "AuditEvent", "Procedure", "ReviewItem", "Decision", "Preview", "Run", "Balance", "WasteContainer",
    "WasteEntry", "StockMovement", "ImportReport", "Estimate", "Report", "AccumulationArea", "GeneratorReport",
]


class _Answer(BaseModel):
    model_config = ConfigDict(extra="allow")


class ErrorBody(BaseModel):
    code: str
    message: str
    details: Any


class Error(BaseModel):
    """Every 4xx answer of the API."""

    error: ErrorBody


class Index(_Answer):
    resources: list[str]
    openapi: str


class ElementRow(_Answer):
    element: str
    mass_ug: int
    mass_mg: float


class _Lifecycle(_Answer):
    created_at: str
    updated_at: Optional[str]
    retired_at: Optional[str]


class Lab(_Lifecycle):
    id: int
    code: str
    name: str
    building: Optional[str]


class Location(_Lifecycle):
    id: int
    lab_id: Optional[int]
    building: str
    room: str
    storage: str
    kind: str


class Substance(_Lifecycle):
    id: int
    key: str
    name: str
    formula: str
    cas: Optional[str]
    state: str
    origin: str


class StockOrigin(_Answer):
    run_id: int
    output_id: int


class Stock(_Lifecycle):
    id: int
    label: str
    substance_id: int
    substance: str
    formula: str
    lab_id: int
    location_id: int
    amount: str
    purity_percent: float
    elements: list[ElementRow]
    origin: Optional[StockOrigin] = Field(default=None, description="the run and output a product stock came from")


class ComponentSource(_Answer):
    stock_id: Optional[int]
    mixture_id: Optional[int]
    amount: str
    element_mass_ug: dict[str, int]


class MixtureComponent(_Answer):
    substance_id: int
    substance: str
    molarity: Optional[str]
    mass_fraction: Optional[str]
    volume_fraction: Optional[str]
    source: Optional[ComponentSource]


class Mixture(_Lifecycle):
    id: int
    label: str
    name: str
    lab_id: int
    location_id: int
    volume: str
    volume_ml: float
    received_as_solution: bool
    components: list[MixtureComponent]
    elements: list[ElementRow]


class User(_Answer):
    id: int
    email: str
    display_name: str
    role: str
    lab_ids: list[int]
    created_at: str
    retired_at: Optional[str]


class Token(_Answer):
    id: int
    name: str
    prefix: str
    created_at: str
    revoked_at: Optional[str]


class IssuedToken(Token):
    token: str
    note: str


class AuditEvent(_Answer):
    id: int
    at: str
    actor_user_id: Optional[int]
    actor_label: Optional[str]
    entity: str
    entity_id: str
    action: str
    before: Optional[dict[str, Any]]
    after: Optional[dict[str, Any]]
    prev_hash: str
    hash: str


class Finding(_Answer):
    rule_id: str
    pack: str
    level: str
    measure: str
    unit: str
    comparator: str
    threshold_text: str
    value_text: str  # the measured value in the threshold's unit, e.g. "93 %"
    threshold_shown: str  # the threshold with a readable unit symbol, e.g. "90 %", "0 °C"
    message: str
    source: str
    suggested_code: Optional[dict[str, Any]]


class Procedure(_Answer):
    id: int
    family_id: Optional[int]
    revision: int
    lab_id: int
    researcher_id: Optional[int]
    title: str
    scale: float
    state: str
    steps: list[dict[str, Any]]
    draws: list[dict[str, Any]]
    waste_plan: list[dict[str, Any]]
    element_masses_per_batch: list[ElementRow]
    findings: list[Finding] = []  # single-record answers only
    highest_level: Optional[str] = None


class ReviewItem(Procedure):
    highest_level: Optional[str]


class Decision(_Answer):
    from_state: str
    to_state: str
    actor_id: Optional[int]
    comment: Optional[str]
    highest_level: Optional[str]
    at: str


class Preview(_Answer):
    procedure_id: int
    caution: str
    scales: list[dict[str, Any]]


class Balance(_Answer):
    closes: bool
    tolerance_percent: float
    elements: list[dict[str, Any]]
    caution: str


class Run(_Answer):
    id: int
    procedure_id: int
    lab_id: int
    scale: float
    state: str
    started_at: str
    closed_at: Optional[str]
    draws: list[dict[str, Any]]
    outputs: list[dict[str, Any]]
    losses: list[dict[str, Any]]
    balance: Optional[Balance] = None  # single-record answers only


class DeterminedCode(_Answer):
    system: str
    code: str
    description: Optional[str]


class Determination(_Answer):
    """The safety officer's determination in force: the latest one recorded."""

    id: int
    codes: list[DeterminedCode]
    by: dict[str, Any]
    at: str
    comment: Optional[str]


class WasteContainer(_Answer):
    id: int
    label: str
    lab_id: int
    location_id: int
    stream: str
    form: str
    capacity: str
    state: str
    elements: list[dict[str, Any]]
    findings: list[Finding]
    highest_level: Optional[str]
    determination: Optional[Determination]


class WasteEntry(_Answer):
    id: int
    container_id: int
    run_id: Optional[int]
    at: str
    description: str
    volume_ml: float
    mass_g: float
    reverses_entry_id: Optional[int]
    components: list[dict[str, Any]]
    elements: list[ElementRow]


class StockMovement(_Answer):
    id: int
    stock_id: int
    kind: str
    amount: str
    quantity_micro: int
    elements: list[ElementRow]
    waste_entry_id: Optional[int]
    to_stock_id: Optional[int]
    destination: Optional[str]
    note: Optional[str]
    actor_id: Optional[int]
    at: str


class ImportLine(_Answer):
    line: int = Field(description="spreadsheet line; the header is line 1")
    label: str
    substance: str
    amount: str
    lab: str
    location: str = Field(description="building / room / storage as read")
    accepted: bool
    reason: str = Field(description="why the row was rejected; empty when accepted")
    matched: str = Field(description="the catalogue substance an accepted row is")


class ImportReport(_Answer):
    file: str
    dry_run: bool
    only_valid: bool
    rows: int
    accepted: int
    rejected: int
    imported: int
    withheld: bool = Field(description="a real run imported nothing because rows were rejected")
    locations_created: int
    lines: list[ImportLine]
    caution: str


class Estimate(_Answer):
    core: str
    shell: Optional[str]
    core_diameter_nm: float
    elements: list[dict[str, Any]]
    source: str
    caution: str


class Report(_Answer):
    """A ledger report as JSON (CSV and XLSX carry the same rows)."""

    report: str
    by: list[str]
    columns: list[str]
    rows: list[dict[str, Any]]
    count: int
    units: dict[str, Any]
    caution: str


class ElementLedger(_Answer):
    """The site element ledger: one row per element and month (masses in µg; CSV and XLSX carry the same rows)."""

    report: str
    figures: list[str]
    rows: list[dict[str, Any]]
    count: int
    closes: bool
    units: dict[str, Any]
    caution: str


class LedgerFigure(_Answer):
    """The records behind one figure of the site element ledger; their ``mass_ug`` add up to ``mass_ug``."""

    element: str
    month: str
    figure: str
    mass_ug: int
    contributions: list[dict[str, Any]]
    count: int
    units: dict[str, Any]
    caution: str


class AccumulationArea(_Answer):
    """An accumulation area: totals of its containers not yet collected (L, US gal, kg), limits, findings."""

    id: int
    label: str
    kind: str
    lab_id: Optional[int]
    containers: list[dict[str, Any]]
    totals: dict[str, Any]
    limits: list[dict[str, Any]]
    over_limit_since: Optional[str]
    days_over_limit: Optional[int]
    findings: list[Finding]
    highest_level: Optional[str]
    caution: str


class GeneratorReport(_Answer):
    """Hazardous waste generated per calendar month (kg), the generator category and the month that moved it."""

    report: str
    since: str
    until: str
    months: list[dict[str, Any]]
    highest_category: Optional[str]
    moved_in: list[str]
    assumed_density: Optional[str]
    assumed_density_used: bool
    caution: str
