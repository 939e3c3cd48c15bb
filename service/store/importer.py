"""Import of an inventory spreadsheet (CSV or XLSX) into stocks.

Every row is checked first and reported with its spreadsheet line: what was read, and accepted or
the reason it was rejected. A real run then writes in one transaction: every row, or nothing. A file
with a rejected row imports nothing unless the caller asks for the accepted rows alone
(``only_valid``); the CLI, the API and the pages follow this one rule.
"""

from __future__ import annotations

import datetime as dt
import io
import zipfile
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Callable, Optional

from pydantic import BaseModel, ConfigDict, Field, ValidationError, field_validator
from sqlalchemy import select
from sqlalchemy.orm import Session

from service.chem.cas import validate_cas
from service.chem.content import substance_element_masses_ug
from service.errors import InvalidInput
from service.schemas import Density, Label, LocationIn, MassOrVolume, StockIn
from service.store import inventory
from service.store.ledger import to_csv_bytes
from service.store.models import Lab, Location, Stock, Substance

if TYPE_CHECKING:  # pandas is imported where a table is made (a slow import; most commands make none)
    import pandas as pd

__all__ = ["ImportReport", "Rejected", "ReadRow", "REQUIRED_COLUMNS", "SUFFIXES", "MAX_UPLOAD_BYTES",
           "MAX_UPLOAD_ROWS", "read_table", "read_upload", "lookup_in", "import_inventory"]

REQUIRED_COLUMNS = ("label", "substance", "amount", "lab", "building", "room", "storage")
OPTIONAL_COLUMNS = ("cas", "purity_percent", "density_g_per_ml", "opened_on", "expires_on")
SUFFIXES = (".csv", ".xlsx", ".xlsm")
# A file sent over the web (a page or the API): at most 512 KiB and 5,000 rows. A lab's inventory of a few
# thousand stocks is about 100 bytes a row as CSV (less as XLSX), and the report of each row is shown on
# one page. Larger inventories go through `dotledger import-inventory`, which reads a file on the server.
MAX_UPLOAD_BYTES = 512 * 1024
MAX_UPLOAD_ROWS = 5000


class ImportRow(BaseModel):
    """One spreadsheet row, as text cells; empty cells are None."""

    model_config = ConfigDict(str_strip_whitespace=True, extra="ignore")
    label: Label = Field(min_length=1, max_length=80)
    substance: str = Field(min_length=1, max_length=200)
    amount: MassOrVolume
    lab: Label = Field(min_length=1, max_length=40)
    building: Label = Field(min_length=1, max_length=100)
    room: Label = Field(min_length=1, max_length=100)
    storage: Label = Field(min_length=1, max_length=200)
    cas: Optional[str] = Field(default=None, max_length=12)
    purity_percent: float = Field(default=100.0, gt=0, le=100, allow_inf_nan=False)
    density_g_per_ml: Optional[Density] = Field(default=None, allow_inf_nan=False)
    opened_on: Optional[dt.date] = None
    expires_on: Optional[dt.date] = None

    @field_validator("cas")
    @classmethod
    def _cas(cls, value: Optional[str]) -> Optional[str]:
        return validate_cas(value) if value else None


@dataclass(frozen=True)
class Rejected:
    line: int  # spreadsheet line: the header is line 1
    label: str
    reason: str


@dataclass(frozen=True)
class ReadRow:
    """One row as read (the cells that say what and where) and what became of it."""

    line: int  # spreadsheet line: the header is line 1
    label: str
    substance: str
    amount: str
    lab: str
    location: str  # building / room / storage as read
    accepted: bool
    reason: str = ""  # why it was rejected
    matched: str = ""  # the catalogue substance an accepted row is


@dataclass
class ImportReport:
    rows: int = 0
    imported: int = 0
    locations_created: int = 0
    rejected: list[Rejected] = field(default_factory=list)
    dry_run: bool = False
    only_valid: bool = False  # the accepted rows were asked for alone
    lines: list[ReadRow] = field(default_factory=list)

    @property
    def accepted(self) -> int:
        return self.rows - len(self.rejected)

    @property
    def withheld(self) -> bool:
        """A real run that imported nothing because rows were rejected and the accepted ones alone were not asked for."""
        return not self.dry_run and bool(self.rejected) and not self.only_valid

    def to_frame(self) -> pd.DataFrame:
        import pandas as pd

        return pd.DataFrame([r.__dict__ for r in self.rejected], columns=["line", "label", "reason"])

    def to_csv_bytes(self) -> bytes:
        """The rejected rows as UTF-8 CSV, text that looks like a formula neutralised (the cells come from the file)."""
        return to_csv_bytes(self.to_frame(), caution=None)


def read_table(path: Path | str, data: Optional[bytes] = None) -> pd.DataFrame:
    """Read a CSV or XLSX file as text cells (empty cells as ""); ``data``: its bytes, ``path`` then only names it.

    A file that cannot be read as its kind is InvalidInput naming ``file``.
    """
    import pandas as pd

    path = Path(path)
    suffix = path.suffix.lower()
    source = path if data is None else io.BytesIO(data)
    try:
        if suffix == ".csv":
            frame = pd.read_csv(source, dtype=str, keep_default_na=False, encoding="utf-8-sig")
        elif suffix in (".xlsx", ".xlsm"):
            frame = pd.read_excel(source, dtype=str, keep_default_na=False)
        else:
            raise InvalidInput("file", f"expected a .csv or .xlsx file, got {path.name!r}")
    except (UnicodeDecodeError, pd.errors.ParserError, pd.errors.EmptyDataError, zipfile.BadZipFile, KeyError,
            OSError) as exc:
        kind = "CSV (UTF-8)" if suffix == ".csv" else "XLSX"
        raise InvalidInput("file", f"{path.name!r} could not be read as {kind}: {str(exc)[:200]}") from None
    frame.columns = [str(c).strip().lower().replace(" ", "_") for c in frame.columns]
    missing = [c for c in REQUIRED_COLUMNS if c not in frame.columns]
    if missing:
        raise InvalidInput("columns", f"missing column(s): {', '.join(missing)}; required: {', '.join(REQUIRED_COLUMNS)}")
    return frame


def read_upload(filename: str, data: bytes) -> pd.DataFrame:
    """A spreadsheet sent over the web: at most MAX_UPLOAD_BYTES and MAX_UPLOAD_ROWS rows (InvalidInput naming ``file``)."""
    if len(data) > MAX_UPLOAD_BYTES:
        raise InvalidInput("file", f"{filename!r} is {len(data):,} bytes; a file sent here is at most "
                                   f"{MAX_UPLOAD_BYTES:,} bytes (larger files: dotledger import-inventory)")
    if not data:
        raise InvalidInput("file", f"{filename!r} is empty")
    frame = read_table(Path(filename).name or "upload", data)
    if len(frame) > MAX_UPLOAD_ROWS:
        raise InvalidInput("file", f"{filename!r} has {len(frame):,} rows; a file sent here has at most "
                                   f"{MAX_UPLOAD_ROWS:,} (larger files: dotledger import-inventory)")
    return frame


def lookup_in(catalogue) -> Callable[[str], Optional[str]]:
    """The importer's ``catalogue_lookup`` from the shipped catalogue: a name, synonym or CAS number -> its key."""
    def lookup(text: str) -> Optional[str]:
        entry = catalogue.find(text)
        return entry.key if entry else None
    return lookup


def _cell(cells: dict, name: str) -> str:
    return str(cells.get(name, "")).strip()[:200]


def _reason(exc: Exception) -> str:
    if isinstance(exc, ValidationError):
        return "; ".join(f"{'.'.join(map(str, e['loc'])) or 'row'}: {e['msg']}" for e in exc.errors())
    return str(exc)


def import_inventory(
    session: Session,
    frame: pd.DataFrame,
    *,
    catalogue_lookup: Callable[[str], Optional[str]],
    dry_run: bool = False,
    only_valid: bool = False,
    progress: Callable[[int], None] = lambda n: None,
) -> ImportReport:
    """Check every row, then create the stocks in the caller's transaction.

    A real run writes every row, or nothing when a row is rejected (``report.withheld``) unless
    ``only_valid`` asks for the accepted rows alone. ``catalogue_lookup`` maps a name, synonym or
    CAS number to a substance key (:func:`lookup_in`). The caller commits, or rolls back on any exception.
    """
    report = ImportReport(rows=len(frame), dry_run=dry_run, only_valid=only_valid)
    substances = {s.key: s for s in session.scalars(select(Substance).where(Substance.retired_at.is_(None)))}
    labs = {lab.code.lower(): lab for lab in session.scalars(select(Lab).where(Lab.retired_at.is_(None)))}
    locations = {(l.building, l.room, l.storage): l for l in session.scalars(select(Location))}
    owners = {where: place.lab_id for where, place in locations.items()}  # a new place: the lab of its first row
    taken = set(session.scalars(select(Stock.label)))
    accepted: list[tuple[ImportRow, Substance, Lab]] = []

    for index, cells in enumerate(frame.to_dict(orient="records")):
        line = index + 2
        label = str(cells.get("label", "")).strip()
        read = {"line": line, "label": label[:200], "substance": _cell(cells, "substance"),
                "amount": _cell(cells, "amount"), "lab": _cell(cells, "lab"),
                "location": " / ".join(_cell(cells, c) for c in ("building", "room", "storage"))}
        try:
            row = ImportRow.model_validate({k: v for k, v in cells.items() if str(v).strip() != ""})
            key = catalogue_lookup(row.substance) or catalogue_lookup(row.cas or "")
            substance = substances.get(key or "")
            if substance is None:
                raise InvalidInput("substance", f"unknown substance {row.substance!r}")
            if row.cas and row.cas != substance.cas:
                raise InvalidInput("cas", f"{row.cas} is not the CAS number of {substance.name} ({substance.cas})")
            lab = labs.get(row.lab.lower())
            if lab is None:
                raise InvalidInput("lab", f"unknown lab {row.lab!r}")
            if row.label in taken:
                raise InvalidInput("label", f"label {row.label!r} is already used")
            # The element content check also catches a volume without a density.
            substance_element_masses_ug(
                row.amount, substance.formula, purity=row.purity_percent / 100,
                density_g_per_ml=row.density_g_per_ml or substance.density_g_per_ml, substance=substance.name,
            )
            where = (row.building, row.room, row.storage)
            if owners.setdefault(where, lab.id) not in (None, lab.id):
                raise InvalidInput("storage", f"{' / '.join(where)} is a location of another lab")
        except (ValueError, ValidationError) as exc:
            report.rejected.append(Rejected(line, label, _reason(exc)))
            report.lines.append(ReadRow(**read, accepted=False, reason=_reason(exc)))
        else:
            taken.add(row.label)
            accepted.append((row, substance, lab))
            report.lines.append(ReadRow(**read, accepted=True, matched=substance.name))
        progress(1)

    if dry_run:
        report.imported = len(accepted)
        return report
    if report.withheld:
        return report
    for row, substance, lab in accepted:
        where = (row.building, row.room, row.storage)
        if where not in locations:
            body = LocationIn(lab_id=lab.id, building=row.building, room=row.room, storage=row.storage)
            locations[where] = inventory.create_record(session, Location, body)
            report.locations_created += 1
        inventory.create_stock(
            session,
            StockIn(
                label=row.label, substance_id=substance.id, lab_id=lab.id, location_id=locations[where].id,
                amount=row.amount, purity_percent=row.purity_percent, density_g_per_ml=row.density_g_per_ml,
                opened_on=row.opened_on, expires_on=row.expires_on,
            ),
        )
        report.imported += 1
    return report

