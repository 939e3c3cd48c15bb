"""Pure site element ledger: per element and month, where the element on hand went.

    opening + received = into products + into waste + shipped out + declared losses
                         + corrections + closing + unaccounted

The store sums each month's records into :class:`MonthFlows`; :func:`site_ledger` chains the months
(one month's closing is the next one's opening) and checks that the two kinds of record agree: the
on-hand figures come from the holding changes (every change to a stock's or mixture's content), the
flows from the records of runs, waste entries and movements. ``difference_ug`` is what they disagree
by (0 when every change was recorded both ways). No Flask, no database; all masses are integer µg.

Terms (µg, signed where a correction can go either way):

- *received*: stocks and ready-made solutions entering the inventory (and, when a site's record
  began, what it then held: "carried over");
- *into products*: run outputs recorded, less products put back into the inventory as stocks (a
  product kept as a stock stays on hand; one shipped out leaves by *shipped out*);
- *into waste*: every waste entry (net of reversals), from runs, clean-ups and disposed stocks;
- *declared losses*: run losses (spills, residue left in glassware, as declared);
- *corrections*: content removed by corrected amounts and retired holdings (negative if added);
- *unaccounted*: drawn by runs − outputs − waste entries not from disposed stocks − losses; the
  month's share of what runs have not yet assigned (an open run's remainder, or a real gap).

A month *closes* when the records agree (``difference_ug == 0``) and its unaccounted remainder is
within the site tolerance of what runs drew that month (an unaccounted remainder with nothing drawn
closes only at 0).
"""

from __future__ import annotations

from dataclasses import asdict, dataclass
from decimal import Decimal
from typing import Iterable, Sequence

__all__ = ["FIGURES", "MonthFlows", "LedgerLine", "site_ledger", "months_between"]

# The ledger's figures in the order of its equation (left side first), as keys of the drill-down.
FIGURES = ("opening", "received", "into_products", "into_waste", "shipped_out", "declared_losses",
           "corrections", "closing", "unaccounted")


@dataclass(frozen=True)
class MonthFlows:
    """One element's records summed over one month (µg)."""

    month: str  # 'YYYY-MM'
    element: str
    holdings_change_ug: int = 0  # Σ holding changes (the on-hand change)
    received_ug: int = 0  # holding changes received + carried_over
    products_kept_ug: int = 0  # holding changes product
    corrections_ug: int = 0  # −Σ holding changes corrected + retired (what left)
    drawn_ug: int = 0  # run draws (runs started in the month)
    outputs_ug: int = 0  # run outputs recorded
    waste_ug: int = 0  # waste entries (signed, net)
    disposed_ug: int = 0  # waste entries made by disposing of stocks
    shipped_ug: int = 0  # shipments out of the site
    losses_ug: int = 0  # run losses declared


@dataclass(frozen=True)
class LedgerLine:
    """One element's ledger for one month (µg)."""

    month: str
    element: str
    opening_ug: int
    received_ug: int
    into_products_ug: int
    into_waste_ug: int
    shipped_out_ug: int
    declared_losses_ug: int
    corrections_ug: int
    closing_ug: int
    unaccounted_ug: int
    drawn_ug: int
    difference_ug: int
    tolerance_percent: float
    closes: bool

    def to_dict(self) -> dict:
        return asdict(self)


def months_between(first: str, last: str) -> list[str]:
    """Every 'YYYY-MM' from ``first`` to ``last`` inclusive.

    >>> months_between("2026-11", "2027-02")
    ['2026-11', '2026-12', '2027-01', '2027-02']
    """
    year, month = map(int, first.split("-"))
    end = tuple(map(int, last.split("-")))
    out = []
    while (year, month) <= end:
        out.append(f"{year:04d}-{month:02d}")
        year, month = (year + 1, 1) if month == 12 else (year, month + 1)
    return out


def _line(flows: MonthFlows, opening_ug: int, tolerance: Decimal) -> LedgerLine:
    closing = opening_ug + flows.holdings_change_ug
    into_products = flows.outputs_ug - flows.products_kept_ug
    unaccounted = flows.drawn_ug - flows.outputs_ug - (flows.waste_ug - flows.disposed_ug) - flows.losses_ug
    difference = (opening_ug + flows.received_ug - into_products - flows.waste_ug - flows.shipped_ug
                  - flows.losses_ug - flows.corrections_ug - closing - unaccounted)
    within = abs(unaccounted) <= tolerance * abs(flows.drawn_ug)
    return LedgerLine(
        month=flows.month, element=flows.element, opening_ug=opening_ug, received_ug=flows.received_ug,
        into_products_ug=into_products, into_waste_ug=flows.waste_ug, shipped_out_ug=flows.shipped_ug,
        declared_losses_ug=flows.losses_ug, corrections_ug=flows.corrections_ug, closing_ug=closing,
        unaccounted_ug=unaccounted, drawn_ug=flows.drawn_ug, difference_ug=difference,
        tolerance_percent=float(tolerance * 100), closes=difference == 0 and within,
    )


def site_ledger(flows: Iterable[MonthFlows], months: Sequence[str], opening_ug: dict[str, int],
                tolerance: Decimal) -> list[LedgerLine]:
    """The ledger lines of ``months`` (consecutive 'YYYY-MM') for every element in ``opening_ug``
    or ``flows``, ordered by element then month.

    ``opening_ug`` is each element's on hand at the start of the first month; a month without
    records still gets its line (opening = closing). ``tolerance`` is a fraction (0.05 = 5 %).

    >>> lines = site_ledger([MonthFlows("2026-01", "Cd", holdings_change_ug=900, received_ug=1000,
    ...                                 drawn_ug=100, outputs_ug=60, waste_ug=37)],
    ...                     ["2026-01", "2026-02"], {}, Decimal("0.05"))
    >>> [(l.month, l.opening_ug, l.closing_ug, l.unaccounted_ug, l.difference_ug, l.closes) for l in lines]
    [('2026-01', 0, 900, 3, 0, True), ('2026-02', 900, 900, 0, 0, True)]
    """
    by_key = {(f.element, f.month): f for f in flows}
    elements = sorted(set(opening_ug) | {element for element, _ in by_key})
    lines = []
    for element in elements:
        on_hand = opening_ug.get(element, 0)
        for month in months:
            line = _line(by_key.get((element, month), MonthFlows(month, element)), on_hand, tolerance)
            lines.append(line)
            on_hand = line.closing_ug
    return lines
