"""The procedure measures, and the public face of the measure registry.

The registry itself (:class:`MeasureResult`, :func:`measure`, :func:`resolve_measure`,
:func:`vocabulary`) is :mod:`service.rules.registry`; the waste-container measures are
in :mod:`service.rules.container_measures`. Adding a measure is one decorator line above
its function: ``@measure("volume_l", scope="waste_container", unit="L")``; the scope check
and the vocabulary follow from it. The first docstring line of each function is its
description.
"""

from __future__ import annotations

from decimal import Decimal
from typing import Iterable, Optional

from service.rules.registry import (
    MEASURES,
    Measure,
    MeasureNameError,
    MeasureResult,
    measure,
    resolve_measure,
    vocabulary,
)
from service.rules.registry import dec as _dec
from service.rules.registry import plain as _plain
from service.rules.registry import text as _text
from service.rules.subjects import INERT_ATMOSPHERES, ProcedureSubject, ReagentFacts, StepFacts

__all__ = ["MeasureResult", "Measure", "MeasureNameError", "MEASURES", "measure", "resolve_measure", "vocabulary"]


LIQUID_STATES = frozenset({"liquid", "solution"})
TOXIC_METALS = ("Cd", "Pb", "Se", "Te", "Hg", "Tl", "As")


# ---------------------------------------------------------------- helpers ----


def _step_label(step: StepFacts) -> str:
    return f"step {step.position + 1} ({step.operation})"  # positions are 0-based; people count from 1


def _names(reagents: Iterable[ReagentFacts]) -> str:
    return ", ".join(r.name for r in reagents)


def _count(reagents: list[ReagentFacts]) -> MeasureResult:
    return MeasureResult(len(reagents), "", _names(reagents))


# ------------------------------------------------------ procedure measures ----


@measure("element_mass", scope="procedure", unit="ug", parameter="element")
def element_mass(subject: ProcedureSubject, element: Optional[str]) -> MeasureResult:
    """Total mass of the element over all reagent draws of one batch, in µg; detail: top contributors."""
    parts = [(r.element_mass_ug.get(element, 0), r.name) for r in subject.reagents]
    parts = sorted((p for p in parts if p[0] > 0), key=lambda p: (-p[0], p[1]))
    shown = [f"{name} {_text(Decimal(mass_ug) / 1000)} mg" for mass_ug, name in parts[:3]]
    if len(parts) > 3:
        shown.append(f"{len(parts) - 3} more")
    return MeasureResult(sum(p[0] for p in parts), "ug", ", ".join(shown))


def in_vessel(reagent: ReagentFacts, step: StepFacts) -> bool:
    """Whether ``reagent`` is in the vessel at ``step``: added at that step or before, or from the start (no step)."""
    return reagent.step is None or reagent.step <= step.position


@measure("max_temperature_minus_flash_point", scope="procedure", unit="delta_degC")
def max_temperature_minus_flash_point(subject: ProcedureSubject, _arg: None) -> Optional[MeasureResult]:
    """Largest margin of a step's temperature over the lowest known flash point of the liquids in the vessel at that step.

    Judged per step with a temperature, over the liquids and solutions drawn at that step or
    before (a draw without a step is in the vessel from the start); a solvent added after the
    last heated step (precipitation, washing, redispersion) does not count. Not applicable when
    no step with a temperature has a liquid of known flash point in the vessel.
    """
    best: Optional[tuple[Decimal, StepFacts, ReagentFacts]] = None
    for step in subject.steps:
        if step.temperature_c is None:
            continue
        liquids = [r for r in subject.reagents
                   if r.state in LIQUID_STATES and r.flash_point_c is not None and in_vessel(r, step)]
        if not liquids:
            continue
        liquid = min(liquids, key=lambda r: r.flash_point_c)
        margin = _dec(step.temperature_c) - _dec(liquid.flash_point_c)
        if best is None or margin > best[0]:
            best = (margin, step, liquid)
    if best is None:
        return None
    margin, step, liquid = best
    detail = (f"{_step_label(step)} at {_text(_dec(step.temperature_c))} °C; {liquid.name} flash point "
              f"{_text(_dec(liquid.flash_point_c))} °C")
    return MeasureResult(_plain(margin), "delta_degC", detail)


@measure("flammable_liquids_with_unknown_flash_point", scope="procedure", unit="")
def flammable_liquids_with_unknown_flash_point(subject: ProcedureSubject, _arg: None) -> MeasureResult:
    """Count of flammable liquids or solutions whose flash point is not known (never taken as safe)."""
    return _count([r for r in subject.reagents if r.flammable and r.state in LIQUID_STATES and r.flash_point_c is None])


@measure("air_sensitive_without_inert_step", scope="procedure", unit="")
def air_sensitive_without_inert_step(subject: ProcedureSubject, _arg: None) -> MeasureResult:
    """Count of air-sensitive or pyrophoric reagents when no step runs under an inert atmosphere (else 0)."""
    inert = any((s.atmosphere or "").strip().lower() in INERT_ATMOSPHERES for s in subject.steps)
    sensitive = [r for r in subject.reagents if r.flags & {"air_sensitive", "pyrophoric"}]
    return _count([] if inert else sensitive)


@measure("carcinogen_1a_1b_count", scope="procedure", unit="")
def carcinogen_1a_1b_count(subject: ProcedureSubject, _arg: None) -> MeasureResult:
    """Count of reagents classified as carcinogens of CLP category 1A or 1B; detail names them."""
    return _count([r for r in subject.reagents if (r.carcinogen_category or "").strip().upper() in {"1A", "1B"}])


@measure("chalcogen_with_acid", scope="procedure", unit="")
def chalcogen_with_acid(subject: ProcedureSubject, _arg: None) -> MeasureResult:
    """1 if a reagent contains Se or Te and a reagent is an acid (H2Se / H2Te risk), else 0."""
    chalcogens = [r for r in subject.reagents if any(r.element_mass_ug.get(el, 0) > 0 for el in ("Se", "Te"))]
    acids = [r for r in subject.reagents if "acid" in r.flags]
    if chalcogens and acids:
        return MeasureResult(1, "", f"{_names(chalcogens)} with acid {_names(acids)}")
    return MeasureResult(0, "", "")


@measure("toxic_metal_powders", scope="procedure", unit="")
def toxic_metal_powders(subject: ProcedureSubject, _arg: None) -> MeasureResult:
    """Count of acutely toxic solids containing Cd, Pb, Se, Te, Hg, Tl or As; detail names them."""
    return _count(
        [
            r
            for r in subject.reagents
            if r.state == "solid"
            and "acutely_toxic" in r.flags
            and any(r.element_mass_ug.get(el, 0) > 0 for el in TOXIC_METALS)
        ]
    )


@measure("scale_factor_over_last_approved", scope="procedure", unit="")
def scale_factor_over_last_approved(subject: ProcedureSubject, _arg: None) -> Optional[MeasureResult]:
    """Scale of this batch divided by the last approved scale; not applicable if never approved."""
    if subject.last_approved_scale is None or subject.last_approved_scale <= 0:
        return None
    factor = _dec(subject.scale) / _dec(subject.last_approved_scale)
    detail = f"scale {_text(_dec(subject.scale))}, last approved {_text(_dec(subject.last_approved_scale))}"
    return MeasureResult(_plain(factor), "", detail)


@measure("max_injection_temperature", scope="procedure", unit="degC")
def max_injection_temperature(subject: ProcedureSubject, _arg: None) -> Optional[MeasureResult]:
    """Highest temperature of an inject step, in °C; not applicable without an inject step at a known temperature."""
    injections = [s for s in subject.steps if s.operation.strip().lower() == "inject" and s.temperature_c is not None]
    if not injections:
        return None
    step = max(injections, key=lambda s: s.temperature_c)
    step_c = _dec(step.temperature_c)
    return MeasureResult(_plain(step_c), "degC", f"{_step_label(step)} at {_text(step_c)} °C")
