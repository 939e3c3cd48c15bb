"""Stocks leaving the inventory other than by a run: disposed of into a waste container, transferred
to another lab (a new stock there), shipped out of the site.

Each movement takes its amount through the one draw of the service (``inventory.draw_from``), so the stock's
element rows drop by exactly the element masses the movement records, and the same masses arrive
in the waste entry or the new stock. The stock row is locked for the transaction; a refusal leaves
nothing behind (the request's transaction rolls back).
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass
from decimal import ROUND_HALF_EVEN, Decimal
from typing import Optional

from sqlalchemy import or_, select
from sqlalchemy.orm import Session, aliased

from service.chem.content import round_ug
from service.errors import Conflict, InvalidInput
from service.rules import LayeredRules
from service.schemas import DisposeIn, EntryIn, ShipIn, StockIn, TransferIn
from service.store import inventory, waste
from service.store.models import (
    HoldingChange,
    Lab,
    Mixture,
    MixtureComponent,
    RunDraw,
    Stock,
    StockMovement,
    WasteContainer,
    WasteEntry,
    utcnow,
)
from service.store.paging import Page, paginate

__all__ = ["dispose", "transfer", "ship", "movements_of", "list_movements", "History", "history_of"]

HISTORY_ROWS = 2000  # element rows of a stock's history read for its page (a few hundred changes)


def _lock(session: Session, stock_id: int) -> Stock:
    """The stock's row, locked and re-read; a retired stock moves no more."""
    stock = session.scalar(select(Stock).where(Stock.id == stock_id).with_for_update(of=Stock)
                           .execution_options(populate_existing=True))
    if stock is None:
        inventory.get(session, Stock, stock_id)  # raises NotFound
    if stock.retired_at is not None:
        raise Conflict(f"stock {stock.label} is retired")
    return stock


def _take(stock: Stock, amount: Optional[str], change: str) -> inventory.Taken:
    try:
        return inventory.draw_from(stock, amount, "amount", change=change)
    except inventory.BeyondHeld as exc:
        raise InvalidInput("amount", str(exc), amount) from None


def _record(session: Session, stock: Stock, kind: str, taken: inventory.Taken, actor_id: Optional[int],
            **links) -> StockMovement:
    movement = StockMovement(stock_id=stock.id, kind=kind, amount_text=taken.amount_text,
                             quantity_micro=taken.quantity_micro, element_mass_ug=dict(taken.element_mass_ug),
                             actor_id=actor_id, at=utcnow(), **links)
    session.add(movement)
    for change in taken.changes:
        change.movement = movement
    session.flush()
    return movement


def _density(stock: Stock) -> Optional[Decimal]:
    density = stock.density_g_per_ml or stock.substance.density_g_per_ml
    return None if density is None else Decimal(repr(density))


def _entry_amount(stock: Stock, container: WasteContainer, taken: inventory.Taken) -> dict[str, str]:
    """The waste entry's mass (solids container) or volume (liquid container) of what is taken."""
    density = _density(stock)
    if container.form == "solid":
        if stock.quantity_kind == "mass":
            return {"mass": f"{taken.quantity_micro} ug"}
        if density is None:
            raise InvalidInput("container_id", f"{stock.label} is kept by volume and has no density; "
                                               f"its mass for {container.label} cannot be known")
        return {"mass": f"{round_ug(Decimal(taken.quantity_micro) * density * 1000)} ug"}  # 1 µL × 1 g/mL = 1000 µg
    if stock.quantity_kind == "volume":
        ul = taken.quantity_micro
    elif density is None:
        raise InvalidInput("container_id", f"{stock.label} is kept by mass and has no density; "
                                           f"its volume for {container.label} cannot be known")
    else:
        ul = int((Decimal(taken.quantity_micro) / (density * 1000)).to_integral_value(ROUND_HALF_EVEN))
    if ul <= 0:
        raise InvalidInput("amount", f"below 1 µL of {stock.label}: too little to record in {container.label}")
    return {"volume": f"{ul} uL", "components": [{"substance_id": stock.substance_id, "volume": f"{ul} uL"}]}


def dispose(session: Session, stock_id: int, body: DisposeIn, actor_id: Optional[int], *,
            rules: Optional[LayeredRules] = None) -> StockMovement:
    """Put an amount of a stock (default: all of it) into a waste container of the stock's lab.

    The entry is added by ``waste.add_entry`` (container state, form, overfill and running totals);
    a solid goes into a solids container, a liquid into a liquid one, a gas into none.
    """
    stock = _lock(session, stock_id)
    # The container is locked before the stock changes: its entry then queues at the container and at the
    # audit chain's head in the order every entry does (the stock's changes, once flushed, take the head;
    # waiting for the container after that would close a cycle with an entry holding it).
    container = inventory.reference(session, WasteContainer, body.container_id, "container_id", lab_id=stock.lab_id,
                                    lock=True)
    state = stock.substance.state
    if state not in ("solid", "liquid"):
        raise InvalidInput("container_id", f"{stock.label} is a {state}; a {state} is not put into a waste container")
    if state != container.form:
        raise InvalidInput("container_id", f"{container.label} holds {container.form}s and {stock.label} is a "
                                           f"{state}: choose a container for {state}s")
    taken = _take(stock, body.amount, "disposed")
    entry_body = EntryIn.model_validate({
        "description": body.description, **_entry_amount(stock, container, taken),
        "elements": [{"element": e, "mass": f"{ug} ug"} for e, ug in taken.element_mass_ug.items() if ug],
    })
    try:
        entry = waste.add_entry(session, container.id, entry_body, actor_id, rules=rules)
    except Conflict as exc:  # overfilling, or the container is not open
        field = "amount" if exc.field in ("mass", "volume") else "container_id"
        raise Conflict(str(exc), field, body.amount if field == "amount" else body.container_id) from None
    return _record(session, stock, "dispose", taken, actor_id, waste_entry_id=entry.id, note=body.description)


def transfer(session: Session, stock_id: int, body: TransferIn, actor_id: Optional[int]) -> StockMovement:
    """Move an amount of a stock (default: all of it) to another lab as a new stock there.

    The new stock carries exactly the element masses taken (not recomputed from its formula).
    The receiving lab must be one the caller may use (for a researcher, a lab they belong to).
    """
    stock = _lock(session, stock_id)
    lab = inventory.reference(session, Lab, body.lab_id, "lab_id")
    if lab.id == stock.lab_id:
        raise InvalidInput("lab_id", f"{stock.label} is already in lab {lab.code}; a transfer goes to another lab",
                           body.lab_id)
    taken = _take(stock, body.amount, "transferred_out")
    unit = "mg" if stock.quantity_kind == "mass" else "mL"
    new_body = StockIn(label=body.label, substance_id=stock.substance_id, lab_id=lab.id, location_id=body.location_id,
                       amount=f"{Decimal(taken.quantity_micro) / 1000:f} {unit}", purity_percent=stock.purity_percent,
                       density_g_per_ml=stock.density_g_per_ml, opened_on=stock.opened_on, expires_on=stock.expires_on)
    received = inventory.create_stock(session, new_body, elements=taken.element_mass_ug, change="transferred_in")
    return _record(session, stock, "transfer", taken, actor_id, to_stock_id=received.id)


def ship(session: Session, stock_id: int, body: ShipIn, actor_id: Optional[int]) -> StockMovement:
    """Send an amount of a stock (default: all of it) out of the site."""
    stock = _lock(session, stock_id)
    taken = _take(stock, body.amount, "shipped")
    return _record(session, stock, "ship", taken, actor_id, destination=body.destination, note=body.note)


def movements_of(session: Session, stock: Stock, *, limit: Optional[int] = None, offset: int = 0) -> Page:
    """A page of the movements out of a stock and the transfer that brought it, in the order they were made."""
    query = (select(StockMovement).where(or_(StockMovement.stock_id == stock.id, StockMovement.to_stock_id == stock.id))
             .order_by(StockMovement.id))
    return paginate(session, query, limit, offset)


def list_movements(session: Session, *, lab_ids: Optional[set[int]] = None, kind: Optional[str] = None,
                   lab_id: Optional[int] = None, since: Optional[dt.datetime] = None,
                   until: Optional[dt.datetime] = None, limit: Optional[int] = None, offset: int = 0) -> Page:
    """A page of movements in the order they were made; a lab's are those out of its stocks and the
    transfers into it (``lab_ids`` limits a lab-scoped caller alike)."""
    source, target = aliased(Stock), aliased(Stock)
    query = (select(StockMovement).join(source, source.id == StockMovement.stock_id)
             .outerjoin(target, target.id == StockMovement.to_stock_id).order_by(StockMovement.id))
    if lab_ids is not None:
        wanted = sorted(lab_ids)
        query = query.where(or_(source.lab_id.in_(wanted), target.lab_id.in_(wanted)))
    if lab_id is not None:
        query = query.where(or_(source.lab_id == lab_id, target.lab_id == lab_id))
    if kind is not None:
        query = query.where(StockMovement.kind == kind)
    if since is not None:
        query = query.where(StockMovement.at >= since)
    if until is not None:
        query = query.where(StockMovement.at < until)
    return paginate(session, query, limit, offset)


@dataclass(frozen=True)
class History:
    """What changed a stock's element content, oldest first, with what each change links to.

    ``changes`` are its holding changes (one row per element); ``movements`` the movements they belong
    to (and the one that brought a transferred stock) by id; ``amounts`` the amount text of run draws
    (``run:<id>``) and mixture preparations (``mixture:<id>``); ``labels`` the labels of the mixtures,
    stocks and containers named (``mixture:<id>``, ``stock:<id>``, ``entry:<id>`` -> (container id, label)).
    """

    changes: list
    movements: dict
    amounts: dict
    labels: dict


def history_of(session: Session, stock: Stock) -> History:
    """The stock's history in a fixed number of queries (at most HISTORY_ROWS element rows, the latest)."""
    changes = list(reversed(session.scalars(
        select(HoldingChange).where(HoldingChange.stock_id == stock.id)
        .order_by(HoldingChange.id.desc()).limit(HISTORY_ROWS)).all()))
    moved = session.scalars(select(StockMovement).where(
        or_(StockMovement.stock_id == stock.id, StockMovement.to_stock_id == stock.id))).all()
    movements = {m.id: m for m in moved}
    amounts: dict = {}
    for run_id, text in session.execute(select(RunDraw.run_id, RunDraw.amount_text)
                                        .where(RunDraw.stock_id == stock.id).order_by(RunDraw.id)):
        amounts[f"run:{run_id}"] = f"{amounts[f'run:{run_id}']} + {text}" if f"run:{run_id}" in amounts else text
    labels: dict = {}
    for mixture_id, text, label in session.execute(
            select(MixtureComponent.mixture_id, MixtureComponent.amount_text, Mixture.label)
            .join(Mixture, Mixture.id == MixtureComponent.mixture_id)
            .where(MixtureComponent.source_stock_id == stock.id)):
        amounts[f"mixture:{mixture_id}"] = text
        labels[f"mixture:{mixture_id}"] = label
    others = {m.stock_id for m in moved} | {m.to_stock_id for m in moved if m.to_stock_id}
    for ident, label, lab_code in session.execute(select(Stock.id, Stock.label, Lab.code)
                                                  .join(Lab, Lab.id == Stock.lab_id).where(Stock.id.in_(others))):
        labels[f"stock:{ident}"] = f"{label} ({lab_code})"
    entries = [m.waste_entry_id for m in moved if m.waste_entry_id]
    if entries:
        for entry_id, container_id, label in session.execute(
                select(WasteEntry.id, WasteContainer.id, WasteContainer.label)
                .join(WasteContainer, WasteContainer.id == WasteEntry.container_id).where(WasteEntry.id.in_(entries))):
            labels[f"entry:{entry_id}"] = (container_id, label)
    return History(changes, movements, amounts, labels)
