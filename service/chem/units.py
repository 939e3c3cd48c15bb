"""Quantities with units, parsed with pint.

Amounts arrive as text (``"250 mg"``, ``"5 mL"``, ``"0.2 mol/L"``, ``"0.2 M"``); this
module turns them into pint quantities and converts between mass, volume and amount of
substance. A volume becomes a mass only with a density, and a missing one is an error
that names the substance.
"""

from __future__ import annotations

import functools
import math
import re
from decimal import Decimal
from typing import Optional

import pint

__all__ = [
    "QuantityError",
    "MissingDensityError",
    "ureg",
    "unit_registry",
    "parse_quantity",
    "whole_micro",
    "check_amount",
    "kind_of",
    "mass_g",
    "to_decimal",
    "MAX_AMOUNT_CHARS",
    "MAX_MASS",
    "MAX_VOLUME",
    "MAX_MOLARITY",
    "MAX_MASS_CONCENTRATION",
    "INT64_MAX",
    "LIMITS",
    "check_bounds",
    "parse_amount",
    "exact_micro",
    "micro_text",
]

# Longer text is refused before any parsing: pint's preprocessing grows with the square of the length.
MAX_AMOUNT_CHARS = 40

# A number, then a unit made of letters, "/", "*", "^", digits and spaces: no arithmetic.
_AMOUNT = re.compile(r"^[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?(\s*[A-Za-z°%][A-Za-z0-9°%/*^ ]*)?$")



def unit_registry(non_int_type: type = float) -> pint.UnitRegistry:
    """A pint registry of the default unit definitions (offset units converted to base units when multiplied).

    Parsing pint's definition file is most of the cost of a registry (about 0.2 s); pint keeps the
    parsed definitions in its cache folder (``pint`` in the user's cache directory, keyed by the file's
    content and the magnitude type) and reads them from there on the next start. Where that folder
    cannot be made or written, or a cached file cannot be read (two processes writing it at once), the
    registry parses the definition file as it would without a cache. pint keeps them as pickles, which
    run code when read: the folder must be writable by the service's own account alone, as a user's cache
    directory is (a shared or world-writable ``XDG_CACHE_HOME`` would let another account run code in it).
    ``non_int_type`` is the type of non-integer magnitudes: float here (:data:`ureg`), Decimal for
    the exact threshold conversions of ``service.rules.loader``.
    """
    options = {"non_int_type": non_int_type, "autoconvert_offset_to_baseunit": True}
    try:
        return pint.UnitRegistry(cache_folder=":auto:", **options)
    except Exception:  # noqa: BLE001 - any failure of the cache only costs the parse it would have saved
        return pint.UnitRegistry(**options)


ureg = unit_registry()
Quantity = ureg.Quantity

_KINDS = {
    "mass": ureg.gram.dimensionality,
    "volume": ureg.liter.dimensionality,
    "amount": ureg.mole.dimensionality,
    "molarity": (ureg.mole / ureg.liter).dimensionality,
    "density": (ureg.gram / ureg.milliliter).dimensionality,
    "temperature": ureg.kelvin.dimensionality,
    "time": ureg.second.dimensionality,
    "dimensionless": ureg.dimensionless.dimensionality,
}


class QuantityError(ValueError):
    """An amount that cannot be used: carries the text and, if known, the field."""

    def __init__(self, text: str, reason: str, field: Optional[str] = None) -> None:
        self.text = text
        self.reason = reason
        self.field = field
        where = f"{field}: " if field else ""
        super().__init__(f"{where}{reason} ({text!r})" if text else f"{where}{reason}")


class MissingDensityError(QuantityError):
    """A volume was given where a mass is needed and no density is known."""

    def __init__(self, text: str, substance: str, field: Optional[str] = None) -> None:
        super().__init__(
            text,
            f"{substance!r} is given as a volume but has no density; "
            "give the amount as a mass or enter a density (g/mL)",
            field,
        )
        self.substance = substance


def parse_quantity(text: str, *, expect: str | tuple[str, ...] | None = None, field: Optional[str] = None):
    """Parse ``text`` into a pint quantity, optionally checking its kind.

    ``expect`` is one kind or a tuple of kinds among: mass, volume, amount, molarity,
    density, temperature, time, dimensionless. A bare number without a unit is refused
    unless ``dimensionless`` is expected.

    >>> parse_quantity("250 mg", expect="mass").to("g").magnitude
    0.25
    """
    if isinstance(text, str) and len(text) > MAX_AMOUNT_CHARS:
        raise QuantityError(text[:20] + "…", f"an amount is at most {MAX_AMOUNT_CHARS} characters", field)
    raw = (text or "").strip() if isinstance(text, str) else ""
    if not raw:
        raise QuantityError(str(text or ""), "an amount with a unit is required, e.g. '250 mg' or '5 mL'", field)
    normalised = raw.replace("µ", "u").replace("μ", "u").replace("°C", "degC").replace("℃", "degC")
    if "," in raw:
        raise QuantityError(raw, "use a decimal point, not a comma", field)
    if not _AMOUNT.match(normalised):
        raise QuantityError(raw, "not an amount with a unit, e.g. '250 mg', '5 mL' or '0.2 mol/L'", field)
    try:
        quantity = ureg.Quantity(*_parsed(normalised))
    except (pint.errors.UndefinedUnitError, pint.errors.DefinitionSyntaxError) as exc:
        names = getattr(exc, "unit_names", None)
        label = ", ".join(names) if isinstance(names, (list, tuple)) else str(names or exc)
        raise QuantityError(raw, f"unknown unit {label!r}", field) from None
    except Exception:  # pint/tokenize raise various errors for garbage text
        raise QuantityError(raw, "not an amount with a unit", field) from None
    kinds = (expect,) if isinstance(expect, str) else tuple(expect or ())
    if kinds:
        kind = kind_of(quantity)
        if kind not in kinds:
            if kind == "dimensionless":
                raise QuantityError(raw, f"a number needs a unit ({' or '.join(kinds)})", field)
            raise QuantityError(raw, f"expected a {' or '.join(kinds)}, got a {kind or 'quantity of another kind'}", field)
    if not math.isfinite(float(quantity.magnitude)):
        raise QuantityError(raw, "must be a finite number", field)
    if quantity.magnitude < 0:
        raise QuantityError(raw, "must not be negative", field)
    return quantity


@functools.lru_cache(maxsize=4096)
def _parsed(normalised: str) -> tuple:
    """(magnitude, units) of an amount text, parsed by pint once per process for each distinct text.

    Each caller gets a quantity of its own built from these (a cheap constructor call); a text
    pint refuses raises every time (errors are not cached).
    """
    quantity = ureg.Quantity(normalised)
    if not isinstance(quantity, ureg.Quantity):
        quantity = ureg.Quantity(quantity)
    return quantity.magnitude, quantity.units


# Physical sense of one amount entered: the one bound check, applied where text from outside becomes a
# quantity (:func:`parse_amount`, which the schema types of every API body, page form and import row use).
# A lab handles at most a tonne of anything and at most a cubic metre of liquid (an intermediate bulk
# container, the largest vessel a lab site fills); the concentration and molarity bounds are beyond any
# real solution (osmium, the densest element, is 22.6 g/mL; from memory).
MAX_MASS = "1000 kg"
MAX_VOLUME = "1000 L"
MAX_MOLARITY = "100 mol/L"
MAX_MASS_CONCENTRATION = "25 g/mL"  # also the density bound
# Element masses are kept as whole µg and volumes as whole µL in signed 64-bit columns (BIGINT). The
# largest single value a record derives is an assay at the bounds, 25 g/mL × 1000 L = 2.5 × 10^16 µg,
# or a draw of 1000 kg at the largest scale (1000) = 10^18 µg, both below INT64_MAX ≈ 9.2 × 10^18 µg.
INT64_MAX = 2**63 - 1
# kind -> (largest value, the unit kept as a whole number: a non-zero amount below one of it is refused)
LIMITS = {
    "mass": (MAX_MASS, "ug"),
    "volume": (MAX_VOLUME, "uL"),
    "molarity": (MAX_MOLARITY, None),
    "density": (MAX_MASS_CONCENTRATION, None),
}


def check_bounds(quantity, *, text: str = "", field: Optional[str] = None):
    """``quantity`` if within :data:`LIMITS` for its kind; else QuantityError naming the bound.

    A non-zero mass below 1 µg or volume below 1 µL is refused: it would be kept as 0.

    >>> check_bounds(parse_quantity("1000 kg")).magnitude
    1000
    >>> check_bounds(parse_quantity("1e30 g"), text="1e30 g", field="amount")
    Traceback (most recent call last):
    ...
    service.chem.units.QuantityError: amount: must be at most 1000 kg ('1e30 g')
    """
    kind = kind_of(quantity)
    if kind not in LIMITS:
        return quantity
    largest, smallest = LIMITS[kind]
    top = ureg.Quantity(*_parsed(largest))
    # the bound converted to the unit as entered, so "1e12 ug" meets "1000 kg" without a float residue
    if quantity.magnitude > magnitude_in(top, quantity.units):
        raise QuantityError(text, f"must be at most {largest}", field)
    if smallest and 0 < magnitude_in(quantity, smallest) < 1:
        shown = smallest.replace("u", "µ")
        raise QuantityError(text, f"below 1 {shown}, the smallest amount kept; give 0 or at least 1 {shown}", field)
    return quantity


def parse_amount(text: str, *, expect: str | tuple[str, ...], field: Optional[str] = None):
    """An amount entered by a person or a client: :func:`parse_quantity`, then :func:`check_bounds`.

    The one edge for amounts from outside; rule thresholds and amounts the service computes
    (a draw × scale) are parsed with :func:`parse_quantity` alone.

    >>> parse_amount("250 mg", expect="mass").magnitude
    250
    """
    return check_bounds(parse_quantity(text, expect=expect, field=field), text=(text or "").strip(), field=field)


def check_amount(text: str, *, expect: tuple[str, ...]) -> None:
    """:func:`parse_amount` for its refusal alone (what a schema type checks): an accepted text is
    remembered once per process, a refused one is refused every time."""
    if isinstance(text, str):
        _accepted(text, tuple(expect))
    else:
        parse_amount(text, expect=expect)


@functools.lru_cache(maxsize=4096)
def _accepted(text: str, expect: tuple[str, ...]) -> None:
    parse_amount(text, expect=expect)


def kind_of(quantity) -> Optional[str]:
    """The kind name (mass, volume, …) of a pint quantity, or None."""
    dims = quantity.dimensionality
    return next((name for name, d in _KINDS.items() if d == dims), None)


@functools.lru_cache(maxsize=1024)
def _factor(units, target) -> float:
    """pint's factor from ``units`` to ``target`` (multiplicative units), worked out once per pair."""
    return ureg.Quantity(1, units).to(target).magnitude


def magnitude_in(quantity, unit) -> float:
    """``quantity.to(unit).magnitude``, with the conversion factor worked out once per pair of units
    (the same product pint forms; units with an offset, such as °C, convert through pint itself)."""
    if not quantity._is_multiplicative:
        return quantity.to(unit).magnitude
    return quantity.magnitude * _factor(quantity.units, unit)


def to_decimal(quantity, unit: str) -> Decimal:
    """The magnitude of ``quantity`` in ``unit`` as a Decimal (via its shortest repr)."""
    return Decimal(repr(float(magnitude_in(quantity, unit))))


def whole_micro(text: str, unit: str, *, expect: str, field: Optional[str] = None) -> int:
    """``text`` as a whole number of ``unit`` (``uL`` or ``ug``, the units amounts are kept in), rounded half
    to even: ``int(to_decimal(parse_quantity(text, expect=expect), unit).to_integral_value())``, worked out
    once per process for each distinct text. An error names ``field`` as :func:`parse_quantity` does.

    >>> whole_micro("0.5 mL", "uL", expect="volume"), whole_micro("2.5 ug", "ug", expect="mass")
    (500, 2)
    """
    if not isinstance(text, str):
        parse_quantity(text, expect=expect, field=field)  # raises: an amount is a text
    try:
        return _whole_micro(text, unit, expect)
    except QuantityError:
        parse_quantity(text, expect=expect, field=field)  # the same refusal, naming the field
        raise


@functools.lru_cache(maxsize=4096)
def _whole_micro(text: str, unit: str, expect: str) -> int:
    return int(to_decimal(parse_quantity(text, expect=expect), unit).to_integral_value())


def mass_g(quantity, *, density_g_per_ml: Optional[float], substance: str, field: Optional[str] = None) -> Decimal:
    """Mass in grams of a mass or volume quantity; a volume needs ``density_g_per_ml``.

    Raises :class:`MissingDensityError` naming ``substance`` if a volume has no density.

    >>> mass_g(parse_quantity("10 mL"), density_g_per_ml=0.789, substance="ethanol")
    Decimal('7.8900')
    """
    kind = kind_of(quantity)
    if kind == "mass":
        return to_decimal(quantity, "g")
    if kind == "volume":
        if density_g_per_ml is None:
            raise MissingDensityError(f"{quantity:~P}", substance, field)
        return to_decimal(quantity, "mL") * Decimal(repr(float(density_g_per_ml)))
    raise QuantityError(f"{quantity:~P}", "expected a mass or a volume", field)


_MICRO_UNIT = {"mass": "ug", "volume": "uL"}


@functools.lru_cache(maxsize=256)
def _micro_factor(units: str, micro_unit: str) -> Decimal:
    """How many µg (µL) one of ``units`` is, as the shortest decimal of pint's factor (exact for SI prefixes)."""
    return Decimal(repr(float(_factor(units, micro_unit))))


def exact_micro(quantity) -> tuple[str, Decimal]:
    """A mass or volume as ("mass", exact µg) or ("volume", exact µL): the amount as entered times the
    unit's factor in Decimal, so "15.8 mg" is 15800 µg and "0.5 uL" 0.5 µL (no float residue, no rounding).

    >>> exact_micro(parse_quantity("15.8 mg")), exact_micro(parse_quantity("0.25 L"))
    (('mass', Decimal('15800')), ('volume', Decimal('250000')))
    """
    kind = kind_of(quantity)
    if kind not in _MICRO_UNIT:
        raise QuantityError(f"{quantity:~P}", "expected a mass or a volume")
    value = Decimal(repr(float(quantity.magnitude))) * _micro_factor(quantity.units, _MICRO_UNIT[kind])
    return kind, value.normalize() + 0  # + 0: no exponent on whole numbers (1.58E+4 -> 15800)


def micro_text(kind: str, micro: Decimal) -> str:
    """An exact µg (µL) amount as text pint reads back to the same amount.

    >>> micro_text("mass", Decimal("15800")), micro_text("volume", Decimal("0.5"))
    ('15800 ug', '0.5 uL')
    """
    return f"{micro.normalize():f} {_MICRO_UNIT[kind]}"
