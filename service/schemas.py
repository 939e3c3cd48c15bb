"""Request bodies at the edges (API, CSV import): pydantic models, separate from the ORM."""

from __future__ import annotations

import datetime as dt
from decimal import Decimal
from typing import Annotated, Literal, Optional

from pydantic import AfterValidator, BaseModel, ConfigDict, Field, SecretStr, field_validator, model_validator

from service import vocab
from service.chem.substances import Substance as CatalogueSubstance

__all__ = [
    "ID_MAX",
    "RecordId",
    "ElementSymbol",
    "LabIn",
    "LabPatch",
    "LocationIn",
    "LocationPatch",
    "SubstanceIn",
    "SubstancePatch",
    "StockIn",
    "StockPatch",
    "ComponentIn",
    "MixtureIn",
    "MixturePatch",
    "UserIn",
    "UserPatch",
    "TokenRequest",
    "AuditQuery",
    "PageQuery",
    "ListQuery",
    "PAGE_LIMIT_DEFAULT",
    "PAGE_LIMIT_MAX",
    "StepIn",
    "DrawIn",
    "WastePlanIn",
    "ProcedureIn",
    "ProcedurePatch",
    "DecisionIn",
    "ElementAmountIn",
    "AssayIn",
    "ContainerIn",
    "ContainerPatch",
    "EntryComponentIn",
    "EntryIn",
    "ReverseIn",
    "RunIn",
    "OutputIn",
    "LossIn",
    "EstimateIn",
    "ListQuery",
    "PreviewQuery",
]

LocationKind = Literal[vocab.LOCATION_KINDS]

# An element symbol checked against the periodic table ("Cd", not "cd", "n" or "Qq"): service.vocab's one check.
ElementSymbol = Annotated[str, AfterValidator(vocab.element_symbol)]

# A record id: the id columns are PostgreSQL ``integer`` (4 bytes, to 2^31 - 1), the narrower of the two
# databases (SQLite's INTEGER goes to 2^63 - 1); a larger id names no record on either.
ID_MAX = 2**31 - 1
RecordId = Annotated[int, Field(ge=1, le=ID_MAX)]


class _Body(BaseModel):
    model_config = ConfigDict(extra="forbid", str_strip_whitespace=True)


class LabIn(_Body):
    code: str = Field(min_length=1, max_length=40)
    name: str = Field(min_length=1, max_length=200)
    building: Optional[str] = Field(default=None, max_length=100)


class LabPatch(_Body):
    name: Optional[str] = Field(default=None, min_length=1, max_length=200)
    building: Optional[str] = Field(default=None, max_length=100)


class LocationIn(_Body):
    lab_id: Optional[int] = None
    building: str = Field(min_length=1, max_length=100)
    room: str = Field(min_length=1, max_length=100)
    storage: str = Field(min_length=1, max_length=200)
    kind: LocationKind = "storage"


class LocationPatch(_Body):
    lab_id: Optional[int] = None
    storage: Optional[str] = Field(default=None, min_length=1, max_length=200)
    kind: Optional[LocationKind] = None


class SubstanceIn(CatalogueSubstance):
    """A locally added substance: the catalogue's own checks (formula, CAS, H-codes)."""

    model_config = ConfigDict(extra="forbid", frozen=False, str_strip_whitespace=True)
    source: str = Field(default="local entry — not from the shipped catalogue", min_length=3)


class SubstancePatch(_Body):
    name: Optional[str] = Field(default=None, min_length=1)
    density_g_per_ml: Optional[float] = Field(default=None, gt=0)
    flash_point_c: Optional[float] = None
    boiling_point_c: Optional[float] = None
    source: Optional[str] = Field(default=None, min_length=3)


class StockIn(_Body):
    label: str = Field(min_length=1, max_length=80)
    substance_id: int
    lab_id: int
    location_id: int
    amount: str = Field(description='mass or volume with unit, e.g. "25 g" or "500 mL"')
    purity_percent: float = Field(default=100.0, gt=0, le=100)
    density_g_per_ml: Optional[float] = Field(default=None, gt=0, description="overrides the catalogue density")
    opened_on: Optional[dt.date] = None
    expires_on: Optional[dt.date] = None


class StockPatch(_Body):
    label: Optional[str] = Field(default=None, min_length=1, max_length=80)
    location_id: Optional[int] = None
    amount: Optional[str] = None
    purity_percent: Optional[float] = Field(default=None, gt=0, le=100)
    density_g_per_ml: Optional[float] = Field(default=None, gt=0)
    opened_on: Optional[dt.date] = None
    expires_on: Optional[dt.date] = None


class ComponentIn(_Body):
    substance_id: int
    molarity: Optional[str] = Field(default=None, description='e.g. "0.2 mol/L"')
    mass_fraction: Optional[Decimal] = Field(default=None, ge=0, le=1)
    volume_fraction: Optional[Decimal] = Field(default=None, ge=0, le=1)

    @model_validator(mode="after")
    def _exactly_one(self) -> "ComponentIn":
        if sum(v is not None for v in (self.molarity, self.mass_fraction, self.volume_fraction)) != 1:
            raise ValueError("give exactly one of molarity, mass_fraction or volume_fraction")
        return self


class MixtureIn(_Body):
    label: str = Field(min_length=1, max_length=80)
    name: str = Field(min_length=1, max_length=200)
    lab_id: int
    location_id: int
    volume: str = Field(description='total volume with unit, e.g. "10 mL"')
    density_g_per_ml: Optional[float] = Field(default=None, gt=0)
    components: list[ComponentIn] = Field(min_length=1)
    prepared_on: Optional[dt.date] = None
    expires_on: Optional[dt.date] = None


class MixturePatch(_Body):
    name: Optional[str] = Field(default=None, min_length=1, max_length=200)
    location_id: Optional[int] = None
    volume: Optional[str] = None
    density_g_per_ml: Optional[float] = Field(default=None, gt=0)
    expires_on: Optional[dt.date] = None


Role = Literal[vocab.ROLES]


class UserIn(_Body):
    email: str = Field(pattern=r"^[^@\s]+@[^@\s]+\.[^@\s]+$", max_length=254)
    display_name: str = Field(min_length=1, max_length=200)
    role: Role
    password: SecretStr = Field(min_length=12, description="at least 12 characters")
    lab_ids: list[int] = []


class UserPatch(_Body):
    display_name: Optional[str] = Field(default=None, min_length=1, max_length=200)
    role: Optional[Role] = None
    password: Optional[SecretStr] = Field(default=None, min_length=12)
    lab_ids: Optional[list[int]] = None


class TokenRequest(_Body):
    email: str = Field(min_length=3, max_length=254)
    password: SecretStr
    name: str = Field(default="api", min_length=1, max_length=100)


# Every listing answers one page: ``limit`` records from ``offset``, beside the ``total`` that match.
PAGE_LIMIT_DEFAULT = 50
PAGE_LIMIT_MAX = 500


class PageQuery(_Body):
    """The page of a listing the query string asks for (a larger or non-integer limit is refused)."""

    limit: int = Field(default=PAGE_LIMIT_DEFAULT, ge=1, le=PAGE_LIMIT_MAX,
                       description=f"records per page, 1 to {PAGE_LIMIT_MAX}")
    offset: int = Field(default=0, ge=0, le=1_000_000_000, description="records to skip")


class ListQuery(PageQuery):
    """Filters of the inventory listings (labs, locations, substances, stocks, mixtures)."""

    include_retired: bool = False
    lab_id: Optional[RecordId] = None
    location_id: Optional[RecordId] = None
    substance_id: Optional[RecordId] = None
    element: Optional[ElementSymbol] = None


class AuditQuery(PageQuery):
    entity: Optional[str] = Field(default=None, max_length=60)
    entity_id: Optional[str] = Field(default=None, max_length=60)
    since: Optional[dt.datetime] = None
    until: Optional[dt.datetime] = None


Operation = Literal["charge", "degas", "heat", "inject", "hold", "grow_shell", "cool", "ligand_exchange",
                    "precipitate", "centrifuge", "wash", "dry", "mix", "transfer"]
Atmosphere = Literal["air", "argon", "nitrogen", "glovebox", "vacuum"]


class StepIn(_Body):
    operation: Operation
    temperature_c: Optional[float] = Field(default=None, ge=-196, le=1200)
    atmosphere: Optional[Atmosphere] = None
    duration_min: Optional[float] = Field(default=None, ge=0)
    note: Optional[str] = Field(default=None, max_length=2000)


class DrawIn(_Body):
    stock_id: Optional[int] = None
    mixture_id: Optional[int] = None
    amount: str = Field(description='amount drawn at scale 1, e.g. "25.7 mg" or "4 mL"')

    @model_validator(mode="after")
    def _one_source(self) -> "DrawIn":
        if (self.stock_id is None) == (self.mixture_id is None):
            raise ValueError("give exactly one of stock_id or mixture_id")
        return self


class WastePlanIn(_Body):
    stream: str = Field(min_length=1, max_length=60, description="e.g. non-halogenated solvent with heavy metals")
    contents: str = Field(min_length=1, max_length=2000)
    expected_amount: Optional[str] = Field(default=None, max_length=60)


class ProcedureIn(_Body):
    lab_id: int
    title: str = Field(min_length=3, max_length=300)
    summary: Optional[str] = Field(default=None, max_length=5000)
    scale: float = Field(default=1.0, gt=0, le=1000)
    steps: list[StepIn] = Field(min_length=1, max_length=200)
    draws: list[DrawIn] = Field(min_length=1, max_length=200)
    waste_plan: list[WastePlanIn] = Field(default_factory=list, max_length=50)


class ProcedurePatch(_Body):
    title: Optional[str] = Field(default=None, min_length=3, max_length=300)
    summary: Optional[str] = Field(default=None, max_length=5000)
    scale: Optional[float] = Field(default=None, gt=0, le=1000)
    steps: Optional[list[StepIn]] = Field(default=None, min_length=1, max_length=200)
    draws: Optional[list[DrawIn]] = Field(default=None, min_length=1, max_length=200)
    waste_plan: Optional[list[WastePlanIn]] = Field(default=None, max_length=50)


class DecisionIn(_Body):
    comment: Optional[str] = Field(default=None, max_length=5000)


Stream = Literal[vocab.STREAMS]


class ElementAmountIn(_Body):
    element: ElementSymbol
    mass: str = Field(description='e.g. "2.5 mg"')


class AssayIn(_Body):
    element: ElementSymbol
    concentration: str = Field(description='measured concentration, e.g. "12.5 mg/L" (ICP-OES of a digest)')
    volume: str = Field(description='volume the concentration applies to, e.g. "4.0 mL"')


class ContainerIn(_Body):
    label: str = Field(min_length=1, max_length=80)
    lab_id: int
    location_id: int
    stream: Stream
    capacity: str = Field(description='"20 L" for liquids, "5 kg" for solids')
    acute_hazardous: bool = False


class ContainerPatch(_Body):
    location_id: Optional[int] = None
    acute_hazardous: Optional[bool] = None


class EntryComponentIn(_Body):
    substance_id: int
    volume: str


class EntryIn(_Body):
    description: str = Field(min_length=1, max_length=2000)
    run_id: Optional[int] = None
    volume: Optional[str] = Field(default=None, description="liquid containers")
    mass: Optional[str] = Field(default=None, description="solid containers")
    components: list[EntryComponentIn] = Field(default_factory=list, max_length=50)
    elements: list[ElementAmountIn] = Field(default_factory=list, max_length=30)
    filterable_solids_percent: Optional[float] = Field(default=None, ge=0, le=100)


class ReverseIn(_Body):
    reason: str = Field(min_length=3, max_length=2000)


class RunIn(_Body):
    procedure_id: int
    scale: float = Field(default=1.0, gt=0, le=1000)
    draws: Optional[list[DrawIn]] = Field(default=None, description="actual draws; omitted: the planned ones × scale")
    note: Optional[str] = Field(default=None, max_length=5000)


class OutputIn(_Body):
    label: str = Field(min_length=1, max_length=120)
    method: Literal["measured", "estimated", "by_difference"]
    description: Optional[str] = Field(default=None, max_length=2000)
    elements: list[ElementAmountIn] = Field(default_factory=list, max_length=30)
    assays: list[AssayIn] = Field(default_factory=list, max_length=30)
    estimate: Optional["EstimateIn"] = Field(default=None, description="for method estimated: the absorbance data")

    @model_validator(mode="after")
    def _basis(self) -> "OutputIn":
        given = bool(self.elements) + bool(self.assays) + (self.estimate is not None)
        if self.method == "measured" and (given != 1 or self.estimate is not None):
            raise ValueError("a measured output gives either element masses or assays")
        if self.method == "estimated" and (self.estimate is None or given != 1):
            raise ValueError("an estimated output gives the absorbance data in 'estimate' (and no masses)")
        if self.method == "by_difference" and given:
            raise ValueError("a by-difference output takes no masses: it is what the balance leaves")
        return self


class LossIn(_Body):
    description: str = Field(min_length=3, max_length=2000)
    elements: list[ElementAmountIn] = Field(min_length=1, max_length=30)


class EstimateIn(_Body):
    """Metal content of a nanocrystal dispersion from its first excitonic absorption peak."""

    core: Literal["CdSe", "CdTe", "CdS"]
    wavelength_nm: float = Field(gt=0, description="first excitonic absorption peak of the core, nm")
    absorbance: float = Field(gt=0, description="absorbance at that peak of the measured sample")
    path_length_cm: float = Field(default=1.0, gt=0)
    dilution_factor: float = Field(default=1.0, ge=1, description="dispersion volume over measured aliquot volume")
    volume: str = Field(description='volume of the undiluted dispersion, e.g. "4.0 mL"')
    shell: Optional[Literal["ZnS", "CdS"]] = None
    shell_monolayers: float = Field(default=0.0, ge=0, le=20)


OutputIn.model_rebuild()  # resolves the forward reference to EstimateIn


# --- query parameters shared by the API, the pages and the command line ----------------------


class PreviewQuery(BaseModel):
    model_config = ConfigDict(extra="forbid")
    scales: list[float] = Field(default=[2.0, 5.0, 10.0], description="1 to 20 comma-separated scale factors")

    @field_validator("scales", mode="before")
    @classmethod
    def _split(cls, value):
        parts = [p for p in str(value or "").split(",") if p.strip()]
        if not parts or len(parts) > 20:
            raise ValueError("give 1 to 20 comma-separated scale factors, e.g. scales=2,5,10")
        return parts

    @field_validator("scales")
    @classmethod
    def _positive(cls, value: list[float]) -> list[float]:
        if any(v <= 0 or v > 1000 for v in value):
            raise ValueError("scale factors must be above 0 and at most 1000")
        return value
