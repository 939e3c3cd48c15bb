"""The shape of a rule pack: pydantic models for the YAML files in ``rules/``.

These models check structure only (names, allowed words, required fields, message
placeholders). Whether a measure exists, fits the scope and agrees with the threshold's
unit is checked by :mod:`service.rules.loader`, which knows the measure registry.

>>> Rule.model_validate({"id": "site.x", "scope": "procedure", "measure": "element_mass:Cd",
...     "comparator": ">=", "threshold": "1 g", "level": "review", "message": "{value}",
...     "source": "site policy"}).level
'review'
"""

from __future__ import annotations

import string
from typing import Literal, Optional, Union

from pydantic import BaseModel, ConfigDict, Field, field_validator, model_validator

from service import vocab

__all__ = [
    "SCOPES",
    "LEVELS",
    "COMPARATORS",
    "PLACEHOLDERS",
    "SuggestedCode",
    "Rule",
    "WasteCounting",
    "RulePack",
    "message_placeholders",
]

SCOPES = ("procedure", "run", "waste_container", "inventory", "accumulation_area", "generator_month")
LEVELS = vocab.FINDING_LEVELS  # in rising severity
COMPARATORS = (">", ">=", "<", "<=", "==", "!=")
PLACEHOLDERS = frozenset({"value", "threshold", "detail"})

Scope = Literal["procedure", "run", "waste_container", "inventory", "accumulation_area", "generator_month"]
Level = Literal[vocab.FINDING_LEVELS]
Comparator = Literal[">", ">=", "<", "<=", "==", "!="]
Mark = Literal[vocab.RULE_MARKS]
OptIn = Literal[vocab.OPT_INS]
# The scope each mark belongs to: an area's clock starts from its area rules, a category from a month's.
MARK_SCOPES = {"area_over_limit": "accumulation_area", "small_quantity_generator": "generator_month",
               "large_quantity_generator": "generator_month"}

_SLUG = r"^[a-z0-9]+(-[a-z0-9]+)*$"
_DOTTED_SLUG = r"^[a-z0-9]+([-_][a-z0-9]+)*(\.[a-z0-9]+([-_][a-z0-9]+)*)+$"


class _Frozen(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)


class SuggestedCode(_Frozen):
    """A waste code, transport number or classification a rule suggests, for review."""

    system: Literal["RCRA", "EU-LoW", "UN", "CLP"]
    code: str = Field(min_length=1)
    description: str = ""


def message_placeholders(message: str) -> list[str]:
    """The placeholder names used in ``message`` (``str.format`` syntax).

    Raises ValueError for unbalanced braces, positional placeholders, conversions
    (``!r``), format specs (``:.2f``) or any name outside {value, threshold, detail}.

    >>> message_placeholders("{value} is over {threshold}")
    ['value', 'threshold']
    """
    names = []
    for _literal, name, spec, conversion in string.Formatter().parse(message):
        if name is None:
            continue
        if name not in PLACEHOLDERS:
            allowed = ", ".join("{" + p + "}" for p in sorted(PLACEHOLDERS))
            raise ValueError(f"unknown placeholder {{{name}}}; use only {allowed}")
        if spec or conversion:
            raise ValueError(f"placeholder {{{name}}} takes no format or conversion")
        names.append(name)
    return names


class Rule(_Frozen):
    """One rule: when ``measure`` ``comparator`` ``threshold`` holds, a finding at ``level``."""

    id: str = Field(pattern=_DOTTED_SLUG)
    scope: Scope
    measure: str = Field(min_length=1)
    comparator: Comparator
    threshold: str = Field(min_length=1)
    level: Level
    message: str = Field(min_length=1)
    source: str = Field(min_length=1)
    suggested_code: Optional[SuggestedCode] = None
    marks: Optional[Mark] = None  # what the rule firing means beyond its finding (MARK_SCOPES)
    opt_in: Optional[OptIn] = None  # active only when an active pack lists this in ``opt_ins``
    replaced_by_opt_in: Optional[OptIn] = None  # inactive when an active pack lists this in ``opt_ins``

    @model_validator(mode="after")
    def _mark_fits_scope(self) -> "Rule":
        if self.marks is not None and MARK_SCOPES[self.marks] != self.scope:
            raise ValueError(f"marks: {self.marks} belongs to {MARK_SCOPES[self.marks]} rules, not {self.scope} rules")
        if self.opt_in is not None and self.opt_in == self.replaced_by_opt_in:
            raise ValueError("a rule cannot both need and be replaced by the same opt-in")
        return self

    @field_validator("threshold", mode="before")
    @classmethod
    def _number_as_text(cls, value: Union[str, int, float]) -> object:
        """Accept a bare YAML number (``threshold: 0``) as the text of a dimensionless value."""
        if isinstance(value, (int, float)) and not isinstance(value, bool):
            return repr(value)
        return value

    @field_validator("message")
    @classmethod
    def _known_placeholders(cls, value: str) -> str:
        message_placeholders(value)
        return value


class WasteCounting(_Frozen):
    """How waste generated is counted for the generator category (scope ``generator_month``).

    ``streams``: the container streams whose entries count as hazardous waste generated;
    ``assumed_density``: the density taken for a liquid (or the part of an entry) whose density
    the catalogue does not give — the report flags every volume counted with it.
    """

    streams: tuple[Literal[vocab.STREAMS], ...] = Field(min_length=1)
    assumed_density: str = Field(min_length=1, max_length=40)
    source: str = Field(min_length=1)


class RulePack(_Frozen):
    """A versioned rule pack: a jurisdiction's baseline or a site's policy."""

    pack: str = Field(pattern=_SLUG)
    version: str = Field(min_length=1)
    jurisdiction: str = Field(min_length=1)
    disclaimer: str = Field(min_length=20)
    opt_ins: tuple[OptIn, ...] = ()  # regimes the site has opted in to (a site pack says so)
    waste_counting: Optional[WasteCounting] = None  # a later pack's replaces an earlier one's
    rules: tuple[Rule, ...] = ()
