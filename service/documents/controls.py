"""Controls, emergency measures and transport suggestions: the data files in ``rules/``.

``rules/controls.yaml`` maps what a procedure shows (findings by measure, reagent flags,
step operations and atmospheres, elements) to process hazards with their controls and to
emergency measures; ``rules/transport-suggestions.yaml`` maps waste streams to suggested
UN entries. Both are validated at load (file and key path in every error). This module
does no I/O beyond reading those files and imports neither Flask nor the database.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path
from typing import Literal, Optional

from pydantic import BaseModel, ConfigDict, Field, model_validator

from service.datafiles import load_data_file

__all__ = ["Facts", "ControlsFile", "TransportFile", "load_controls", "load_transport", "applicable",
           "transport_choice"]


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True, str_strip_whitespace=True)


class When(_Strict):
    """Triggers; an entry applies when any one of them matches."""

    measures: tuple[str, ...] = ()
    flags: tuple[str, ...] = ()
    operations: tuple[str, ...] = ()
    atmospheres: tuple[str, ...] = ()
    elements: tuple[str, ...] = ()


class Control(_Strict):
    kind: Literal["engineering", "administrative", "ppe"]
    text: str = Field(min_length=3)


class HazardEntry(_Strict):
    id: str = Field(pattern=r"^[a-z0-9][a-z0-9-]*$")
    hazard: str = Field(min_length=3)
    when: When
    controls: tuple[Control, ...] = Field(min_length=1)
    source: str = Field(min_length=3)


class EmergencyEntry(_Strict):
    id: str = Field(pattern=r"^[a-z0-9][a-z0-9-]*$")
    title: str = Field(min_length=3)
    when: When
    measures: tuple[str, ...] = Field(min_length=1)
    source: str = Field(min_length=3)


class ControlsFile(_Strict):
    version: str
    hazards: tuple[HazardEntry, ...]
    emergency: tuple[EmergencyEntry, ...]


class TransportWhen(_Strict):
    elements: tuple[str, ...] = ()
    components: tuple[str, ...] = ()


class Candidate(_Strict):
    un: str = Field(pattern=r"^UN \d{4}$")
    description: str = Field(min_length=3)
    when: Optional[TransportWhen] = None
    priority: int = Field(ge=0, le=1000)
    reason: str = Field(min_length=3, max_length=300)  # why this entry, when it is the one chosen
    status: Literal["seen", "2nd", "memory"]
    source: str = Field(min_length=3)


class StreamEntry(_Strict):
    stream: str
    title: str
    candidates: tuple[Candidate, ...] = ()

    @model_validator(mode="after")
    def _one_priority_each(self) -> "StreamEntry":
        priorities = [c.priority for c in self.candidates]
        if len(priorities) != len(set(priorities)):
            raise ValueError(f"stream {self.stream}: two candidates share a priority; the choice must be one entry")
        return self


class TransportFile(_Strict):
    version: str
    choice: Literal["highest_priority_applicable"]
    streams: tuple[StreamEntry, ...]


CHOICE_RULES = {"highest_priority_applicable": "the entry of highest priority whose conditions the container meets"}


@lru_cache(maxsize=8)
def load_controls(rules_dir: str) -> ControlsFile:
    """``rules/controls.yaml``; raises ``DataFileError`` with file and key path."""
    return load_data_file(Path(rules_dir) / "controls.yaml", ControlsFile)


@lru_cache(maxsize=8)
def load_transport(rules_dir: str) -> TransportFile:
    """``rules/transport-suggestions.yaml``; raises ``DataFileError`` with file and key path."""
    return load_data_file(Path(rules_dir) / "transport-suggestions.yaml", TransportFile)


@dataclass(frozen=True)
class Facts:
    """What a procedure shows, as the triggers in controls.yaml name it."""

    measures: frozenset[str] = frozenset()  # measure names without the ":<El>" part
    flags: frozenset[str] = frozenset()
    operations: frozenset[str] = frozenset()
    atmospheres: frozenset[str] = frozenset()
    elements: frozenset[str] = frozenset()


def _matches(when: When, facts: Facts) -> bool:
    return bool(set(when.measures) & facts.measures or set(when.flags) & facts.flags
                or set(when.operations) & facts.operations or set(when.atmospheres) & facts.atmospheres
                or set(when.elements) & facts.elements)


def applicable(entries, facts: Facts) -> list:
    """The entries (hazards or emergency measures) whose triggers match ``facts``, in file order.

    >>> f = ControlsFile(version="1", emergency=(), hazards=(HazardEntry(id="spin", hazard="Spinning",
    ...     when=When(operations=("centrifuge",)), controls=(Control(kind="engineering", text="sealed rotor"),),
    ...     source="common practice"),))
    >>> [h.id for h in applicable(f.hazards, Facts(operations=frozenset({"centrifuge"})))]
    ['spin']
    >>> applicable(f.hazards, Facts(operations=frozenset({"heat"})))
    []
    """
    return [entry for entry in entries if _matches(entry.when, facts)]


def _conditions(when: Optional[TransportWhen]) -> str:
    needs = [f"{' or '.join(when.elements)} present"] if when and when.elements else []
    needs += [f"{' or '.join(when.components)} in the liquid"] if when and when.components else []
    return " or ".join(needs) or "none"


def _meets(when: Optional[TransportWhen], elements: set[str], components: set[str]) -> bool:
    return when is None or bool(set(when.elements) & elements or set(when.components) & components)


def transport_choice(transport: TransportFile, stream: str, elements: set[str], components: set[str]) -> dict:
    """The one suggested UN entry for a container, by the file's choice rule, and the others with why not.

    ``elements`` are those present beyond zero, ``components`` the catalogue keys in the liquid. An unknown
    stream, or one without candidates, has no choice (``chosen`` is None).

    >>> t = TransportFile(version="1", choice="highest_priority_applicable", streams=(StreamEntry(
    ...     stream="s", title="S", candidates=(
    ...         Candidate(un="UN 1993", description="generic", priority=10, reason="generic", status="2nd", source="src"),
    ...         Candidate(un="UN 2570", description="cadmium", priority=30, reason="Cd present",
    ...                   when=TransportWhen(elements=("Cd",)), status="seen", source="src"))),))
    >>> c = transport_choice(t, "s", {"Cd"}, set())
    >>> c["chosen"]["un"], [(n["un"], n["why_not"]) for n in c["not_chosen"]]
    ('UN 2570', [('UN 1993', 'its conditions are met, but UN 2570 ranks higher (priority 30 over 10)')])
    >>> transport_choice(t, "s", set(), set())["not_chosen"][0]["why_not"]
    'its conditions are not met (it needs Cd present)'
    """
    entry = next((s for s in transport.streams if s.stream == stream), None)
    rule = CHOICE_RULES[transport.choice]
    if entry is None:
        return {"title": stream, "rule": rule, "chosen": None, "not_chosen": []}
    ranked = sorted(entry.candidates, key=lambda c: -c.priority)
    met = [c for c in ranked if _meets(c.when, elements, components)]
    chosen = met[0] if met else None
    not_chosen = []
    for c in ranked:
        if c is chosen:
            continue
        why = (f"its conditions are met, but {chosen.un} ranks higher (priority {chosen.priority} over {c.priority})"
               if c in met else f"its conditions are not met (it needs {_conditions(c.when)})")
        not_chosen.append({**c.model_dump(exclude={"when"}), "conditions": _conditions(c.when), "why_not": why})
    return {"title": entry.title, "rule": rule,
            "chosen": {**chosen.model_dump(exclude={"when"}), "conditions": _conditions(chosen.when)} if chosen else None,
            "not_chosen": not_chosen}
