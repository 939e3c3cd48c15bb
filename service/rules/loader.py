"""Loading rule packs: YAML structure via pydantic, then the checks that need the registry.

Every error is a :class:`~service.datafiles.DataFileError` naming the file and, for a bad
rule, its index, id and field (``rules[2 site.cd-review].threshold``). Thresholds are
converted once, at load, to the measure's unit with exact decimal arithmetic.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field, replace
from decimal import Context, Decimal
from functools import lru_cache
from pathlib import Path
from typing import Optional

import pint

from service.chem.figures import unit_text
from service.chem.units import QuantityError, kind_of, parse_quantity, unit_registry
from service.datafiles import DataFileError, load_data_file
from service.rules.measures import Measure, MeasureNameError, resolve_measure
from service.rules.model import SCOPES, Rule, RulePack, WasteCounting

__all__ = ["ActiveRule", "LayeredRules", "load_pack", "load_packs", "parse_threshold", "convert_exact", "unit_symbol",
           "density_g_per_ml", "is_concentration"]

_PACK_NAME = re.compile(r"^[a-z0-9]+(-[a-z0-9]+)*$")
# Temperature differences: parse_quantity reads plain unit words only, so each spelling is
# read as the equal-sized plain unit (1 delta_degC = 1 K, 1 delta_degF = 1 degR).
_DELTA_SPELLINGS = (
    (re.compile(r"\s*(delta_degC|delta_celsius|delta_degree_Celsius|Δ°C|ΔdegC)$"), " K", "delta_degC"),
    (re.compile(r"\s*(delta_degF|delta_fahrenheit|delta_degree_Fahrenheit|Δ°F|ΔdegF)$"), " degR", "delta_degF"),
)
_KIND_WORDS = {"dimensionless": "a plain number without a unit"}
_DIGITS = Context(prec=20)  # round away the tails of repeating fractions (°F), keep typed digits


@lru_cache(maxsize=1)
def _exact() -> pint.UnitRegistry:
    """A pint registry with Decimal magnitudes, for exact unit conversion."""
    return unit_registry(Decimal)


@lru_cache(maxsize=1024)
def _exact_factor(from_unit: str, to_unit: str) -> Optional[Decimal]:
    """The Decimal factor pint converts ``from_unit`` to ``to_unit`` by, worked out once per pair;
    None when either unit has an offset zero (°C, °F) and they differ, which converts through pint each time."""
    source, target = (_exact().Quantity(Decimal(1), unit or "dimensionless") for unit in (from_unit, to_unit))
    if source.units == target.units:  # two spellings of one unit ("degC", "degree_Celsius")
        return Decimal(1)
    if not (source._is_multiplicative and target._is_multiplicative):
        return None
    return source.to(target.units).magnitude


def convert_exact(value: Decimal, from_unit: str, to_unit: str) -> Decimal:
    """Convert ``value`` between pint units in Decimal arithmetic ("" means dimensionless).

    >>> convert_exact(Decimal("1.1"), "mg", "ug")
    Decimal('1100')
    """
    factor = _exact_factor(from_unit, to_unit)
    if factor is None:
        quantity = _exact().Quantity(value, from_unit or "dimensionless")
        converted = _DIGITS.plus(quantity.to(to_unit or "dimensionless").magnitude)
    else:
        converted = _DIGITS.plus(value * factor)
    return Decimal(int(converted)) if converted == converted.to_integral_value() else converted.normalize()


@lru_cache(maxsize=256)
def unit_symbol(unit: str) -> str:
    """A short symbol for a pint unit, in the one spelling of :func:`service.chem.figures.unit_text`:
    "ug" -> "µg", "mg/l" -> "mg/L"; a temperature difference reads as °C / °F.

    >>> unit_symbol("delta_degC"), unit_symbol("milligram"), unit_symbol("milligram/liter"), unit_symbol("")
    ('°C', 'mg', 'mg/L', '')
    """
    if not unit or unit == "dimensionless":
        return ""
    return unit_text(f"{_exact().Unit(unit):~P}".replace("Δ", ""))


@lru_cache(maxsize=256)
def is_concentration(unit: str) -> bool:
    """True for a mass per volume (mg/L, µg/mL): shown to 3 significant figures.

    >>> is_concentration("mg/L"), is_concentration("mg"), is_concentration("")
    (True, False, False)
    """
    return bool(unit) and _exact().Unit(unit).dimensionality == _exact().Unit("mg/L").dimensionality


def _has_offset(unit: str) -> bool:
    """True for an absolute temperature unit with an offset zero (degC, degF)."""
    return convert_exact(Decimal(0), unit, "kelvin") != 0 if _is_temperature(unit) else False


@lru_cache(maxsize=256)
def _is_temperature(unit: str) -> bool:
    return bool(unit) and _exact().Unit(unit).dimensionality == _exact().kelvin.dimensionality


def parse_threshold(text: str, unit: str) -> tuple[Decimal, str]:
    """Parse a threshold text and convert it exactly to the measure ``unit``.

    A leading minus is allowed only for temperature differences (``"-10 delta_degC"``).

    :returns: (value in ``unit``, the unit to show values in: the threshold's own)
    :raises QuantityError: unparsable text, unknown unit, or a dimension that does not fit
    """
    raw = text.strip()
    negative = raw.startswith("-")
    body = raw[1:].lstrip() if negative else raw
    if negative and not unit.startswith("delta_"):
        raise QuantityError(raw, "must not be negative")
    shown: Optional[str] = None
    for spelling, plain, delta_unit in _DELTA_SPELLINGS:
        if spelling.search(body):
            if _has_offset(unit):
                raise QuantityError(raw, "this measure is a temperature (degC or K), not a temperature difference")
            body, shown = spelling.sub(plain, body), delta_unit
    quantity = parse_quantity(body)
    magnitude = Decimal(repr(quantity.magnitude)) * (-1 if negative else 1)
    from_unit = "" if str(quantity.units) == "dimensionless" else str(quantity.units)
    if unit.startswith("delta_") and _has_offset(from_unit):
        raise QuantityError(raw, "this measure is a temperature difference: write delta_degC or K, not degC")
    try:
        value = convert_exact(magnitude, from_unit, unit)
    except pint.DimensionalityError:
        want = f"a {kind_of(_exact().Quantity(1, unit))} in {unit}" if unit else "a plain number"
        got = _KIND_WORDS.get(kind_of(quantity), f"a {kind_of(quantity) or 'quantity of another kind'}")
        raise QuantityError(raw, f"the measure is {want}; this threshold is {got}") from None
    return value, shown or from_unit


@dataclass(frozen=True)
class ActiveRule:
    """A loaded rule with its pack, resolved measure and threshold in the measure's unit."""

    rule: Rule
    pack: str
    pack_version: str
    disclaimer: str
    definition: Measure  # the registry entry of ``rule.measure``
    argument: Optional[str]  # its ":<argument>", e.g. "Cd"
    threshold_value: Decimal  # exact, in the measure's unit
    threshold_unit: str  # the unit the threshold was written in, for showing values
    overrides: Optional[str] = None  # the pack whose rule of the same id this one replaced

    @property
    def id(self) -> str:
        return self.rule.id

    @property
    def scope(self) -> str:
        return self.rule.scope

    @property
    def measure(self) -> str:
        """The measure name as written in the pack (``element_mass:Cd``)."""
        return self.rule.measure

    @property
    def level(self) -> str:
        return self.rule.level


@dataclass(frozen=True)
class LayeredRules:
    """The active rules after layering packs in order; ``packs`` lists (name, version).

    ``opt_ins`` are the regimes any active pack opted in to; a rule that needs an opt-in no one
    made, or is replaced by one that was made, is not among ``rules``. ``waste_counting`` is the
    last active pack's (or None), ``assumed_density_g_per_ml`` its density in g/mL, exact.
    """

    packs: tuple[tuple[str, str], ...]
    rules: tuple[ActiveRule, ...]
    opt_ins: tuple[str, ...] = ()
    waste_counting: Optional[WasteCounting] = None
    assumed_density_g_per_ml: Optional[Decimal] = None
    # the rules of each scope, sorted once (every read of a record evaluates one scope's rules)
    _by_scope: dict = field(default_factory=dict, init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        object.__setattr__(self, "_by_scope", {scope: tuple(a for a in self.rules if a.scope == scope)
                                               for scope in SCOPES})

    def marked(self, scope: str) -> dict[str, str]:
        """Rule id -> mark of the active rules of ``scope`` that mark something (``marks:``)."""
        return {active.id: active.rule.marks for active in self.rules_for(scope) if active.rule.marks}

    def rules_for(self, scope: str) -> tuple[ActiveRule, ...]:
        """The active rules of one scope, in pack order; raises ValueError for an unknown scope."""
        if scope not in SCOPES:
            raise ValueError(f"unknown scope {scope!r}; scopes are {', '.join(SCOPES)}")
        return self._by_scope[scope]


def _compile_rule(rule: Rule, pack: RulePack) -> tuple[Optional[ActiveRule], list[tuple[str, str]]]:
    """Resolve one rule's measure and threshold; returns the rule or its problems as (field, why)."""
    try:
        found, argument = resolve_measure(rule.measure)
    except MeasureNameError as exc:
        return None, [("measure", str(exc))]
    if found.scope != rule.scope:
        why = f"measure {found.name!r} is a {found.scope} measure; it cannot be used in a {rule.scope} rule"
        return None, [("scope", why)]
    try:
        value, shown = parse_threshold(rule.threshold, found.unit)
    except QuantityError as exc:
        return None, [("threshold", str(exc))]
    active = ActiveRule(rule, pack.pack, pack.version, pack.disclaimer, found, argument, value, shown)
    return active, []


def density_g_per_ml(text: str) -> Decimal:
    """A density text ("1 g/mL", "1000 kg/m^3") in g/mL, exact; raises QuantityError otherwise.

    >>> density_g_per_ml("1000 kg/m^3")
    Decimal('1')
    """
    value, _unit = parse_threshold(text, "g/mL")
    if value <= 0:
        raise QuantityError(text, "a density must be above zero")
    return value


def _load(path: Path) -> tuple[RulePack, list[ActiveRule]]:
    """Validate the file at ``path`` and compile its rules, collecting every problem."""
    pack = load_data_file(path, RulePack)
    problems: list[tuple[str, str]] = []
    if pack.waste_counting is not None:
        try:
            density_g_per_ml(pack.waste_counting.assumed_density)
        except QuantityError as exc:
            problems.append(("waste_counting.assumed_density", str(exc)))
    compiled: list[ActiveRule] = []
    first_index: dict[str, int] = {}
    for index, rule in enumerate(pack.rules):
        where = f"rules[{index} {rule.id}]"
        if rule.id in first_index:
            problems.append((f"{where}.id", f"duplicate rule id (first used at rules[{first_index[rule.id]}])"))
            continue
        first_index[rule.id] = index
        active, rule_problems = _compile_rule(rule, pack)
        problems.extend((f"{where}.{field}", why) for field, why in rule_problems)
        if active is not None:
            compiled.append(active)
    if problems:
        raise DataFileError(path, problems)
    return pack, compiled


def load_pack(path: Path | str) -> RulePack:
    """Load and check one rule pack file.

    :raises DataFileError: naming the file and, for a bad rule, its id and field
    """
    return _load(Path(path))[0]


def load_packs(rules_dir: Path | str, names: list[str]) -> LayeredRules:
    """Load ``<rules_dir>/<name>.yaml`` for each name in order; later rules replace earlier ones by id.

    :raises DataFileError: a bad pack, a bad or repeated name, or a ``pack:`` that differs from the file name
    """
    by_id: dict[str, ActiveRule] = {}
    packs: list[tuple[str, str]] = []
    opt_ins: list[str] = []
    counting: Optional[WasteCounting] = None
    for name in names:
        path = Path(rules_dir) / f"{name}.yaml"
        if not _PACK_NAME.match(name):
            raise DataFileError(path, [("", f"pack name {name!r} must be a lowercase slug")])
        if any(name == seen for seen, _ in packs):
            raise DataFileError(path, [("", f"pack {name!r} is listed twice in the active packs")])
        pack, compiled = _load(path)
        if pack.pack != name:
            raise DataFileError(path, [("pack", f"names pack {pack.pack!r}, but the file is {name}.yaml")])
        packs.append((pack.pack, pack.version))
        opt_ins.extend(o for o in pack.opt_ins if o not in opt_ins)
        counting = pack.waste_counting or counting
        for active in compiled:
            earlier = by_id.get(active.rule.id)
            by_id[active.rule.id] = replace(active, overrides=earlier.pack) if earlier else active
    active_rules = tuple(active for active in by_id.values()
                         if (active.rule.opt_in is None or active.rule.opt_in in opt_ins)
                         and active.rule.replaced_by_opt_in not in opt_ins)
    density = density_g_per_ml(counting.assumed_density) if counting is not None else None
    return LayeredRules(tuple(packs), active_rules, tuple(opt_ins), counting, density)
