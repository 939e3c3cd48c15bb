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
from service import vocab
from service.rules.registry import MeasureNameError, MeasureResult, measure, parameter
from service.rules.registry import dec as _dec
from service.rules.registry import plain as _plain
from service.rules.registry import text as _text
from service.rules.subjects import ContainerComponent, ContainerSubject

_PERCENT_STEP = Decimal("0.1")  # shares in details read to one decimal ("66.7 %")

__all__ = ["TRACE_FRACTION", "TC_EXTRACT_SOLIDS_PERCENT", "AQUEOUS_NON_WATER_LIMIT", "is_water", "concentration_basis",
           "aqueous_alcohol_share", "mg_per_l", "mg_per_kg"]

TRACE_FRACTION = Decimal("0.01")
TC_EXTRACT_SOLIDS_PERCENT = Decimal("0.5")  # 40 CFR 261.24(a), seen: below it the liquid is the extract
# A liquid counts as aqueous for the pH measure unless its recorded non-water components exceed half
# its volume — our reading (DEVELOPERS.md, "Choices made where the design is silent"), not a regulatory value.
AQUEOUS_NON_WATER_LIMIT = Decimal("0.5")
_MG_PER_L_PER_G_PER_ML = Decimal(1_000_000)  # 1 g/mL = 10⁶ mg/L
_KEY = re.compile(r"^[a-z0-9]+(-[a-z0-9]+)*$")
_PERCENT = re.compile(r"^\d{1,3}(\.\d{1,6})?$")


def _check_key(key: str) -> str:
    """Return ``key`` if it has the shape of a catalogue key (lowercase slug); raise otherwise."""
    if _KEY.match(key):
        return key
    raise MeasureNameError(f"{key!r} is not a catalogue key (a lowercase slug such as acetone or ethyl-acetate)")


parameter("substance", "<key>", _check_key)


def _check_stream_element(argument: str) -> str:
    """Return ``argument`` if it reads ``<stream>:<El>`` with a stream of the vocabulary; raise otherwise."""
    stream, sep, element = argument.partition(":")
    if stream not in vocab.STREAMS:
        raise MeasureNameError(f"{stream!r} is not a waste stream (one of {', '.join(vocab.STREAMS)})")
    if not sep:
        raise MeasureNameError(f"give the stream and an element: {stream}:<El>, e.g. {stream}:Cd")
    try:
        vocab.element_symbol(element)
    except vocab.UnknownElementError as exc:
        raise MeasureNameError(str(exc)) from None
    return argument


parameter("stream_element", "<stream>:<El>", _check_stream_element)


def _check_percent(argument: str) -> str:
    """Return ``argument`` if it is a plain number of percent from 0 to 100 ("24", "24.5"); raise otherwise."""
    if _PERCENT.match(argument) and Decimal(argument) <= 100:
        return argument
    raise MeasureNameError(f"{argument!r} is not a percentage from 0 to 100 written as a plain number, e.g. 24")


parameter("percent", "<percent>", _check_percent)


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


def _is_extract(subject: ContainerSubject) -> bool:
    """``concentration_basis(subject)[0] == "extract"`` without writing the reason (measures ask it often)."""
    return (subject.form != "solid" and _liquid(subject)
            and _dec(subject.filterable_solids_percent) < TC_EXTRACT_SOLIDS_PERCENT)


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
    if not _is_extract(subject):
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


def aqueous_alcohol_share(subject: ContainerSubject) -> Optional[Decimal]:
    """The alcohol share (0–1 by volume) of an aqueous alcohol solution, or None if the liquid is not one.

    Our reading of "aqueous solution" in 40 CFR 261.21(a)(1): water is a recorded component, and
    every other component present beyond a trace is an alcohol (catalogue flag ``alcohol``); the
    volume no component accounts for counts as unknown, so it too must stay below a trace.

    >>> water = ContainerComponent("water", "water", 0.9)
    >>> ethanol = ContainerComponent("ethanol", "ethanol", 0.1, 13.0, frozenset({"alcohol", "flammable"}))
    >>> aqueous_alcohol_share(ContainerSubject("W", "aqueous_heavy_metals", "liquid", 1.0, 0.0, 10.0,
    ...                                        components=(water, ethanol)))
    Decimal('0.1')
    """
    if not _liquid(subject) or not any(is_water(c) for c in subject.components):
        return None
    recorded = sum((_dec(c.volume_fraction) for c in subject.components), Decimal(0))
    if 1 - recorded >= TRACE_FRACTION:
        return None
    if any("alcohol" not in c.flags for c in _present(subject) if not is_water(c)):
        return None
    return sum((_dec(c.volume_fraction) for c in subject.components if "alcohol" in c.flags), Decimal(0))


@measure("min_flash_point_outside_aqueous_alcohol_c", scope="waste_container", unit="degC", parameter="percent")
def min_flash_point_outside_aqueous_alcohol_c(subject: ContainerSubject, percent: Optional[str]) -> Optional[MeasureResult]:
    """Lowest known flash point among liquid components present beyond a trace, in °C; not applicable to an aqueous solution with less than <percent> % alcohol by volume.

    The exclusion of 40 CFR 261.21(a)(1) (aqueous solutions with less than 24 % alcohol by
    volume), with the percentage written in the rule; "aqueous solution" as
    :func:`aqueous_alcohol_share` reads it. Otherwise as ``min_flash_point_present_c``.
    """
    share = aqueous_alcohol_share(subject)
    if share is not None and share * 100 < Decimal(percent):
        return None
    lowest = min_flash_point_present_c(subject, None)
    if lowest is None:
        return None
    detail = lowest.detail.split("; water", 1)[0]
    if share is not None:
        detail += (f"; an aqueous solution with {_text((share * 100).quantize(_PERCENT_STEP))} % alcohol by volume, "
                   f"not below {percent} %")
    return MeasureResult(lowest.value, "degC", detail)


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


@measure("component_concentration_mg_per_l", scope="waste_container", unit="mg/L", parameter="substance")
def component_concentration_mg_per_l(subject: ContainerSubject, key: Optional[str]) -> Optional[MeasureResult]:
    """Mass of the catalogue substance <key> per litre of liquid waste (volume × density / liquid volume), in mg/L; not applicable to solids, ≥ 0.5 % filterable solids or an unknown density.

    As ``concentration_mg_per_l``, the liquid is compared only where it is itself the
    toxicity-characteristic extract (:func:`concentration_basis`). No trace cut-off: the
    organic TC levels are a few mg/L, far below a volume fraction of 0.01.
    """
    if not _is_extract(subject):
        return None
    parts = [c for c in subject.components if c.key == key]
    if not parts:
        return MeasureResult(0, "mg/L", f"no {key} recorded")
    if any(c.density_g_per_ml is None for c in parts):
        return None
    litres = _dec(subject.volume_l)
    value = sum((_dec(c.volume_fraction) * _dec(c.density_g_per_ml) for c in parts), Decimal(0)) * _MG_PER_L_PER_G_PER_ML
    detail = "; ".join(f"{c.name} {_text(_dec(c.volume_fraction) * litres * 1000)} mL × "
                       f"{_text(_dec(c.density_g_per_ml))} g/mL in {_text(litres)} L" for c in parts)
    return MeasureResult(_plain(value), "mg/L", detail)


@measure("aqueous_ph", scope="waste_container", unit="")
def aqueous_ph(subject: ContainerSubject, _arg: None) -> Optional[MeasureResult]:
    """pH of an aqueous liquid waste (the one most recently recorded); not applicable to solids, without a recorded pH or when non-water components exceed half the liquid.

    The container's pH is the one recorded last on an entry that is neither a reversal nor
    reversed (the store keeps it). A liquid counts as aqueous unless its recorded non-water
    components make up more than :data:`AQUEOUS_NON_WATER_LIMIT` of its volume.
    """
    if not _liquid(subject) or subject.ph is None:
        return None
    other = sum((_dec(c.volume_fraction) for c in subject.components if not is_water(c)), Decimal(0))
    if other > AQUEOUS_NON_WATER_LIMIT:
        return None
    ph = _dec(subject.ph)
    share = _text((other * 100).quantize(_PERCENT_STEP))
    return MeasureResult(_plain(ph), "", f"pH {_text(ph)} as last recorded; non-water components {share} % by volume")


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


@measure("days_since_full", scope="waste_container", unit="day", clock=True)
def days_since_full(subject: ContainerSubject, _arg: None) -> Optional[MeasureResult]:
    """Days since the container was marked full; not applicable while it is not full."""
    return _days(subject.days_since_full, "it was marked full")


@measure("days_since_first_entry", scope="waste_container", unit="day", clock=True)
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


@measure("stream_element_mass", scope="waste_container", unit="ug", parameter="stream_element")
def stream_element_mass(subject: ContainerSubject, argument: Optional[str]) -> Optional[MeasureResult]:
    """Mass of the element over all entries of a container of stream <stream>, in µg; not applicable to other streams."""
    stream, element = argument.split(":", 1)
    return container_element_mass(subject, element) if subject.stream == stream else None


@measure("element_mass_outside_stream", scope="waste_container", unit="ug", parameter="stream_element")
def element_mass_outside_stream(subject: ContainerSubject, argument: Optional[str]) -> Optional[MeasureResult]:
    """Mass of the element over all entries of a container of any stream but <stream>, in µg; not applicable to <stream>."""
    stream, element = argument.split(":", 1)
    return container_element_mass(subject, element) if subject.stream != stream else None
