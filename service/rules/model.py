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

from pydantic import BaseModel, ConfigDict, Field, field_validator

from service import vocab

__all__ = [
    "SCOPES",
    "LEVELS",
    "COMPARATORS",
    "PLACEHOLDERS",
    "SuggestedCode",
    "Rule",
    "RulePack",
    "message_placeholders",
]

SCOPES = ("procedure", "run", "waste_container", "inventory")
LEVELS = vocab.FINDING_LEVELS  # in rising severity
COMPARATORS = (">", ">=", "<", "<=", "==", "!=")
PLACEHOLDERS = frozenset({"value", "threshold", "detail"})

Scope = Literal["procedure", "run", "waste_container", "inventory"]
Level = Literal[vocab.FINDING_LEVELS]
Comparator = Literal[">", ">=", "<", "<=", "==", "!="]

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


class RulePack(_Frozen):
    """A versioned rule pack: a jurisdiction's baseline or a site's policy."""

    pack: str = Field(pattern=_SLUG)
    version: str = Field(min_length=1)
    jurisdiction: str = Field(min_length=1)
    disclaimer: str = Field(min_length=20)
    rules: tuple[Rule, ...] = ()
