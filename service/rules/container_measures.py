"""Waste-container measures: the numbers the ``waste_container`` rules compare.

Each function reads a :class:`~service.rules.subjects.ContainerSubject` (frozen facts the
store builds) and answers in its stated unit, or ``None`` when it does not apply. Fractions
are plain numbers 0–1 (a threshold may be written "0.1" or "10 %"); the filterable solids
share is in ``percent`` (write "0.5 %"). A component counts as present when its volume
fraction is at least :data:`TRACE_FRACTION` (0.01) — our choice, following common practice,
not a regulatory value; the packs' "beyond a trace" thresholds use the same 0.01.
"""

from __future__ import annotations

import re
from decimal import Decimal
from typing import Optional

from service.chem.figures import percent
from service.rules.registry import MeasureNameError, MeasureResult, measure, parameter
from service.rules.registry import dec as _dec
from service.rules.registry import plain as _plain
from service.rules.registry import text as _text
from service.rules.subjects import ContainerComponent, ContainerSubject

__all__ = ["TRACE_FRACTION", "TC_EXTRACT_SOLIDS_PERCENT", "is_water", "concentration_basis", "mg_per_l", "mg_per_kg"]

TRACE_FRACTION = Decimal("0.01")
TC_EXTRACT_SOLIDS_PERCENT = Decimal("0.5")  # 40 CFR 261.24(a), seen: below it the liquid is the extract
_KEY = re.compile(r"^[a-z0-9]+(-[a-z0-9]+)*$")


def _check_key(key: str) -> str:
    """Return ``key`` if it has the shape of a catalogue key (lowercase slug); raise otherwise."""
    if _KEY.match(key):
        return key
    raise MeasureNameError(f"{key!r} is not a catalogue key (a lowercase slug such as acetone or ethyl-acetate)")


parameter("substance", "<key>", _check_key)


def is_water(component: ContainerComponent) -> bool:
    """True for the aqueous part of a waste (catalogue key or name ``water``)."""
    return component.key == "water" or component.name.strip().lower() == "water"


def _liquid(subject: ContainerSubject) -> bool:
    return subject.form == "liquid" and subject.volume_l > 0


def _present(subject: ContainerSubject) -> list[ContainerComponent]:
    return [c for c in subject.components if _dec(c.volume_fraction) >= TRACE_FRACTION]


def _fraction(components: list[ContainerComponent]) -> MeasureResult:
    total = sum((_dec(c.volume_fraction) for c in components), Decimal(0))
    detail = ", ".join(f"{c.name} {percent(_dec(c.volume_fraction) * 100)} %" for c in components)
    return MeasureResult(_plain(total), "", detail)


def concentration_basis(subject: ContainerSubject) -> tuple[str, str]:
    """Whether the container's mg/L compare with a toxicity-characteristic limit: (basis, why).

    ``extract`` — a liquid with less than 0.5 % filterable solids is itself the extract
    (40 CFR 261.24(a)), its mg/L compare with the TC limits; ``extraction_test`` — from 0.5 %
    the extract of the leaching procedure decides, so no mg/L is comparable; ``solid`` — a solid
    waste, likewise; ``empty`` — no liquid recorded.

    >>> concentration_basis(ContainerSubject(label="W1", stream="aqueous_heavy_metal", form="liquid",
    ...     volume_l=2.0, mass_kg=0.0, capacity_l=20.0, filterable_solids_percent=1.0))[0]
    'extraction_test'
    """
    if subject.form == "solid":
        return "solid", ("A solid waste: the toxicity characteristic is decided on the extract of the leaching "
                         "procedure (40 CFR 261.24(a), Method 1311); element amounts per kg are totals, not extract "
                         "concentrations.")
    if not _liquid(subject):
        return "empty", "No liquid recorded: no concentration."
    share = _dec(subject.filterable_solids_percent)
    shown = percent(share, apart_from=TC_EXTRACT_SOLIDS_PERCENT)
    if share >= TC_EXTRACT_SOLIDS_PERCENT:
        return "extraction_test", (f"{shown} % filterable solids (0.5 % or more): the liquid is not itself "
                                   "the toxicity-characteristic extract; the extract of the leaching procedure decides "
                                   "(40 CFR 261.24(a), Method 1311), so no mg/L here compares with a TC limit.")
    return "extract", (f"{shown} % filterable solids (below 0.5 %): the filtered liquid is itself the "
                       "toxicity-characteristic extract (40 CFR 261.24(a)); its mg/L compare with the TC limits.")


def mg_per_l(mass_ug: int, volume_l: float) -> Decimal:
    """Element mass (µg) per litre of liquid as exact mg/L: 5 000 µg in 2 L -> Decimal('2.5')."""
    return Decimal(mass_ug) / 1000 / _dec(volume_l)


def mg_per_kg(mass_ug: int, mass_kg: float) -> Decimal:
    """Element mass (µg) per kilogram of solid as exact mg/kg: 300 µg in 0.5 kg -> Decimal('0.6')."""
    return Decimal(mass_ug) / 1000 / _dec(mass_kg)


@measure("concentration_mg_per_l", scope="waste_container", unit="mg/L", parameter="element")
def concentration_mg_per_l(subject: ContainerSubject, element: Optional[str]) -> Optional[MeasureResult]:
    """Element mass per litre of liquid waste, in mg/L; not applicable to solids or ≥ 0.5 % filterable solids.

    With less than 0.5 % filterable solids the filtered liquid is itself the toxicity
    characteristic extract (40 CFR 261.24(a)); otherwise the extraction test decides
    (:func:`concentration_basis`).
    """
    if concentration_basis(subject)[0] != "extract":
        return None
    mass_ug = subject.element_mass_ug.get(element, 0)
    value = mg_per_l(mass_ug, subject.volume_l)
    detail = f"{_text(Decimal(mass_ug) / 1000)} mg {element} in {_text(_dec(subject.volume_l))} L"
    return MeasureResult(_plain(value), "mg/L", detail)


@measure("filterable_solids_percent", scope="waste_container", unit="percent")
def filterable_solids_percent(subject: ContainerSubject, _arg: None) -> MeasureResult:
    """Filterable solids in percent (a solids container: 100 %); from 0.5 % the TC needs the extraction test."""
    if subject.form == "solid":
        return MeasureResult(100, "percent", "a solid waste")
    share = _dec(subject.filterable_solids_percent)
    return MeasureResult(_plain(share), "percent", f"{percent(share, apart_from=TC_EXTRACT_SOLIDS_PERCENT)} % filterable solids")


@measure("min_flash_point_present_c", scope="waste_container", unit="degC")
def min_flash_point_present_c(subject: ContainerSubject, _arg: None) -> Optional[MeasureResult]:
    """Lowest known flash point among liquid components present beyond a trace (≥ 0.01), in °C.

    A screening value: a mixture's closed-cup flash point is at or above its components'
    lowest in most cases, and a test of the waste decides. Not applicable to solids or when
    no present component has a known flash point. The D001 exclusion of aqueous solutions
    with < 24 % alcohol is not computed; the detail names the water share.
    """
    known = [c for c in _present(subject) if c.flash_point_c is not None] if _liquid(subject) else []
    if not known:
        return None
    low = min(known, key=lambda c: c.flash_point_c)
    flash_c = _dec(low.flash_point_c)
    detail = f"{low.name} flash point {_text(flash_c)} °C"
    water = [c for c in subject.components if is_water(c)]
    if water:
        detail += f"; water {percent(_dec(water[0].volume_fraction) * 100)} % (aqueous exclusion not assessed)"
    return MeasureResult(_plain(flash_c), "degC", detail)


@measure("flammable_components_unknown_flash_point", scope="waste_container", unit="")
def flammable_components_unknown_flash_point(subject: ContainerSubject, _arg: None) -> MeasureResult:
    """Count of flammable liquid components present beyond a trace whose flash point is not known."""
    unknown = [c for c in _present(subject) if "flammable" in c.flags and c.flash_point_c is None]
    unknown = unknown if _liquid(subject) else []
    return MeasureResult(len(unknown), "", ", ".join(c.name for c in unknown))


@measure("listed_solvent_fraction", scope="waste_container", unit="", parameter="substance")
def listed_solvent_fraction(subject: ContainerSubject, key: Optional[str]) -> Optional[MeasureResult]:
    """Volume fraction (0–1) of the catalogue substance <key> in the liquid; not applicable to solids."""
    if not _liquid(subject):
        return None
    return _fraction([c for c in subject.components if c.key == key])


@measure("halogenated_fraction", scope="waste_container", unit="")
def halogenated_fraction(subject: ContainerSubject, _arg: None) -> Optional[MeasureResult]:
    """Summed volume fraction (0–1) of halogenated liquid components; not applicable to solids."""
    if not _liquid(subject):
        return None
    return _fraction([c for c in subject.components if c.halogenated])


@measure("halogen_free_solvent_fraction", scope="waste_container", unit="")
def halogen_free_solvent_fraction(subject: ContainerSubject, _arg: None) -> Optional[MeasureResult]:
    """Summed volume fraction (0–1) of organic (non-water) liquid components when halogenated ones are below 0.01.

    Not applicable to solids, or when halogenated components reach the 0.01 trace cut-off
    (the waste then belongs with the halogenated solvents).
    """
    if not _liquid(subject):
        return None
    if sum((_dec(c.volume_fraction) for c in subject.components if c.halogenated), Decimal(0)) >= TRACE_FRACTION:
        return None
    return _fraction([c for c in subject.components if not c.halogenated and not is_water(c)])


@measure("volume_l", scope="waste_container", unit="L")
def volume_l(subject: ContainerSubject, _arg: None) -> MeasureResult:
    """Liquid volume in the container, in L (0 for a solids container)."""
    return MeasureResult(_plain(_dec(subject.volume_l)), "L", f"{subject.label} ({subject.stream})")


@measure("fill_fraction", scope="waste_container", unit="")
def fill_fraction(subject: ContainerSubject, _arg: None) -> Optional[MeasureResult]:
    """Liquid volume over capacity (0–1); not applicable without a capacity or to a solids container."""
    if subject.form != "liquid" or not subject.capacity_l or subject.capacity_l <= 0:
        return None
    volume, capacity = _dec(subject.volume_l), _dec(subject.capacity_l)
    return MeasureResult(_plain(volume / capacity), "", f"{_text(volume)} L of {_text(capacity)} L")


@measure("mass_kg", scope="waste_container", unit="kg")
def mass_kg(subject: ContainerSubject, _arg: None) -> MeasureResult:
    """Solids mass in the container, in kg."""
    return MeasureResult(_plain(_dec(subject.mass_kg)), "kg", f"{subject.label} ({subject.stream})")


def _days(value: Optional[float], what: str) -> Optional[MeasureResult]:
    if value is None:
        return None
    return MeasureResult(_plain(_dec(value)), "day", f"{_text(_dec(value))} days since {what}")


@measure("days_since_full", scope="waste_container", unit="day")
def days_since_full(subject: ContainerSubject, _arg: None) -> Optional[MeasureResult]:
    """Days since the container was marked full; not applicable while it is not full."""
    return _days(subject.days_since_full, "it was marked full")


@measure("days_since_first_entry", scope="waste_container", unit="day")
def days_since_first_entry(subject: ContainerSubject, _arg: None) -> Optional[MeasureResult]:
    """Days since the first entry into the container; not applicable while it is empty."""
    return _days(subject.days_since_first_entry, "the first entry")


@measure("acute_hazardous", scope="waste_container", unit="")
def acute_hazardous(subject: ContainerSubject, _arg: None) -> MeasureResult:
    """1 if the container holds acute hazardous waste, else 0."""
    return MeasureResult(int(subject.acute_hazardous), "", "acute hazardous waste" if subject.acute_hazardous else "")


@measure("acute_volume_l", scope="waste_container", unit="L")
def acute_volume_l(subject: ContainerSubject, _arg: None) -> Optional[MeasureResult]:
    """Liquid volume of acute hazardous waste, in L; not applicable unless the container holds acute waste."""
    return volume_l(subject, None) if subject.acute_hazardous and subject.form == "liquid" else None


@measure("acute_mass_kg", scope="waste_container", unit="kg")
def acute_mass_kg(subject: ContainerSubject, _arg: None) -> Optional[MeasureResult]:
    """Solids mass of acute hazardous waste, in kg; not applicable unless the container holds acute waste."""
    return mass_kg(subject, None) if subject.acute_hazardous and subject.form == "solid" else None


@measure("container_element_mass", scope="waste_container", unit="ug", parameter="element")
def container_element_mass(subject: ContainerSubject, element: Optional[str]) -> MeasureResult:
    """Mass of the element over all entries of the container, in µg."""
    mass_ug = subject.element_mass_ug.get(element, 0)
    return MeasureResult(mass_ug, "ug", f"{_text(Decimal(mass_ug) / 1000)} mg {element} in {subject.label}")
