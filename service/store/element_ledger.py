"""The site element ledger from the records: monthly figures and the records behind each.

The on-hand figures are sums of holding changes (``service.store.holdings``); the flows are those of
the records of runs (draws, outputs, losses), waste entries and stock movements. Both are read from
the monthly totals kept with every record (``service.store.month_totals``), so a ledger costs what
its months hold, not what the history holds; the drill-down lists the records themselves. The pure
arithmetic, and the check that the two agree, is ``service.balance.site``. Months are UTC calendar
months ('YYYY-MM'). The ledger is site-wide: transfers between labs move nothing in or out of it.
"""

from __future__ import annotations

import datetime as dt
from collections import defaultdict
from dataclasses import dataclass
from decimal import Decimal
from typing import Optional

from sqlalchemy import BigInteger, cast, func, select
from sqlalchemy.orm import Session

from service import vocab
from service.balance.site import FIGURES, LedgerLine, MonthFlows, months_between, site_ledger
from service.errors import InvalidInput
from service.store.models import (
    HoldingChange,
    LedgerMonthTotal,
    Mixture,
    Run,
    RunDraw,
    RunLoss,
    RunOutput,
    Stock,
    StockMovement,
    WasteEntry,
    WasteEntryElement,
    WasteMonthTotal,
)

__all__ = ["Contribution", "month_range", "ledger_lines", "contributions", "month_bounds", "first_month"]

HOLDING = "holding:"  # the kept flows of holding changes: holding:<kind>
RECEIVED = ("received", "carried_over")
CORRECTIONS = ("corrected", "retired")


@dataclass(frozen=True)
class Contribution:
    """One record's part of one ledger figure (µg, with the sign the figure adds it with)."""

    record: str  # stock | mixture | holding_change | run_draw | run_output | run_loss | waste_entry | stock_movement | run
    id: int
    mass_ug: int
    at: Optional[dt.datetime]
    label: str
    run_id: Optional[int] = None

    def to_dict(self) -> dict:
        return {"record": self.record, "id": self.id, "mass_ug": self.mass_ug,
                "at": self.at.isoformat() if self.at else None, "label": self.label, "run_id": self.run_id}


def month_bounds(month: str) -> tuple[dt.datetime, dt.datetime]:
    """[start, end) of a 'YYYY-MM' month in UTC."""
    try:
        year, number = map(int, month.split("-"))
        start = dt.datetime(year, number, 1, tzinfo=dt.timezone.utc)
    except ValueError:
        raise InvalidInput("month", "a month is written YYYY-MM", month) from None
    end = dt.datetime(year + (number == 12), 1 if number == 12 else number + 1, 1, tzinfo=dt.timezone.utc)
    return start, end


def _month_of(moment: dt.datetime) -> str:
    return moment.strftime("%Y-%m")


def first_month(session: Session) -> Optional[str]:
    """The month of the earliest holding change or waste entry, None for an empty site."""
    firsts = [session.scalar(select(func.min(HoldingChange.at))), session.scalar(select(func.min(WasteEntry.at)))]
    firsts = [f for f in firsts if f is not None]
    return _month_of(min(firsts)) if firsts else None


def _elements(element: Optional[str]) -> tuple[str, ...]:
    return (element,) if element else vocab.TRACKED_ELEMENTS


def _opening(session: Session, before: str, elements: tuple[str, ...]) -> dict[str, int]:
    """Each element's on hand at the start of the month ``before``: its holding changes of the months before."""
    query = (select(LedgerMonthTotal.element, cast(func.sum(LedgerMonthTotal.mass_ug), BigInteger))
             .where(LedgerMonthTotal.month < before, LedgerMonthTotal.flow.startswith(HOLDING),
                    LedgerMonthTotal.element.in_(elements))
             .group_by(LedgerMonthTotal.element))
    return {element: int(ug) for element, ug in session.execute(query)}


# Where each kept flow goes in a month's figures (besides the holding changes' sum).
_HOLDING_FIELDS = {**{f"{HOLDING}{k}": ("received_ug", 1) for k in RECEIVED},
                   f"{HOLDING}product": ("products_kept_ug", 1),
                   **{f"{HOLDING}{k}": ("corrections_ug", -1) for k in CORRECTIONS}}
_RECORD_FIELDS = {"run_draw": "drawn_ug", "run_output": "outputs_ug", "run_loss": "losses_ug", "shipment": "shipped_ug"}


def _flows(session: Session, first: str, last: str, elements: tuple[str, ...]) -> list[MonthFlows]:
    """The months ``first``..``last`` of the elements, from the monthly totals (``store.month_totals``)."""
    flows: dict = defaultdict(lambda: defaultdict(int))
    kept = select(LedgerMonthTotal.element, LedgerMonthTotal.month, LedgerMonthTotal.flow, LedgerMonthTotal.mass_ug).where(
        LedgerMonthTotal.month >= first, LedgerMonthTotal.month <= last, LedgerMonthTotal.element.in_(elements))
    for element, month, flow, ug in session.execute(kept):
        if flow.startswith(HOLDING):
            flows[(element, month)]["holdings_change_ug"] += int(ug)
            field, sign = _HOLDING_FIELDS.get(flow, (None, 0))
        else:
            field, sign = _RECORD_FIELDS[flow], 1
        if field:
            flows[(element, month)][field] += sign * int(ug)
    waste = (select(WasteMonthTotal.element, WasteMonthTotal.month, cast(func.sum(WasteMonthTotal.mass_ug), BigInteger),
                    cast(func.sum(WasteMonthTotal.disposed_ug), BigInteger))
             .where(WasteMonthTotal.month >= first, WasteMonthTotal.month <= last, WasteMonthTotal.element.in_(elements))
             .group_by(WasteMonthTotal.element, WasteMonthTotal.month))
    for element, month, ug, disposed in session.execute(waste):
        flows[(element, month)]["waste_ug"] += int(ug)
        flows[(element, month)]["disposed_ug"] += int(disposed)
    return [MonthFlows(month=when, element=element, **values) for (element, when), values in flows.items()]


def month_range(session: Session, since: Optional[str] = None, until: Optional[str] = None) -> tuple[str, str]:
    """The first and last month ('YYYY-MM') a ledger of ``since``..``until`` covers: by default the
    site's first month of records and the present month."""
    now = _month_of(dt.datetime.now(dt.timezone.utc))
    first = since or first_month(session) or now
    last = until or now
    if last < first:
        raise InvalidInput("until", f"until ({last}) is before since ({first})", last)
    return first, last


def ledger_lines(session: Session, *, since: Optional[str] = None, until: Optional[str] = None,
                 element: Optional[str] = None, tolerance: Decimal) -> list[LedgerLine]:
    """The ledger of the months ``since``..``until`` ('YYYY-MM'; default: the site's first month to the
    present one), for ``element`` or every tracked element that occurs."""
    months = months_between(*month_range(session, since, until))
    if len(months) > 600:
        raise InvalidInput("since", "a ledger covers at most 600 months (50 years)", months[0])
    elements = _elements(element)
    month_bounds(months[0])  # a month written YYYY-MM, or InvalidInput
    opening = _opening(session, months[0], elements)
    flows = _flows(session, months[0], months[-1], elements)
    lines = site_ledger(flows, months, opening, tolerance)
    if element:
        return lines
    return [line for line in lines if _occurs(line)]


def _occurs(line: LedgerLine) -> bool:
    return any(getattr(line, name) for name in ("opening_ug", "received_ug", "into_products_ug", "into_waste_ug",
                                                 "shipped_out_ug", "declared_losses_ug", "corrections_ug",
                                                 "closing_ug", "unaccounted_ug", "drawn_ug"))


# --- drill-down -----------------------------------------------------------------


def _holder_label(session: Session, change_or_ids) -> str:
    stock_id, mixture_id = change_or_ids
    if stock_id is not None:
        return f"stock {session.get(Stock, stock_id).label}"
    return f"mixture {session.get(Mixture, mixture_id).label}"


def _on_hand_by_holder(session: Session, element: str, before: dt.datetime) -> list[Contribution]:
    query = (select(HoldingChange.stock_id, HoldingChange.mixture_id, cast(func.sum(HoldingChange.mass_ug), BigInteger))
             .where(HoldingChange.element == element, HoldingChange.at < before)
             .group_by(HoldingChange.stock_id, HoldingChange.mixture_id)
             .order_by(HoldingChange.stock_id, HoldingChange.mixture_id))
    out = []
    for stock_id, mixture_id, ug in session.execute(query):
        if ug:
            record, ident = ("stock", stock_id) if stock_id is not None else ("mixture", mixture_id)
            out.append(Contribution(record, ident, int(ug), None, _holder_label(session, (stock_id, mixture_id))))
    return out


def _changes(session: Session, element: str, start, end, kinds: tuple[str, ...], sign: int) -> list[Contribution]:
    query = (select(HoldingChange).where(HoldingChange.element == element, HoldingChange.at >= start,
                                         HoldingChange.at < end, HoldingChange.kind.in_(kinds))
             .order_by(HoldingChange.id))
    return [Contribution("holding_change", c.id, sign * c.mass_ug, c.at,
                         f"{c.kind.replace('_', ' ')}: {_holder_label(session, (c.stock_id, c.mixture_id))}", c.run_id)
            for c in session.scalars(query)]


def _entries(session: Session, element: str, start, end, *, disposals: Optional[bool]) -> list[Contribution]:
    query = (select(WasteEntry, WasteEntryElement.mass_ug).join(WasteEntryElement, WasteEntryElement.entry_id == WasteEntry.id)
             .where(WasteEntryElement.element == element, WasteEntry.at >= start, WasteEntry.at < end)
             .order_by(WasteEntry.id))
    disposal = select(StockMovement.waste_entry_id).where(StockMovement.waste_entry_id.is_not(None))
    if disposals is True:
        query = query.where(WasteEntry.id.in_(disposal))
    elif disposals is False:
        query = query.where(WasteEntry.id.not_in(disposal))
    return [Contribution("waste_entry", entry.id, int(ug), entry.at, entry.description[:120], entry.run_id)
            for entry, ug in session.execute(query)]


def _json_records(session: Session, model, element: str, start, end, sign: int, record: str) -> list[Contribution]:
    if model is RunDraw:
        query = select(RunDraw, Run.started_at).join(Run, Run.id == RunDraw.run_id).where(
            Run.started_at >= start, Run.started_at < end).order_by(RunDraw.id)
        rows = [(draw, at) for draw, at in session.execute(query)]
    else:
        query = select(model).where(model.at >= start, model.at < end).order_by(model.id)
        if model is StockMovement:
            query = query.where(StockMovement.kind == "ship")
        rows = [(row, row.at) for row in session.scalars(query)]
    out = []
    for row, at in rows:
        ug = int((row.element_mass_ug or {}).get(element, 0))
        if ug:
            out.append(Contribution(record, row.id, sign * ug, at, _describe(session, row), getattr(row, "run_id", None)))
    return out


def _describe(session: Session, row) -> str:
    if isinstance(row, RunDraw):
        source = session.get(Stock, row.stock_id) if row.stock_id else session.get(Mixture, row.mixture_id)
        return f"run {row.run_id}: {row.amount_text} of {source.label}"
    if isinstance(row, RunOutput):
        return f"run {row.run_id}: output {row.label}"
    if isinstance(row, RunLoss):
        return f"run {row.run_id}: {row.description[:100]}"
    stock = session.get(Stock, row.stock_id)
    return f"{row.amount_text} of {stock.label} shipped to {row.destination or 'outside the site'}"


def contributions(session: Session, element: str, month: str, figure: str) -> list[Contribution]:
    """The records that make one figure of one element's month; their ``mass_ug`` add up to the figure.

    *unaccounted* lists the draws (+), outputs (−), waste entries not from disposed stocks (−) and
    losses (−) of the month, each with its run where it has one.
    """
    if figure not in FIGURES:
        raise InvalidInput("figure", f"one of {', '.join(FIGURES)}", figure)
    start, end = month_bounds(month)
    if figure == "opening":
        return _on_hand_by_holder(session, element, start)
    if figure == "closing":
        return _on_hand_by_holder(session, element, end)
    if figure == "received":
        return _changes(session, element, start, end, RECEIVED, 1)
    if figure == "corrections":
        return _changes(session, element, start, end, CORRECTIONS, -1)
    if figure == "into_products":
        return (_json_records(session, RunOutput, element, start, end, 1, "run_output")
                + _changes(session, element, start, end, ("product",), -1))
    if figure == "into_waste":
        return _entries(session, element, start, end, disposals=None)
    if figure == "shipped_out":
        return _json_records(session, StockMovement, element, start, end, 1, "stock_movement")
    if figure == "declared_losses":
        return _json_records(session, RunLoss, element, start, end, 1, "run_loss")
    # unaccounted
    return (_json_records(session, RunDraw, element, start, end, 1, "run_draw")
            + _json_records(session, RunOutput, element, start, end, -1, "run_output")
            + [_negate(c) for c in _entries(session, element, start, end, disposals=False)]
            + _json_records(session, RunLoss, element, start, end, -1, "run_loss"))


def _negate(c: Contribution) -> Contribution:
    return Contribution(c.record, c.id, -c.mass_ug, c.at, c.label, c.run_id)
