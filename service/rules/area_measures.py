"""Accumulation-area measures: the numbers the ``accumulation_area`` rules compare.

An area's limits apply to the sum of its containers that have not been collected (open, full
or pickup requested), not to each container: 40 CFR 262.15(a) lets a generator accumulate "as
much as 55 gallons of non-acute hazardous waste and/or either one quart of liquid acute
hazardous waste … or 1 kg (2.2 lbs) of solid acute hazardous waste" at or near a point of
generation (wording from memory — verify; the values are read in state verbatim adoptions, 2nd).
The quantity measures therefore apply to satellite accumulation areas only; a central
accumulation area has no quantity limit, only time limits (262.16 / 262.17, not computed).

The 55-gallon limit is a volume. A solids container records a mass, not a volume, so its
contents are not counted in the volume sums; :func:`area_totals` names them (``solids_kg``) and
the volume measure's detail says so: the safety officer judges their volume.
"""

from __future__ import annotations

from dataclasses import dataclass
from decimal import ROUND_HALF_EVEN, Decimal
from typing import Optional

from service.rules.registry import MeasureResult, measure
from service.rules.registry import dec as _dec
from service.rules.registry import plain as _plain
from service.rules.registry import text as _text
from service.rules.subjects import AreaSubject

__all__ = ["LITRES_PER_US_GALLON", "AreaTotals", "area_totals", "gallons"]

# NIST Handbook 44 Appendix C: 1 US gallon = 231 in³ = 3.785411784 L exactly.
LITRES_PER_US_GALLON = Decimal("3.785411784")
_SATELLITE = "satellite_accumulation_area"


def gallons(litres: Decimal) -> Decimal:
    """Litres as US gallons, exact to 1e-6 gal (half to even).

    >>> gallons(Decimal("208.19764812"))
    Decimal('55.000000')
    """
    return (litres / LITRES_PER_US_GALLON).quantize(Decimal("0.000001"), rounding=ROUND_HALF_EVEN)


@dataclass(frozen=True)
class AreaTotals:
    """The sums over an area's containers not yet collected, exact (L and kg)."""

    containers: int
    non_acute_liquid_l: Decimal
    non_acute_solid_kg: Decimal
    acute_liquid_l: Decimal
    acute_solid_kg: Decimal
    solid_labels: tuple[str, ...]  # solids containers: not in the volume sums


def area_totals(subject: AreaSubject) -> AreaTotals:
    """Sum the area's containers by form and acute flag.

    >>> from service.rules.subjects import AreaContainer
    >>> t = area_totals(AreaSubject("hood H2", _SATELLITE, (AreaContainer("W1", "liquid", 10.5, 0.0),
    ...     AreaContainer("W2", "liquid", 0.2, 0.0, acute_hazardous=True), AreaContainer("S1", "solid", 0.0, 1.5))))
    >>> t.non_acute_liquid_l, t.acute_liquid_l, t.non_acute_solid_kg, t.solid_labels
    (Decimal('10.5'), Decimal('0.2'), Decimal('1.5'), ('S1',))
    """
    sums = {(form, acute): Decimal(0) for form in ("liquid", "solid") for acute in (False, True)}
    for c in subject.containers:
        sums[(c.form, c.acute_hazardous)] += _dec(c.volume_l if c.form == "liquid" else c.mass_kg)
    solids = tuple(c.label for c in subject.containers if c.form == "solid")
    return AreaTotals(len(subject.containers), sums[("liquid", False)], sums[("solid", False)],
                      sums[("liquid", True)], sums[("solid", True)], solids)


def _satellite(subject: AreaSubject) -> bool:
    return subject.kind == _SATELLITE


def _listing(subject: AreaSubject, form: str, acute: bool, unit: str) -> str:
    parts = [f"{c.label} {_text(_dec(c.volume_l if form == 'liquid' else c.mass_kg))} {unit}"
             for c in subject.containers if c.form == form and c.acute_hazardous is acute]
    return ", ".join(parts) or "no such container"


@measure("satellite_non_acute_volume_l", scope="accumulation_area", unit="L")
def satellite_non_acute_volume_l(subject: AreaSubject, _arg: None) -> Optional[MeasureResult]:
    """Non-acute liquid waste in a satellite area's containers not yet collected, in L; solids not counted."""
    if not _satellite(subject):
        return None
    totals = area_totals(subject)
    detail = (f"{_text(gallons(totals.non_acute_liquid_l))} gal in {subject.label}: "
              f"{_listing(subject, 'liquid', False, 'L')}")
    if totals.solid_labels:
        detail += (f"; solids containers not counted in this volume (mass only recorded): "
                   f"{', '.join(totals.solid_labels)}")
    return MeasureResult(_plain(totals.non_acute_liquid_l), "L", detail)


def _acute(subject: AreaSubject, form: str) -> Optional[MeasureResult]:
    if not _satellite(subject):
        return None
    totals = area_totals(subject)
    value, unit = (totals.acute_liquid_l, "L") if form == "liquid" else (totals.acute_solid_kg, "kg")
    return MeasureResult(_plain(value), unit, f"{subject.label}: {_listing(subject, form, True, unit)}")


@measure("satellite_acute_liquid_l", scope="accumulation_area", unit="L")
def satellite_acute_liquid_l(subject: AreaSubject, _arg: None) -> Optional[MeasureResult]:
    """Liquid acute hazardous waste in a satellite area's containers not yet collected, in L."""
    return _acute(subject, "liquid")


@measure("satellite_acute_solid_kg", scope="accumulation_area", unit="kg")
def satellite_acute_solid_kg(subject: AreaSubject, _arg: None) -> Optional[MeasureResult]:
    """Solid acute hazardous waste in a satellite area's containers not yet collected, in kg."""
    return _acute(subject, "solid")


@measure("days_over_limit", scope="accumulation_area", unit="day")
def days_over_limit(subject: AreaSubject, _arg: None) -> Optional[MeasureResult]:
    """Whole calendar days (UTC) since the area first went over a limit; not applicable while under it."""
    if subject.days_over_limit is None:
        return None
    days = subject.days_over_limit
    return MeasureResult(days, "day", f"{subject.label} over its limit for {days} calendar day(s) after the day it crossed")


@measure("oldest_entry_days", scope="accumulation_area", unit="day")
def oldest_entry_days(subject: AreaSubject, _arg: None) -> Optional[MeasureResult]:
    """Days since the first entry of the area's oldest container not yet collected; not applicable without one."""
    dated = [c for c in subject.containers if c.days_since_first_entry is not None]
    if not _satellite(subject) or not dated:
        return None
    oldest = max(dated, key=lambda c: c.days_since_first_entry)
    days = _dec(oldest.days_since_first_entry)
    return MeasureResult(_plain(days), "day", f"{oldest.label}, first entry {_text(days.quantize(Decimal('0.1')))} days ago")
