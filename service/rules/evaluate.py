"""Evaluating layered rules against a subject: which rules fire, and the findings they give.

Each measure is computed once per call; a measure that does not apply (``None``) skips
its rules. Values and thresholds are compared as exact decimals in the measure's unit.
For a subject that names its ``CLOCK_FIELDS`` (a waste container's days since its first entry),
the findings of the rules whose measures do not read the clock are kept per process for equal
facts (an LRU of 4096 subjects), computed on the subject with those fields blanked, so that the
same container read again costs only its clock rules; a changed record is a new key.
Every finding carries its pack's disclaimer: findings are suggestions, and local
regulations and the site safety officer decide.
"""

from __future__ import annotations

import operator
import threading
from collections import OrderedDict
from collections.abc import Mapping
from dataclasses import dataclass, fields, replace
from functools import lru_cache
from decimal import ROUND_HALF_EVEN, Decimal
from typing import Iterable, Optional

from service.chem.figures import percent, significant
from service.rules.loader import ActiveRule, LayeredRules, convert_exact, is_concentration, unit_symbol
from service.rules.measures import MeasureResult
from service.rules.model import LEVELS, SuggestedCode

__all__ = ["Finding", "evaluate", "highest_level", "SEVERITY"]

SEVERITY = {level: rank for rank, level in enumerate(LEVELS)}  # note 0 … block 3
_COMPARE = {
    ">": operator.gt,
    ">=": operator.ge,
    "<": operator.lt,
    "<=": operator.le,
    "==": operator.eq,
    "!=": operator.ne,
}
_SHOWN_PLACES = Decimal("0.000001")  # other values in messages: at most six decimals
_PERCENT_UNITS = frozenset({"percent", "%"})


@dataclass(frozen=True)
class Finding:
    """A rule that fired: what was measured, against which threshold, and what to do."""

    rule_id: str
    pack: str
    pack_version: str
    level: str
    measure: str
    value: float  # in ``unit``; int for counts and µg
    unit: str  # the measure's pint unit, "" for dimensionless
    comparator: str
    threshold_text: str
    threshold_value: Decimal  # exact, in ``unit``
    value_text: str  # the value in the unit the threshold was written in, e.g. "93 %", "151 °C"
    threshold_shown: str  # the threshold with the same unit symbol, e.g. "90 %", "0 °C", "100 mg"
    message: str
    source: str
    suggested_code: Optional[SuggestedCode]
    detail: str
    disclaimer: str


def _exact(value: float | int | Decimal) -> Decimal:
    """A measured value as an exact Decimal (floats via their shortest repr)."""
    if isinstance(value, Decimal):
        return value
    return Decimal(value) if isinstance(value, int) else Decimal(repr(float(value)))


def _in_threshold_unit(value: Decimal, active: ActiveRule, places: Decimal) -> str:
    """``value`` (in the measure's unit) converted to the threshold's unit, with its symbol."""
    converted = convert_exact(value, active.definition.unit, active.threshold_unit)
    if converted != converted.to_integral_value():
        converted = converted.quantize(places, rounding=ROUND_HALF_EVEN)
    return _with_symbol(f"{converted.normalize():f}", active)


def _with_symbol(number: str, active: ActiveRule) -> str:
    symbol = unit_symbol(active.threshold_unit)
    return f"{number} {symbol}" if symbol else number


def _shown(value: Decimal, active: ActiveRule) -> str:
    """A measured value in the unit the threshold was written in (service.chem.figures): a concentration
    to 3 significant figures ("0.999 mg/L"), a percentage to one decimal ("66.7 %"), others exact to six
    decimals ("512.3 mg"). A value that differs from its threshold never reads as the threshold (0.99951
    would read "1.00 mg/L >= 1.0 mg/L"): it gets the figures that tell them apart ("0.9995 mg/L")."""
    unit = active.threshold_unit
    converted = convert_exact(value, active.definition.unit, unit)
    limit = convert_exact(active.threshold_value, active.definition.unit, unit)
    if is_concentration(unit):
        return _with_symbol(significant(converted, apart_from=limit), active)
    if unit in _PERCENT_UNITS:
        return _with_symbol(percent(converted, apart_from=limit), active)
    return _in_threshold_unit(value, active, _SHOWN_PLACES)


def _threshold_shown(active: ActiveRule) -> str:
    """The threshold as written, its unit as a symbol ("0 delta_degC" reads "0 °C"); never rounded to a coarser step."""
    return _threshold_text(active.threshold_value, active.definition.unit, active.threshold_unit)


@lru_cache(maxsize=4096)
def _threshold_text(value: Decimal, unit: str, shown_unit: str) -> str:
    """``_threshold_shown`` by what decides it (a rule's threshold is shown on every finding of every read)."""
    converted = convert_exact(value, unit, shown_unit)
    if converted != converted.to_integral_value():
        converted = converted.quantize(_SHOWN_PLACES, rounding=ROUND_HALF_EVEN)
    symbol = unit_symbol(shown_unit)
    number = f"{converted.normalize():f}"
    return f"{number} {symbol}" if symbol else number


def _finding(active: ActiveRule, result: MeasureResult, value: Decimal) -> Finding:
    rule = active.rule
    value_text, threshold_shown = _shown(value, active), _threshold_shown(active)
    message = rule.message.format(value=value_text, threshold=threshold_shown, detail=result.detail)
    return Finding(
        rule_id=rule.id,
        pack=active.pack,
        pack_version=active.pack_version,
        level=rule.level,
        measure=rule.measure,
        value=result.value,
        unit=result.unit,
        comparator=rule.comparator,
        threshold_text=rule.threshold,
        threshold_value=active.threshold_value,
        value_text=value_text,
        threshold_shown=threshold_shown,
        message=message,
        source=rule.source,
        suggested_code=rule.suggested_code,
        detail=result.detail,
        disclaimer=active.disclaimer,
    )


def evaluate(rules: LayeredRules, scope: str, subject: object, *, keep: bool = True) -> list[Finding]:
    """Evaluate the active rules of ``scope`` against ``subject``.

    :param rules: the layered rule packs (:func:`service.rules.loader.load_packs`)
    :param scope: procedure, run, waste_container or inventory
    :param subject: the facts the scope's measures read, e.g. a ProcedureSubject
    :param keep: use and keep the findings of the rules that do not read the clock (see the module);
        False evaluates every rule on ``subject`` as given
    :returns: the findings, most severe level first, then by rule id
    :raises ValueError: an unknown scope, or a measure answering in the wrong unit
    """
    active = rules.rules_for(scope)
    clock_fields = getattr(type(subject), "CLOCK_FIELDS", None)
    if clock_fields is None or not keep:
        findings = _fired(active, subject)
    else:
        findings = list(_standing(rules, scope, active, subject, clock_fields))
        findings += _fired([a for a in active if a.definition.clock], subject)
    return sorted(findings, key=lambda f: (-SEVERITY[f.level], f.rule_id))


def _fired(active_rules: Iterable[ActiveRule], subject: object) -> list[Finding]:
    """The findings of the rules that fire on ``subject``, in rule order."""
    results: dict[str, Optional[MeasureResult]] = {}
    findings = []
    for active in active_rules:
        name = active.rule.measure
        if name not in results:
            results[name] = active.definition.compute(subject, active.argument)
        result = results[name]
        if result is None:
            continue
        if result.unit != active.definition.unit:
            raise ValueError(f"measure {name!r} answered in {result.unit!r}, not {active.definition.unit!r}")
        value = _exact(result.value)
        if _COMPARE[active.rule.comparator](value, active.threshold_value):
            findings.append(_finding(active, result, value))
    return findings


_KEPT: OrderedDict = OrderedDict()  # (id(rules), scope, facts) -> (rules, findings)
_KEPT_SIZE = 4096
_KEPT_LOCK = threading.Lock()


def _standing(rules: LayeredRules, scope: str, active: tuple[ActiveRule, ...], subject: object,
              clock_fields: tuple[str, ...]) -> tuple[Finding, ...]:
    """The findings of the rules that do not read the clock, for the subject without its clock fields, kept."""
    key = (id(rules), scope, _facts(subject, clock_fields))
    with _KEPT_LOCK:
        kept = _KEPT.get(key)
        if kept is not None and kept[0] is rules:  # the same rules object, not one that took a freed id
            _KEPT.move_to_end(key)
            return kept[1]
    blanked = replace(subject, **{name: None for name in clock_fields})
    findings = tuple(_fired([a for a in active if not a.definition.clock], blanked))
    with _KEPT_LOCK:
        _KEPT[key] = (rules, findings)
        while len(_KEPT) > _KEPT_SIZE:
            _KEPT.popitem(last=False)
    return findings


def _facts(subject: object, blank: tuple[str, ...]) -> tuple:
    """A key for a subject's facts but the ``blank`` fields: its type and field values, a mapping as its sorted
    pairs (the other field values of the subjects that name clock fields are hashable: numbers, text, frozen tuples)."""
    return (type(subject), *(None if name in blank else
                             tuple(sorted(value.items())) if isinstance(value := getattr(subject, name), Mapping)
                             else value for name in _field_names(type(subject))))


@lru_cache(maxsize=None)
def _field_names(kind: type) -> tuple[str, ...]:
    return tuple(f.name for f in fields(kind))


def highest_level(findings: Iterable[Finding]) -> Optional[str]:
    """The most severe level among ``findings`` (block > review > caution > note), or None."""
    levels = [f.level for f in findings]
    return max(levels, key=SEVERITY.__getitem__) if levels else None
