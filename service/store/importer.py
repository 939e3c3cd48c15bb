"""Import of an inventory spreadsheet (CSV or XLSX) into stocks.

Every row is checked first; the valid rows are then written in one transaction, so a
file is imported whole (its valid rows) or not at all. Each rejected row is reported with
its spreadsheet line and the reason.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable, Optional

import pandas as pd
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

__all__ = ["ImportReport", "Rejected", "REQUIRED_COLUMNS", "read_table", "import_inventory"]

REQUIRED_COLUMNS = ("label", "substance", "amount", "lab", "building", "room", "storage")
OPTIONAL_COLUMNS = ("cas", "purity_percent", "density_g_per_ml", "opened_on", "expires_on")


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


@dataclass
class ImportReport:
    rows: int = 0
    imported: int = 0
    locations_created: int = 0
    rejected: list[Rejected] = field(default_factory=list)
    dry_run: bool = False

    def to_frame(self) -> pd.DataFrame:
        return pd.DataFrame([r.__dict__ for r in self.rejected], columns=["line", "label", "reason"])

    def to_csv_bytes(self) -> bytes:
        """The rejected rows as UTF-8 CSV, text that looks like a formula neutralised (the cells come from the file)."""
        return to_csv_bytes(self.to_frame(), caution=None)


def read_table(path: Path | str) -> pd.DataFrame:
    """Read a CSV or XLSX file as text cells (empty cells as "")."""
    path = Path(path)
    suffix = path.suffix.lower()
    if suffix == ".csv":
        frame = pd.read_csv(path, dtype=str, keep_default_na=False, encoding="utf-8-sig")
    elif suffix in (".xlsx", ".xlsm"):
        frame = pd.read_excel(path, dtype=str, keep_default_na=False)
    else:
        raise InvalidInput("file", f"expected a .csv or .xlsx file, got {path.name!r}")
    frame.columns = [str(c).strip().lower().replace(" ", "_") for c in frame.columns]
    missing = [c for c in REQUIRED_COLUMNS if c not in frame.columns]
    if missing:
        raise InvalidInput("columns", f"missing column(s): {', '.join(missing)}; required: {', '.join(REQUIRED_COLUMNS)}")
    return frame


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
    progress: Callable[[int], None] = lambda n: None,
) -> ImportReport:
    """Check every row, then create the valid ones as stocks in the caller's transaction.

    ``catalogue_lookup`` maps a name, synonym or CAS number to a substance key (the
    shipped catalogue's index). The caller commits, or rolls back on any exception.
    """
    report = ImportReport(rows=len(frame), dry_run=dry_run)
    substances = {s.key: s for s in session.scalars(select(Substance).where(Substance.retired_at.is_(None)))}
    labs = {lab.code.lower(): lab for lab in session.scalars(select(Lab).where(Lab.retired_at.is_(None)))}
    locations = {(l.building, l.room, l.storage): l for l in session.scalars(select(Location))}
    owners = {where: place.lab_id for where, place in locations.items()}  # a new place: the lab of its first row
    taken = set(session.scalars(select(Stock.label)))
    accepted: list[tuple[ImportRow, Substance, Lab]] = []

    for index, cells in enumerate(frame.to_dict(orient="records")):
        line = index + 2
        label = str(cells.get("label", "")).strip()
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
        else:
            taken.add(row.label)
            accepted.append((row, substance, lab))
        progress(1)

    if dry_run:
        report.imported = len(accepted)
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

