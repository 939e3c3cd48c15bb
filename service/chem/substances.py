"""The substance catalogue shipped in ``rules/substances.yaml``.

Each entry is a chemical identity with its formula, CAS number, physical data, GHS/CLP
classification and flags, and the source of those data. The H-statement texts live in
``rules/hazard-statements.yaml``; the loader checks that every code a substance uses
has its text there.
"""

from __future__ import annotations

import re
from functools import cached_property
from pathlib import Path
from typing import Literal, Optional

from pydantic import BaseModel, ConfigDict, Field, field_validator, model_validator

from service.chem.cas import validate_cas
from service.chem.formula import parse_formula
from service.datafiles import DataFileError, load_data_file

__all__ = [
    "FLAGS",
    "HazardStatement",
    "HazardStatements",
    "Substance",
    "SubstanceCatalogue",
    "load_catalogue",
]

Flag = Literal[
    "carcinogen",       # CLP Carc. 1A/1B or GHS Category 1
    "mutagen",          # Muta. 1A/1B/2
    "reprotoxic",       # Repr. 1A/1B/2
    "acutely_toxic",    # Acute Tox. 1–3
    "air_sensitive",    # reacts with air or moisture; handle under inert gas
    "pyrophoric",       # ignites in air
    "flammable",        # flammable liquid, solid or gas
    "acid",             # a Brønsted acid (carboxylic, mineral)
    "oxidizer",
    "stench",
    "inert_gas",
    "environmental",    # Aquatic Acute 1 / Chronic 1–2
    "alcohol",          # an alcohol (R–OH on a saturated carbon): counts toward the alcohol of an aqueous solution
]
FLAGS: tuple[str, ...] = Flag.__args__  # type: ignore[attr-defined]

_H_CODE = re.compile(r"^(EU)?H\d{3}[A-Za-z]{0,3}$")
_PICTOGRAM = re.compile(r"^GHS0[1-9]$")


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True, str_strip_whitespace=True)


class Hazard(_Strict):
    """GHS/CLP classification of one substance."""

    signal_word: Optional[Literal["Danger", "Warning"]] = None
    classes: tuple[str, ...] = ()  # CLP class and category codes, e.g. "Carc. 1B"
    h_statements: tuple[str, ...] = ()  # "H350", "H361fd"
    pictograms: tuple[str, ...] = ()  # "GHS06"

    @field_validator("h_statements")
    @classmethod
    def _h_codes(cls, value: tuple[str, ...]) -> tuple[str, ...]:
        for code in value:
            if not _H_CODE.match(code):
                raise ValueError(f"{code!r} is not an H-statement code such as H350 or H361fd")
        return value

    @field_validator("pictograms")
    @classmethod
    def _pictograms(cls, value: tuple[str, ...]) -> tuple[str, ...]:
        for code in value:
            if not _PICTOGRAM.match(code):
                raise ValueError(f"{code!r} is not a GHS pictogram code GHS01 … GHS09")
        return value


class Substance(_Strict):
    """One catalogue entry. Temperatures in °C, density in g/mL at about 20–25 °C."""

    key: str = Field(pattern=r"^[a-z0-9][a-z0-9-]*$")
    name: str = Field(min_length=1)
    synonyms: tuple[str, ...] = ()
    formula: str
    cas: str
    state: Literal["solid", "liquid", "gas"]
    density_g_per_ml: Optional[float] = Field(default=None, gt=0)
    flash_point_c: Optional[float] = None  # closed cup; None: no flash point
    boiling_point_c: Optional[float] = None
    autoignition_c: Optional[float] = None
    hazard: Hazard = Hazard()
    flags: tuple[Flag, ...] = ()
    source: str = Field(min_length=3)
    physical_source: Optional[str] = None

    @field_validator("formula")
    @classmethod
    def _formula(cls, value: str) -> str:
        parse_formula(value)  # FormulaError is a ValueError: pydantic reports it with the key path
        return value

    @field_validator("cas")
    @classmethod
    def _cas(cls, value: str) -> str:
        return validate_cas(value)

    @property
    def parsed_formula(self):
        return parse_formula(self.formula)

    @property
    def carcinogen_category(self) -> Optional[str]:
        """The CLP carcinogenicity category ("1A", "1B", "2") if classified."""
        for cls_code in self.hazard.classes:
            if cls_code.startswith("Carc. "):
                return cls_code.split(" ", 1)[1]
        return None


class SubstanceCatalogue(_Strict):
    version: str
    substances: tuple[Substance, ...]

    @model_validator(mode="after")
    def _unique(self) -> "SubstanceCatalogue":
        seen: dict[str, str] = {}
        for entry in self.substances:
            for label in (entry.key, entry.name.lower(), entry.cas, *(s.lower() for s in entry.synonyms)):
                if label in seen and seen[label] != entry.key:
                    raise ValueError(f"{label!r} names both {seen[label]!r} and {entry.key!r}")
                seen[label] = entry.key
        return self

    @cached_property
    def _index(self) -> dict[str, Substance]:
        index: dict[str, Substance] = {}
        for entry in self.substances:
            for label in (entry.key, entry.name, entry.cas, *entry.synonyms):
                index[label.lower()] = entry
        return index

    def find(self, name_or_cas: str) -> Optional[Substance]:
        """Look up by key, name, synonym or CAS number (case-insensitive)."""
        return self._index.get((name_or_cas or "").strip().lower())


class HazardStatement(_Strict):
    code: str
    text: str = Field(min_length=3)
    source: str = Field(min_length=3)


class HazardStatements(_Strict):
    version: str
    statements: tuple[HazardStatement, ...]

    def text_of(self, code: str) -> Optional[str]:
        return next((s.text for s in self.statements if s.code == code), None)


def load_catalogue(rules_dir: Path | str) -> tuple[SubstanceCatalogue, HazardStatements]:
    """Load and cross-check ``substances.yaml`` and ``hazard-statements.yaml`` in ``rules_dir``.

    Raises :class:`service.datafiles.DataFileError` naming file and key path.
    """
    rules_dir = Path(rules_dir)
    catalogue = load_data_file(rules_dir / "substances.yaml", SubstanceCatalogue)
    statements = load_data_file(rules_dir / "hazard-statements.yaml", HazardStatements)
    known = {s.code for s in statements.statements}
    missing = [
        (f"substances[{i} {entry.key}].hazard.h_statements", f"{code} has no text in hazard-statements.yaml")
        for i, entry in enumerate(catalogue.substances)
        for code in entry.hazard.h_statements
        if code not in known
    ]
    if missing:
        raise DataFileError(rules_dir / "substances.yaml", missing)
    return catalogue, statements
