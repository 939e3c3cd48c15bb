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

from pydantic import BaseModel, ConfigDict, Field

from service.datafiles import load_data_file

__all__ = ["Facts", "ControlsFile", "TransportFile", "load_controls", "load_transport", "applicable",
           "transport_candidates"]


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
    status: Literal["seen", "2nd", "memory"]
    source: str = Field(min_length=3)


class StreamEntry(_Strict):
    stream: str
    title: str
    candidates: tuple[Candidate, ...] = ()


class TransportFile(_Strict):
    version: str
    streams: tuple[StreamEntry, ...]


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


def transport_candidates(transport: TransportFile, stream: str, elements: set[str], components: set[str]):
    """(stream title, applicable candidates) for a container's stream; unknown stream: (stream, [])."""
    entry = next((s for s in transport.streams if s.stream == stream), None)
    if entry is None:
        return stream, []
    chosen = [c for c in entry.candidates
              if c.when is None or set(c.when.elements) & elements or set(c.when.components) & components]
    return entry.title, chosen
