"""Numbers as people read them: the one place that decides how a concentration, a percentage
and a unit symbol are written on pages, in API text (finding messages, ``value_text``) and in
documents.

- A concentration shows 3 significant figures, rounded once, half to even (the rounding of
  ISO 80000-1 Annex B; 3 significant figures is common practice for a measured concentration):
  0.999 mg/L stays "0.999", 139.955556 mg/L reads "140", 1 reads "1.00".
- Always positional, never scientific notation: 0.0004 mg/L reads "0.000400" (the zeros after the
  point up to the first non-zero digit are placeholders, the digits from it on are the significant
  ones; "4.00e-4" is too easily read as 4). Left of the point no digit is dropped: 7 512.3 reads
  "7,510", whose last zero is a placeholder. The smallest concentration a record can reach is
  1 µg in 1 000 L = 0.00000100 mg/L, so positional figures stay short enough.
- A percentage shows one decimal ("66.7"); a non-zero share that would round to 0.0 reads "< 0.1",
  so a trace never reads as absent.
- Units have one spelling: µg, mg, g, kg, µL, mL, L, mg/L, °C, % (the litre as capital L, as the
  SI allows and US practice requires; never "mg/l" or "ml").

Pure: no Flask, no database; the Jinja filters of pages and documents are these functions.
"""

from __future__ import annotations

import math
import re
from decimal import ROUND_HALF_EVEN, Decimal
from typing import Optional, Union

__all__ = [
    "SIGNIFICANT_FIGURES",
    "PERCENT_PLACES",
    "NONE_SHOWN",
    "significant",
    "concentration_text",
    "percent",
    "percent_text",
    "unit_text",
    "TEMPLATE_FILTERS",
]

SIGNIFICANT_FIGURES = 3  # concentrations
PERCENT_PLACES = Decimal("0.1")  # percentages: one decimal
NONE_SHOWN = "—"  # a value that is not there (not applicable, not measured)

Number = Union[int, float, Decimal]


def _exact(value: Number) -> Decimal:
    """``value`` as a Decimal: a float by its shortest repr (0.1 -> Decimal('0.1')), so rounding acts on the
    digits a person would write, not on the binary approximation."""
    if isinstance(value, bool):
        raise TypeError("a number is needed, not a boolean")
    if isinstance(value, Decimal):
        exact = value
    elif isinstance(value, int):
        exact = Decimal(value)
    else:
        number = float(value)
        if not math.isfinite(number):
            raise ValueError(f"{value!r} is not a finite number")
        exact = Decimal(repr(number))
    if not exact.is_finite():
        raise ValueError(f"{value!r} is not a finite number")
    return exact


def significant(value: Optional[Number], figures: int = SIGNIFICANT_FIGURES, *,
                apart_from: Optional[Number] = None) -> str:
    """``value`` with ``figures`` significant figures, positional, thousands grouped with commas.

    ``apart_from`` is a limit the value is compared with: a value that differs from it never reads as
    it, so it gets the figures that tell them apart (0.99951 beside a limit of 1 reads "0.9995").

    >>> significant(0.999), significant(1.0), significant(0.0004), significant(139.955556)
    ('0.999', '1.00', '0.000400', '140')
    >>> significant(0.99951), significant(7512.3), significant(-2.5), significant(0), significant(None)
    ('1.00', '7,510', '-2.50', '0', '—')
    >>> significant(0.99951, apart_from=1), significant(1, apart_from=1), significant(1.2, apart_from=1)
    ('0.9995', '1.00', '1.20')
    """
    if value is None:
        return NONE_SHOWN
    if figures < 1:
        raise ValueError("at least one significant figure")
    exact = _exact(value)
    text = _significant(exact, figures)
    if apart_from is not None:
        limit = _exact(apart_from)
        while exact != limit and _reads(text) == limit and figures < _MAX_FIGURES:
            figures += 1
            text = _significant(exact, figures)
    return text


_MAX_FIGURES = 28  # Decimal's default precision: every value tells apart from its limit by then


def _reads(text: str) -> Optional[Decimal]:
    """The number a shown text reads as ("1,230" -> 1230; "< 0.1" -> None)."""
    try:
        return Decimal(text.replace(",", ""))
    except ArithmeticError:
        return None


def _significant(exact: Decimal, figures: int) -> str:
    if exact == 0:
        return "0"
    rounded = _round_to(exact, exact.adjusted(), figures)
    if rounded.adjusted() != exact.adjusted():  # 0.9996 -> 1.000: the carry added a digit in front
        rounded = _round_to(exact, rounded.adjusted(), figures)
    if rounded.as_tuple().exponent >= 0:
        return f"{int(rounded):,}"
    return f"{rounded:,f}"


def _round_to(exact: Decimal, leading: int, figures: int) -> Decimal:
    """``exact`` rounded (half to even) to ``figures`` digits counted from the power of ten ``leading``."""
    return exact.quantize(Decimal(1).scaleb(leading - figures + 1), rounding=ROUND_HALF_EVEN)


def concentration_text(value: Optional[Number], unit: str = "mg/L") -> str:
    """A concentration with its unit, 3 significant figures.

    >>> concentration_text(0.999), concentration_text(139.955556), concentration_text(0.0004, "mg/l")
    ('0.999 mg/L', '140 mg/L', '0.000400 mg/L')
    """
    if value is None:
        return NONE_SHOWN
    return f"{significant(value)} {unit_text(unit)}"


def percent(value: Optional[Number], *, apart_from: Optional[Number] = None) -> str:
    """A percentage (the number only) to one decimal, half to even; a non-zero trace reads "< 0.1".

    ``apart_from``: as for :func:`significant`, more decimals where one would read as the limit.

    >>> percent(200 / 3), percent(100), percent(0.04), percent(0.05), percent(0.15), percent(0), percent(None)
    ('66.7', '100.0', '< 0.1', '< 0.1', '0.2', '0.0', '—')
    >>> percent(0.49, apart_from=0.5), percent(90.004, apart_from=90), percent(0.5, apart_from=0.5)
    ('0.49', '90.004', '0.5')
    """
    if value is None:
        return NONE_SHOWN
    exact = _exact(value)
    places = PERCENT_PLACES
    text = _percent(exact, places)
    if apart_from is not None:
        limit = _exact(apart_from)
        while exact != limit and _reads(text) == limit and places > _FINEST:
            places = places / 10
            text = _percent(exact, places)
    return text


_FINEST = Decimal(1).scaleb(-_MAX_FIGURES)


def _percent(exact: Decimal, places: Decimal) -> str:
    rounded = exact.quantize(places, rounding=ROUND_HALF_EVEN)
    if rounded == 0 and exact != 0:
        return "< 0.1" if exact > 0 else "> -0.1"
    return f"{rounded:,f}"


def percent_text(value: Optional[Number]) -> str:
    """A percentage with its sign: "66.7 %" (SI: a space between the number and %).

    >>> percent_text(66.66666666666666)
    '66.7 %'
    """
    if value is None:
        return NONE_SHOWN
    return f"{percent(value)} %"


# The litre with or without a prefix, as a symbol on its own ("l", "ml", "µl"; not the l of "mol").
_LITRE = re.compile(r"(?<![A-Za-zµ])([mµnd]?)l(?![A-Za-z])")
# "u" written for the micro prefix before a unit symbol: ug, uL, umol.
_MICRO = re.compile(r"(?<![A-Za-z])u(?=(g|l|L|mol|m)(?![A-Za-z]))")
_WORDS = {"degC": "°C", "delta_degC": "°C", "Δ°C": "°C", "percent": "%", "micrometer": "µm"}


def unit_text(unit: str) -> str:
    """One spelling of a unit symbol: the litre as L, the micro prefix as µ, degrees Celsius as °C.

    >>> [unit_text(u) for u in ("mg/l", "ml", "ul", "ug", "mol/l", "mg / l", "degC", "percent", "kg", "")]
    ['mg/L', 'mL', 'µL', 'µg', 'mol/L', 'mg/L', '°C', '%', 'kg', '']
    """
    text = (unit or "").strip()
    if text in _WORDS:
        return _WORDS[text]
    text = re.sub(r"\s*/\s*", "/", text)
    text = _MICRO.sub("µ", text)
    return _LITRE.sub(lambda m: f"{m[1]}L", text)


# The Jinja filters of pages and documents, one name each: {{ c|conc }} -> "0.999", {{ p|pct }} -> "66.7",
# {{ c|conc_text }} -> "0.999 mg/L", {{ p|pct_text }} -> "66.7 %", {{ "mg/l"|unit }} -> "mg/L".
TEMPLATE_FILTERS = {
    "conc": significant,
    "conc_text": concentration_text,
    "pct": percent,
    "pct_text": percent_text,
    "unit": unit_text,
}
