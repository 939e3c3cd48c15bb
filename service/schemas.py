"""Request bodies at the edges (API, CSV import): pydantic models, separate from the ORM."""

from __future__ import annotations

import datetime as dt
import re
import unicodedata
from decimal import Decimal
from functools import lru_cache
from typing import Annotated, ClassVar, Literal, Optional

from pydantic import (AfterValidator, BaseModel, BeforeValidator, ConfigDict, Field, SecretStr, StringConstraints,
                      field_validator, model_validator)

from service import vocab
from service.balance.site import FIGURES
from service.chem.substances import Substance as CatalogueSubstance
from service.chem.units import LIMITS, MAX_AMOUNT_CHARS, check_amount
from service.datafiles import load_data_file
from service.resources import RULES_DIR

__all__ = [
    "ID_MAX",
    "RecordId",
    "ElementSymbol",
    "Id",
    "Label",
    "Text",
    "Density",
    "MassOrVolume",
    "LabIn",
    "LabPatch",
    "LocationIn",
    "LocationPatch",
    "SubstanceIn",
    "SubstancePatch",
    "StockIn",
    "StockPatch",
    "ProductStockIn",
    "ComponentIn",
    "MixtureIn",
    "MixturePatch",
    "UserIn",
    "check_password",
    "UserPatch",
    "TokenRequest",
    "WindowQuery",
    "ElementLedgerQuery",
    "LedgerFigureQuery",
    "LedgerDownloadQuery",
    "LabelQuery",
    "AuditQuery",
    "MovementQuery",
    "ImportQuery",
    "DisposeIn",
    "TransferIn",
    "ShipIn",
    "PageQuery",
    "ListQuery",
    "RunQuery",
    "PAGE_LIMIT_DEFAULT",
    "PAGE_LIMIT_MAX",
    "StepIn",
    "PlannedDrawIn",
    "DrawIn",
    "WastePlanIn",
    "ProcedureIn",
    "ProcedurePatch",
    "DecisionIn",
    "ElementAmountIn",
    "AssayIn",
    "EntryElementIn",
    "ContainerIn",
    "ContainerPatch",
    "EntryComponentIn",
    "EntryIn",
    "ReverseIn",
    "DeterminedCodeIn",
    "DeterminationIn",
    "ManifestQuery",
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


# --- bounded field types -----------------------------------------------------------------------

# Ids in bodies and queries: the same range as RecordId (a larger id names no record on either database).
Id = RecordId


# Hyphen (U+2010) and non-breaking hyphen (U+2011), which NFKC keeps, read as "-" in a label.
_HYPHENS = {0x2010: "-", 0x2011: "-"}


def _plain_text(value: str, *, newlines: bool) -> str:
    """NFKC-normalised text without control or format characters (zero-width, direction overrides)."""
    value = unicodedata.normalize("NFKC", value)
    if not newlines:
        value = value.translate(_HYPHENS)
    for char in value:
        if newlines and char in "\n\r\t":
            continue
        if unicodedata.category(char) in ("Cc", "Cf"):
            raise ValueError(f"contains the control or format character U+{ord(char):04X}, which is not allowed")
    return value


# A label or name (one line); uniqueness of labels is checked case-folded by the store.
Label = Annotated[str, AfterValidator(lambda v: _plain_text(v, newlines=False))]
# Free text (notes, descriptions): line breaks and tabs allowed.
Text = Annotated[str, AfterValidator(lambda v: _plain_text(v, newlines=True))]


def _amount(*kinds: str, example: str):
    """An amount text of one of ``kinds``: at most MAX_AMOUNT_CHARS characters (checked before parsing),
    within service.chem.units.LIMITS, and not below the smallest unit kept (1 µg, 1 µL).

    Every amount field of an API body, page form or import row is one of these types, so each goes
    through the one bound check (:func:`service.chem.units.parse_amount`)."""

    def check(text: str) -> str:
        check_amount(text, expect=kinds)
        return text

    bounds = "; ".join(f"{k} at most {LIMITS[k][0]}" + (f", and 0 or at least 1 {LIMITS[k][1].replace('u', 'µ')}"
                                                          if LIMITS[k][1] else "")
                       for k in kinds if k in LIMITS)
    return Annotated[str, Field(min_length=1, max_length=MAX_AMOUNT_CHARS,
                                description=f'{" or ".join(kinds)} with unit, e.g. "{example}"; '
                                            f"at most {MAX_AMOUNT_CHARS} characters; {bounds}"),
                     AfterValidator(check)]


MassOrVolume = _amount("mass", "volume", example="25 g")
Mass = _amount("mass", example="2.5 mg")
Volume = _amount("volume", example="4.0 mL")
Molarity = _amount("molarity", example="0.2 mol/L")
MassConcentration = _amount("density", example="12.5 mg/L")  # mass per volume


def _not_text(value):
    if isinstance(value, (str, bool)):
        raise ValueError("must be a JSON number, not text or a boolean")
    return value


def _iso_date(value):
    if not isinstance(value, (str, dt.date)):
        raise ValueError("must be a date as text, YYYY-MM-DD")
    return value


# Dates arrive as ISO text in JSON; numbers as JSON numbers (strict mode refuses "1" and "yes").
Day = Annotated[dt.date, BeforeValidator(_iso_date), Field(strict=False)]
Fraction = Annotated[Decimal, BeforeValidator(_not_text), Field(strict=False, ge=0, le=1, allow_inf_nan=False)]
# Densities of lab materials stay below 25 g/mL (osmium, the densest element, is 22.6 g/mL; from memory).
Density = Annotated[float, Field(gt=0, le=25, description="g/mL, above 0 and at most 25")]
Celsius = Annotated[float, Field(ge=-273.15, le=5000, description="°C, from -273.15 to 5000")]


class _Body(BaseModel):
    """A JSON body: strict types (no "1" for 1, no "yes" for true), no NaN or Infinity, no unknown keys."""

    # defer_build: a model's validator is built on its first use, so a process that validates few of them (a
    # command) does not build them all at import (about 40 ms of every start).
    model_config = ConfigDict(extra="forbid", str_strip_whitespace=True, strict=True, allow_inf_nan=False,
                              defer_build=True)


class _Query(BaseModel):
    """Query parameters arrive as text: converted (lax), but unknown names and ill-typed values are refused."""

    model_config = ConfigDict(extra="forbid", str_strip_whitespace=True, allow_inf_nan=False,
                              defer_build=True)  # as above


class LabIn(_Body):
    code: Label = Field(min_length=1, max_length=40)
    name: Label = Field(min_length=1, max_length=200)
    building: Optional[Label] = Field(default=None, max_length=100)


class LabPatch(_Body):
    name: Optional[Label] = Field(default=None, min_length=1, max_length=200)
    building: Optional[Label] = Field(default=None, max_length=100)


class LocationIn(_Body):
    lab_id: Optional[Id] = None
    building: Label = Field(min_length=1, max_length=100)
    room: Label = Field(min_length=1, max_length=100)
    storage: Label = Field(min_length=1, max_length=200)
    kind: LocationKind = "storage"


class LocationPatch(_Body):
    lab_id: Optional[Id] = None
    storage: Optional[Label] = Field(default=None, min_length=1, max_length=200)
    kind: Optional[LocationKind] = None


class SubstanceIn(CatalogueSubstance):
    """A locally added substance: the catalogue's own checks (formula, CAS, H-codes)."""

    model_config = ConfigDict(extra="forbid", frozen=False, str_strip_whitespace=True, allow_inf_nan=False)
    name: Label = Field(min_length=1, max_length=200)
    synonyms: tuple[Annotated[Label, Field(max_length=200)], ...] = Field(default=(), max_length=50)
    formula: str = Field(max_length=100)
    cas: str = Field(max_length=12)
    density_g_per_ml: Optional[Density] = None
    flash_point_c: Optional[Celsius] = None
    boiling_point_c: Optional[Celsius] = None
    autoignition_c: Optional[Celsius] = None
    source: Text = Field(default="local entry — not from the shipped catalogue", min_length=3, max_length=2000)
    physical_source: Optional[Text] = Field(default=None, max_length=2000)

    @model_validator(mode="before")
    @classmethod
    def _json_types(cls, data):
        # The catalogue model converts loosely; a JSON body must give numbers as numbers and text as text.
        if isinstance(data, dict):
            for key in ("density_g_per_ml", "flash_point_c", "boiling_point_c", "autoignition_c"):
                if data.get(key) is not None:
                    _not_text(data[key])
            for key in ("key", "name", "formula", "cas", "state", "source", "physical_source"):
                if data.get(key) is not None and not isinstance(data[key], str):
                    raise ValueError(f"{key}: must be text")
        return data


class SubstancePatch(_Body):
    name: Optional[Label] = Field(default=None, min_length=1, max_length=200)
    density_g_per_ml: Optional[Density] = None
    flash_point_c: Optional[Celsius] = None
    boiling_point_c: Optional[Celsius] = None
    source: Optional[Text] = Field(default=None, min_length=3, max_length=2000)


class StockIn(_Body):
    label: Label = Field(min_length=1, max_length=80)
    substance_id: Id
    lab_id: Id
    location_id: Id
    amount: MassOrVolume
    purity_percent: float = Field(default=100.0, gt=0, le=100)
    density_g_per_ml: Optional[Density] = Field(default=None, description="overrides the catalogue density")
    opened_on: Optional[Day] = None
    expires_on: Optional[Day] = None


class StockPatch(_Body):
    label: Optional[Label] = Field(default=None, min_length=1, max_length=80)
    location_id: Optional[Id] = None
    amount: Optional[MassOrVolume] = None
    purity_percent: Optional[float] = Field(default=None, gt=0, le=100)
    density_g_per_ml: Optional[Density] = None
    opened_on: Optional[Day] = None
    expires_on: Optional[Day] = None


class ProductStockIn(_Body):
    """A run's output put into the inventory: its element content is the output's, exactly."""

    label: Label = Field(min_length=1, max_length=80)
    location_id: Id
    amount: MassOrVolume = Field(description='the product as held, e.g. "48 mg" of solid or "4.0 mL" of a dispersion')
    substance_id: Optional[Id] = Field(default=None, description="the catalogue entry the product is; omitted: the "
                                                                 "one entry made of exactly the output's elements")


class ComponentIn(_Body):
    substance_id: Id
    molarity: Optional[Molarity] = None
    mass_fraction: Optional[Fraction] = None
    volume_fraction: Optional[Fraction] = None
    source_stock_id: Optional[Id] = Field(default=None, description="the stock this component is drawn from")
    source_mixture_id: Optional[Id] = Field(default=None, description="the mixture this component is drawn from")
    amount: Optional[MassOrVolume] = Field(default=None, description='amount drawn from the source, e.g. "789.71 mg" '
                                                                     'or "9 mL" (a mixture gives a volume)')

    @model_validator(mode="after")
    def _exactly_one(self) -> "ComponentIn":
        stated = sum(v is not None for v in (self.molarity, self.mass_fraction, self.volume_fraction))
        drawn = self.source_stock_id is not None or self.source_mixture_id is not None
        if self.source_stock_id is not None and self.source_mixture_id is not None:
            raise ValueError("give at most one of source_stock_id or source_mixture_id")
        if drawn != (self.amount is not None):
            raise ValueError("a source needs the amount drawn from it, and an amount needs its source")
        # A drawn component's content is what it drew; a stated concentration then only describes it.
        if stated > 1 or (stated == 0 and not drawn):
            raise ValueError("give exactly one of molarity, mass_fraction or volume_fraction"
                             + ("" if drawn else ", or the source and amount drawn"))
        return self


class MixtureIn(_Body):
    label: Label = Field(min_length=1, max_length=80)
    name: Label = Field(min_length=1, max_length=200)
    lab_id: Id
    location_id: Id
    volume: Volume
    density_g_per_ml: Optional[Density] = None
    components: list[ComponentIn] = Field(min_length=1, max_length=50)
    received_as_solution: bool = Field(
        default=False, description="true: received ready-made, its element content computed from the stated "
        "concentrations and nothing drawn; false: prepared here, every component names its source and amount")
    prepared_on: Optional[Day] = None
    expires_on: Optional[Day] = None


class MixturePatch(_Body):
    name: Optional[Label] = Field(default=None, min_length=1, max_length=200)
    location_id: Optional[Id] = None
    volume: Optional[Volume] = None
    density_g_per_ml: Optional[Density] = None
    expires_on: Optional[Day] = None


Role = Literal[vocab.ROLES]

PASSWORD_MIN_CHARS = 12


class _CommonPasswords(BaseModel):
    model_config = ConfigDict(extra="forbid")
    source: str = Field(min_length=1)
    passwords: list[str] = Field(min_length=1)


@lru_cache(maxsize=1)
def _common_passwords() -> frozenset[str]:
    listed = load_data_file(RULES_DIR / "common-passwords.yaml", _CommonPasswords).passwords
    return frozenset(unicodedata.normalize("NFKC", p).casefold() for p in listed)


def check_password(secret: SecretStr) -> SecretStr:
    """The one password rule (accounts made and changed by the API, pages and CLI).

    At least 12 characters after Unicode NFKC normalisation, not counting invisible format and
    control characters (zero-width spaces and joiners, bidirectional marks); not one character
    repeated; not in rules/common-passwords.yaml (case ignored).
    """
    text = unicodedata.normalize("NFKC", secret.get_secret_value())
    visible = "".join(ch for ch in text if unicodedata.category(ch) not in ("Cf", "Cc"))
    if len(visible) < PASSWORD_MIN_CHARS:
        raise ValueError(f"at least {PASSWORD_MIN_CHARS} characters, not counting invisible ones")
    if len(set(visible.casefold())) == 1:
        raise ValueError("one character repeated is not a password")
    if text.casefold() in _common_passwords() or visible.casefold() in _common_passwords():
        raise ValueError("this password is on the list of common passwords; choose another")
    return secret


class UserIn(_Body):
    email: str = Field(pattern=r"^[^@\s]+@[^@\s]+\.[^@\s]+$", max_length=254)
    display_name: Label = Field(min_length=1, max_length=200)
    role: Role
    password: SecretStr = Field(min_length=12, max_length=1000, description="12 to 1000 characters")
    lab_ids: list[Id] = Field(default=[], max_length=1000)

    @field_validator("password")
    @classmethod
    def _password_rule(cls, value: SecretStr) -> SecretStr:
        return check_password(value)


class UserPatch(_Body):
    display_name: Optional[Label] = Field(default=None, min_length=1, max_length=200)
    role: Optional[Role] = None
    password: Optional[SecretStr] = Field(default=None, min_length=12, max_length=1000)
    lab_ids: Optional[list[Id]] = Field(default=None, max_length=1000)

    @field_validator("password")
    @classmethod
    def _password_rule(cls, value: Optional[SecretStr]) -> Optional[SecretStr]:
        return None if value is None else check_password(value)


class TokenRequest(_Body):
    email: str = Field(min_length=3, max_length=254)
    password: SecretStr = Field(max_length=1000)
    name: Label = Field(default="api", min_length=1, max_length=100)


# Every listing answers one page: ``limit`` records from ``offset``, beside the ``total`` that match.
PAGE_LIMIT_DEFAULT = 50
PAGE_LIMIT_MAX = 500


class PageQuery(_Query):
    """The page of a listing the query string asks for (a larger or non-integer limit is refused)."""

    limit: int = Field(default=PAGE_LIMIT_DEFAULT, ge=1, le=PAGE_LIMIT_MAX,
                       description=f"records per page, 1 to {PAGE_LIMIT_MAX}")
    offset: int = Field(default=0, ge=0, le=1_000_000_000, description="records to skip")


class RunQuery(PageQuery):
    """Filters of the run listings: one procedure, one lab, one state."""

    procedure_id: Optional[Id] = None
    lab_id: Optional[Id] = None
    state: Optional[Literal[vocab.RUN_STATES]] = None


class ListQuery(PageQuery):
    """Filters of the inventory listings (labs, locations, substances, stocks, mixtures)."""

    include_retired: bool = False
    lab_id: Optional[Id] = None
    location_id: Optional[Id] = None
    substance_id: Optional[Id] = None
    element: Optional[ElementSymbol] = None


class WindowQuery(PageQuery):
    """A page of records made within a time window."""

    since: Optional[dt.datetime] = Field(default=None, description="inclusive; a date or a time without a zone is UTC")
    until: Optional[dt.datetime] = Field(default=None, description="exclusive; a date or a time without a zone is UTC")

    @field_validator("since", "until")
    @classmethod
    def _utc(cls, value: Optional[dt.datetime]) -> Optional[dt.datetime]:
        # The trail keeps aware UTC times; a bare date ("2026-12-01") or a zoneless time is read as UTC.
        return value.replace(tzinfo=dt.timezone.utc) if value is not None and value.tzinfo is None else value


class AuditQuery(WindowQuery):
    entity: Optional[str] = Field(default=None, max_length=60)
    entity_id: Optional[str] = Field(default=None, max_length=60)
    actor: Optional[str] = Field(default=None, max_length=254, description="the actor's label (an e-mail address or a command), any case")
    action: Optional[str] = Field(default=None, max_length=120,
                                  description='create, update, retire, delete, or state_change (any, or one: "state_change:draft->submitted")')


MovementKind = Literal[vocab.MOVEMENT_KINDS]


class MovementQuery(WindowQuery):
    """Filters of the stock movements: kind, a lab (the stock's, or a transfer's receiving lab), a time window."""

    kind: Optional[MovementKind] = None
    lab_id: Optional[Id] = None


class ImportQuery(_Query):
    """How a spreadsheet import runs: a dry run (the default) reports each row and writes nothing."""

    dry_run: bool = Field(default=True, description="true (the default): check and report every row, write nothing")
    only_valid: bool = Field(default=False, description="on a real run, import the accepted rows although others "
                                                        "are rejected; false: a file with a rejected row imports nothing")


class DisposeIn(_Body):
    container_id: Id
    amount: Optional[MassOrVolume] = Field(default=None, description="omitted: all the stock holds")
    description: Text = Field(min_length=1, max_length=2000)


class TransferIn(_Body):
    lab_id: Id
    location_id: Id
    amount: Optional[MassOrVolume] = Field(default=None, description="omitted: all the stock holds")
    label: Label = Field(min_length=1, max_length=80, description="the new stock's label in the receiving lab")


class ShipIn(_Body):
    destination: Label = Field(min_length=1, max_length=300, description="who and where it goes, e.g. a collaborator's lab")
    amount: Optional[MassOrVolume] = Field(default=None, description="omitted: all the stock holds")
    note: Optional[Text] = Field(default=None, max_length=2000)


Operation = Literal["charge", "degas", "heat", "inject", "hold", "grow_shell", "cool", "ligand_exchange",
                    "precipitate", "centrifuge", "wash", "dry", "mix", "transfer"]
Atmosphere = Literal["air", "argon", "nitrogen", "glovebox", "vacuum"]


class StepIn(_Body):
    operation: Operation
    temperature_c: Optional[float] = Field(default=None, ge=-196, le=1200)
    atmosphere: Optional[Atmosphere] = None
    duration_min: Optional[float] = Field(default=None, ge=0, le=100_000, description="minutes, 0 to 100 000 (about 10 weeks)")
    note: Optional[Text] = Field(default=None, max_length=2000)


class DrawIn(_Body):
    stock_id: Optional[Id] = None
    mixture_id: Optional[Id] = None
    amount: MassOrVolume = Field(description='amount drawn at scale 1, e.g. "25.7 mg" or "4 mL"')

    @model_validator(mode="after")
    def _one_source(self) -> "DrawIn":
        if (self.stock_id is None) == (self.mixture_id is None):
            raise ValueError("give exactly one of stock_id or mixture_id")
        return self


class PlannedDrawIn(DrawIn):
    """A procedure's planned draw: a draw and, optionally, the step it goes into the vessel at."""

    step: Optional[int] = Field(default=None, ge=0, le=199,
                                description="0-based position of the step the reagent is added at (as the steps' "
                                            "position); omitted: in the vessel from the start")


class WastePlanIn(_Body):
    stream: Label = Field(min_length=1, max_length=60, description="e.g. non-halogenated solvent with heavy metals")
    contents: Text = Field(min_length=1, max_length=2000)
    expected_amount: Optional[Label] = Field(default=None, max_length=60)


class ProcedureIn(_Body):
    lab_id: Id
    title: Label = Field(min_length=3, max_length=300)
    summary: Optional[Text] = Field(default=None, max_length=5000)
    scale: float = Field(default=1.0, gt=0, le=1000)
    steps: list[StepIn] = Field(min_length=1, max_length=200)
    draws: list[PlannedDrawIn] = Field(min_length=1, max_length=200)
    waste_plan: list[WastePlanIn] = Field(default_factory=list, max_length=50)


class ProcedurePatch(_Body):
    title: Optional[Label] = Field(default=None, min_length=3, max_length=300)
    summary: Optional[Text] = Field(default=None, max_length=5000)
    scale: Optional[float] = Field(default=None, gt=0, le=1000)
    steps: Optional[list[StepIn]] = Field(default=None, min_length=1, max_length=200)
    draws: Optional[list[PlannedDrawIn]] = Field(default=None, min_length=1, max_length=200)
    waste_plan: Optional[list[WastePlanIn]] = Field(default=None, max_length=50)


class DecisionIn(_Body):
    comment: Optional[Text] = Field(default=None, max_length=5000)


Stream = Literal[vocab.STREAMS]


class ElementAmountIn(_Body):
    element: ElementSymbol
    mass: Mass


class AssayIn(_Body):
    element: ElementSymbol
    concentration: MassConcentration = Field(description='measured concentration, e.g. "12.5 mg/L" (ICP-OES of a digest)')
    volume: Volume = Field(description='volume the concentration applies to, e.g. "4.0 mL"')


class EntryElementIn(_Body):
    """One element of a waste entry, given on one basis: a mass; an assay (concentration × volume, as
    run outputs take them: :class:`AssayIn`); or a share in percent of what the entry's run still
    leaves unaccounted of the element (needs the entry's run_id)."""

    element: ElementSymbol
    mass: Optional[Mass] = None
    concentration: Optional[MassConcentration] = Field(default=None, description='assay: e.g. "12.5 mg/L"')
    volume: Optional[Volume] = Field(default=None, description='assay: the volume it applies to, e.g. "4.0 mL"')
    share_percent: Optional[float] = Field(default=None, gt=0, le=100,
                                           description="percent of what the run leaves unaccounted, e.g. 80")

    @model_validator(mode="before")
    @classmethod
    def _from_amount_or_assay(cls, value):  # callers in Python may pass the rows run outputs take
        return value.model_dump() if isinstance(value, (ElementAmountIn, AssayIn)) else value

    @model_validator(mode="after")
    def _one_basis(self) -> "EntryElementIn":
        assay = (self.concentration is not None, self.volume is not None)
        if any(assay) and not all(assay):
            raise ValueError("an assay gives both concentration and volume")
        if (self.mass is not None) + all(assay) + (self.share_percent is not None) != 1:
            raise ValueError("give exactly one of: mass; concentration and volume; share_percent")
        return self

    @property
    def basis(self) -> Literal["mass", "assay", "share"]:
        if self.mass is not None:
            return "mass"
        return "assay" if self.concentration is not None else "share"

    def assay(self) -> AssayIn:
        """The assay this row gives, as run outputs take it."""
        return AssayIn(element=self.element, concentration=self.concentration, volume=self.volume)


class ContainerIn(_Body):
    label: Label = Field(min_length=1, max_length=80)
    lab_id: Id
    location_id: Id
    stream: Stream
    capacity: MassOrVolume = Field(description='"20 L" for liquids, "5 kg" for solids')
    acute_hazardous: bool = False


class ContainerPatch(_Body):
    location_id: Optional[Id] = None
    acute_hazardous: Optional[bool] = None


class EntryComponentIn(_Body):
    substance_id: Id
    volume: Volume


class EntryIn(_Body):
    description: Text = Field(min_length=1, max_length=2000)
    run_id: Optional[Id] = None
    volume: Optional[Volume] = Field(default=None, description="liquid containers")
    mass: Optional[Mass] = Field(default=None, description="solid containers")
    components: list[EntryComponentIn] = Field(default_factory=list, max_length=50)
    elements: list[EntryElementIn] = Field(
        default_factory=list, max_length=30,
        description='per element one of: {"element", "mass"}; an assay {"element", "concentration", "volume"}; '
                    'or {"element", "share_percent"} of what the run leaves unaccounted (needs run_id)')
    filterable_solids_percent: Optional[float] = Field(default=None, ge=0, le=100)
    ph: Optional[float] = Field(default=None, ge=0, le=14,
                                description="pH of a liquid entry as measured, 0 to 14; the container's pH is the "
                                            "one recorded last on an entry that is not reversed")

    @field_validator("elements")
    @classmethod
    def _share_needs_run(cls, rows: list, info):  # run_id is declared above, so it is validated first
        shares = [i for i, row in enumerate(rows) if row.basis == "share"]
        if shares and info.data.get("run_id") is None:
            raise ValueError(f"elements[{shares[0]}]: a share of what a run leaves unaccounted needs run_id")
        return rows


class ReverseIn(_Body):
    reason: Text = Field(min_length=3, max_length=2000)


_CODE_FORMATS = {system: re.compile(pattern) for system, pattern in vocab.WASTE_CODE_FORMATS.items()}
_CODE_EXAMPLES = {"RCRA": "D006, F003, P001, U044", "EU-LoW": '"16 05 06*", "07 07 04*"'}


class DeterminedCodeIn(_Body):
    """One waste code of a determination, in the form of its system (``vocab.WASTE_CODE_FORMATS``)."""

    system: Literal[vocab.WASTE_CODE_SYSTEMS]
    code: str = Field(min_length=1, max_length=12, description='RCRA "D006"; EU-LoW "16 05 06*"')
    description: Optional[Label] = Field(default=None, max_length=300)

    @field_validator("code")
    @classmethod
    def _code_form(cls, code: str, info) -> str:  # system is declared above, so it is validated first
        system = info.data.get("system")
        if system in _CODE_FORMATS and not _CODE_FORMATS[system].fullmatch(code):
            raise ValueError(f"{code!r} is not a {system} code (e.g. {_CODE_EXAMPLES[system]})")
        return code


class DeterminationIn(_Body):
    """The safety officer's determination of a container's waste codes (replaces the one before it)."""

    codes: list[DeterminedCodeIn] = Field(min_length=1, max_length=20)
    comment: Optional[Text] = Field(default=None, max_length=2000)

    @field_validator("codes")
    @classmethod
    def _once_each(cls, codes: list[DeterminedCodeIn]) -> list[DeterminedCodeIn]:
        seen = set()
        for i, row in enumerate(codes):
            if (row.system, row.code) in seen:
                raise ValueError(f"{row.system} {row.code} is given twice (codes.{i})")
            seen.add((row.system, row.code))
        return codes


class RunIn(_Body):
    procedure_id: Id
    scale: float = Field(default=1.0, gt=0, le=1000)
    draws: Optional[list[DrawIn]] = Field(default=None, max_length=200,
                                          description="actual draws; omitted: the planned ones × scale")
    note: Optional[Text] = Field(default=None, max_length=5000)


class OutputIn(_Body):
    label: Label = Field(min_length=1, max_length=120)
    method: Literal["measured", "estimated", "by_difference"]
    description: Optional[Text] = Field(default=None, max_length=2000)
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
    description: Text = Field(min_length=3, max_length=2000)
    elements: list[ElementAmountIn] = Field(min_length=1, max_length=30)


class EstimateIn(_Body):
    """Metal content of a nanocrystal dispersion from its first excitonic absorption peak."""

    core: Literal["CdSe", "CdTe", "CdS"]
    wavelength_nm: float = Field(gt=0, le=2000, description="first excitonic absorption peak of the core, nm (up to 2000)")
    absorbance: float = Field(gt=0, le=10, description="absorbance at that peak of the measured sample (up to 10)")
    path_length_cm: float = Field(default=1.0, gt=0, le=100, description="cm, up to 100")
    dilution_factor: float = Field(default=1.0, ge=1, le=1_000_000,
                                   description="dispersion volume over measured aliquot volume, 1 to 10^6")
    volume: Volume = Field(description='volume of the undiluted dispersion, e.g. "4.0 mL"')
    shell: Optional[Literal["ZnS", "CdS"]] = None
    shell_monolayers: float = Field(default=0.0, ge=0, le=20)


OutputIn.model_rebuild()  # resolves the forward reference to EstimateIn


# --- query parameters shared by the API, the pages and the command line ----------------------


class ManifestQuery(_Query):
    """What a manifest prints about the shipment; a field left out prints as a blank line to fill by hand."""

    transporter: Optional[Label] = Field(default=None, min_length=1, max_length=200)
    receiving_facility: Optional[Label] = Field(default=None, min_length=1, max_length=300)
    container_count: Optional[int] = Field(default=None, ge=1, le=999, description="containers shipped, 1 to 999")
    container_type: Optional[Label] = Field(default=None, min_length=1, max_length=80,
                                            description='e.g. "4 L glass bottle" or "20 L HDPE jerrican"')


class PreviewQuery(_Query):
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
        if any(not (0 < v <= 1000) for v in value):  # also refuses nan
            raise ValueError("scale factors must be above 0 and at most 1000")
        return value


GENERATOR_MONTHS_MAX = 120  # one report spans at most ten years of months
_MONTH = r"^(19[89]\d|2\d{3})-(0[1-9]|1[0-2])$"  # RCRA's generator rules date from 1980


def _month_of(day: dt.date) -> str:
    return f"{day.year:04d}-{day.month:02d}"


class GeneratorQuery(_Query):
    """The calendar months (UTC, ``YYYY-MM``, inclusive) of the generator-category report.

    ``until`` defaults to the current month, ``since`` to eleven months before ``until``.
    """

    since: Optional[str] = Field(default=None, pattern=_MONTH, description="first month, YYYY-MM (UTC)")
    until: Optional[str] = Field(default=None, pattern=_MONTH, description="last month, YYYY-MM (UTC)")

    @model_validator(mode="after")
    def _range(self):
        until = self.until or _month_of(dt.datetime.now(dt.timezone.utc).date())
        year, month = map(int, until.split("-"))
        back = year * 12 + month - 1 - 11
        since = self.since or f"{back // 12:04d}-{back % 12 + 1:02d}"
        if since > until:
            raise ValueError(f"since ({since}) is after until ({until})")
        first_year, first_month = map(int, since.split("-"))
        if (year - first_year) * 12 + month - first_month + 1 > GENERATOR_MONTHS_MAX:
            raise ValueError(f"at most {GENERATOR_MONTHS_MAX} months in one report")
        self.since = since
        self.until = until
        return self


Month = Annotated[str, StringConstraints(pattern=r"^[0-9]{4}-(0[1-9]|1[0-2])$", max_length=7)]


class _LedgerMonths(BaseModel):
    model_config = ConfigDict(extra="forbid")
    since: Optional[Month] = None  # 'YYYY-MM'; default: the site's first month of records
    until: Optional[Month] = None  # 'YYYY-MM'; default: the present month
    element: Optional[ElementSymbol] = None

    @model_validator(mode="after")
    def _order(self):
        if self.since and self.until and self.since > self.until:
            raise ValueError(f"since ({self.since}) is after until ({self.until})")
        return self


class ElementLedgerQuery(_LedgerMonths):
    """The months (UTC, ``YYYY-MM``, inclusive) and element of the site element ledger, and its format."""

    report: ClassVar[str] = "elements"
    format: Literal["json", "csv", "xlsx"] = "json"


class LedgerDownloadQuery(_LedgerMonths):
    """A download of the ledger page: the ledger (``elements``), metal into waste by element, stream and month
    (``waste``) or on hand by element and lab (``inventory``), as CSV or XLSX, over the ledger's months."""

    report: Literal["elements", "waste", "inventory"] = "elements"
    format: Literal["csv", "xlsx"] = "csv"


class LedgerFigureQuery(BaseModel):
    """One figure of one element's month of the site element ledger."""

    model_config = ConfigDict(extra="forbid")
    element: ElementSymbol
    month: Month
    figure: Literal[FIGURES]  # type: ignore[valid-type]


class LabelQuery(_Query):
    """The size a waste container's label prints at (``vocab.LABEL_SIZES``)."""

    size: Literal[vocab.LABEL_SIZES] = Field(  # type: ignore[valid-type]
        default="single-100x150",
        description="single-100x150: one 100 mm × 150 mm label; a4-2x4: an A4 sheet of 2 × 4 labels of "
                    "99.1 mm × 67.7 mm; letter-2x3: a US Letter sheet of 2 × 3 labels of 4 in × 3 1/3 in")
