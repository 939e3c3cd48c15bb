"""Hazardous waste generated per calendar month and the generator category it gives (pure).

40 CFR 262.13 has a generator determine its category from the hazardous waste it generates in
each calendar month; 40 CFR 260.10 defines the categories (from memory — verify the wording):
very small quantity generator ≤ 100 kg non-acute and ≤ 1 kg acute hazardous waste in the month;
small quantity generator > 100 kg and < 1 000 kg non-acute and ≤ 1 kg acute; large quantity
generator ≥ 1 000 kg non-acute or > 1 kg acute. (The 100 kg limits on residues from cleaning up
acute hazardous waste spills are not computed here.) The thresholds are rules of scope
``generator_month`` in the rule packs; a rule that fires ``marks`` the category it puts the month
in, and a month in which no marking rule fires is a very small quantity generator month.

What counts: the entries into containers of the streams the pack's ``waste_counting`` lists;
solids by their mass, liquids by volume × density — each component by its catalogue density,
the rest of the entry's volume (and components without a density) by the pack's assumed density,
which the report flags. A reversal counts, negated, in the month of the entry it reverses, so a
month shows what was generated net of corrections.
"""

from __future__ import annotations

from collections import defaultdict
from dataclasses import dataclass
from decimal import Decimal
from typing import Iterable, Optional

from service import vocab
from service.rules.evaluate import Finding, evaluate
from service.rules.loader import LayeredRules
from service.rules.registry import MeasureResult, measure
from service.rules.registry import text as _text
from service.rules.subjects import GeneratorMonthSubject

__all__ = ["EntryPart", "GeneratedEntry", "MonthCategory", "entry_kg", "months_between", "month_totals",
           "categorise"]

_UL_G_PER_ML_TO_KG = Decimal("0.000001")  # 1 µL × 1 g/mL = 1 mg = 10⁻⁶ kg


@dataclass(frozen=True)
class EntryPart:
    """A liquid component of an entry: its signed volume and catalogue density (None: not known)."""

    name: str
    volume_ul: int
    density_g_per_ml: Optional[float]


@dataclass(frozen=True)
class GeneratedEntry:
    """One waste entry (or reversal, negative) counted in ``month`` ("YYYY-MM", UTC)."""

    month: str
    acute: bool
    form: str  # liquid | solid
    volume_ul: int = 0
    mass_ug: int = 0
    parts: tuple[EntryPart, ...] = ()


def entry_kg(entry: GeneratedEntry, assumed_g_per_ml: Decimal) -> tuple[Decimal, Decimal]:
    """The entry's mass in kg, exact, and the litres of it weighed with the assumed density.

    >>> entry_kg(GeneratedEntry("2026-03", False, "liquid", 100_000, parts=(EntryPart("acetone", 60_000, 0.7845),)),
    ...          Decimal(1))
    (Decimal('0.0870700000'), Decimal('0.04'))
    """
    if entry.form == "solid":
        return Decimal(entry.mass_ug) / 1_000_000_000, Decimal(0)
    known = sum((Decimal(p.volume_ul) * Decimal(repr(p.density_g_per_ml)) for p in entry.parts
                 if p.density_g_per_ml is not None), Decimal(0))
    assumed_ul = entry.volume_ul - sum(p.volume_ul for p in entry.parts if p.density_g_per_ml is not None)
    kg = (known + Decimal(assumed_ul) * assumed_g_per_ml) * _UL_G_PER_ML_TO_KG
    return kg, Decimal(assumed_ul) / 1_000_000


def months_between(since: str, until: str) -> list[str]:
    """Every "YYYY-MM" from ``since`` to ``until``, inclusive.

    >>> months_between("2025-11", "2026-02")
    ['2025-11', '2025-12', '2026-01', '2026-02']
    """
    year, month = map(int, since.split("-"))
    out = []
    while f"{year:04d}-{month:02d}" <= until:
        out.append(f"{year:04d}-{month:02d}")
        year, month = (year + 1, 1) if month == 12 else (year, month + 1)
    return out


def month_totals(entries: Iterable[GeneratedEntry], months: list[str],
                 assumed_g_per_ml: Decimal) -> list[GeneratorMonthSubject]:
    """One subject per month of ``months`` (months without entries are zero)."""
    sums: dict[str, list] = defaultdict(lambda: [Decimal(0), Decimal(0), 0, Decimal(0)])
    for entry in entries:
        kg, assumed_l = entry_kg(entry, assumed_g_per_ml)
        row = sums[entry.month]
        row[1 if entry.acute else 0] += kg
        row[2] += 1
        row[3] += assumed_l
    return [GeneratorMonthSubject(m, sums[m][0], sums[m][1], sums[m][2], sums[m][3]) if m in sums
            else GeneratorMonthSubject(m, Decimal(0), Decimal(0)) for m in months]


@dataclass(frozen=True)
class MonthCategory:
    """A month's amounts, the category they give, whether it differs from the month before, the findings."""

    subject: GeneratorMonthSubject
    category: str  # vocab.GENERATOR_CATEGORIES
    previous: Optional[str]  # the category of the month before (None for the first month asked)
    findings: tuple[Finding, ...]

    @property
    def moved(self) -> bool:
        return self.previous is not None and self.previous != self.category


def categorise(rules: LayeredRules, subjects: list[GeneratorMonthSubject]) -> list[MonthCategory]:
    """Evaluate the generator_month rules for each month; the category is the largest any firing rule marks."""
    marked = rules.marked("generator_month")
    order = vocab.GENERATOR_CATEGORIES
    out: list[MonthCategory] = []
    previous: Optional[str] = None
    for subject in subjects:
        findings = evaluate(rules, "generator_month", subject)
        categories = [marked[f.rule_id] for f in findings if f.rule_id in marked]
        category = max(categories, key=order.index, default=order[0])
        out.append(MonthCategory(subject, category, previous, tuple(findings)))
        previous = category
    return out


def _detail(subject: GeneratorMonthSubject) -> str:
    detail = f"{subject.month}, {subject.entries} entr{'y' if subject.entries == 1 else 'ies'}"
    if subject.assumed_density_l:
        detail += f"; {_text(subject.assumed_density_l)} L weighed with the assumed density (no catalogue density)"
    return detail


@measure("month_non_acute_kg", scope="generator_month", unit="kg")
def month_non_acute_kg(subject: GeneratorMonthSubject, _arg: None) -> MeasureResult:
    """Non-acute hazardous waste generated in the calendar month, in kg (liquids by volume × density)."""
    return MeasureResult(float(subject.non_acute_kg), "kg", _detail(subject))


@measure("month_acute_kg", scope="generator_month", unit="kg")
def month_acute_kg(subject: GeneratorMonthSubject, _arg: None) -> MeasureResult:
    """Acute hazardous waste generated in the calendar month, in kg (liquids by volume × density)."""
    return MeasureResult(float(subject.acute_kg), "kg", _detail(subject))
