"""A stock as its page shows it: the record, where it came from, and every change of its element content."""

from __future__ import annotations

from typing import Any

from service.present.serialize import stock as dump_stock
from service.store.movements import History
from service.store.models import Stock

__all__ = ["CHANGE_WORDS", "provenance", "history_rows", "stock_view"]

# What each holding change of a stock is called on its page.
CHANGE_WORDS = {
    "received": "received", "carried_over": "on hand when the record began", "product": "put in as a run's product",
    "drawn_by_run": "drawn by a run", "used_for_mixture": "used to prepare a mixture", "disposed": "disposed of",
    "transferred_out": "transferred to another lab", "transferred_in": "transferred from another lab",
    "shipped": "shipped out of the site", "corrected": "content corrected", "retired": "retired",
}


def provenance(record: Stock, history: History) -> dict[str, Any]:
    """Where the stock came from: a run's product, a transfer from another lab's stock, or received."""
    if record.origin_run_id is not None:
        return {"kind": "product", "run_id": record.origin_run_id}
    brought = [m for m in history.movements.values() if m.to_stock_id == record.id]
    if brought:
        source = brought[0]
        return {"kind": "transferred", "stock_id": source.stock_id, "at": source.at.isoformat(),
                "from": history.labels.get(f"stock:{source.stock_id}", f"stock {source.stock_id}")}
    return {"kind": "received"}


def history_rows(record: Stock, history: History) -> list[dict[str, Any]]:
    """One row per change (its element rows gathered), oldest first: when, what, the amount, the record it
    links to and the signed element masses (µg)."""
    rows: list[dict[str, Any]] = []
    index: dict[tuple, dict[str, Any]] = {}
    for change in history.changes:
        key = (change.at, change.kind, change.run_id, change.movement_id, change.into_mixture_id)
        row = index.get(key)
        if row is None:
            row = {"at": change.at.isoformat(), "kind": change.kind, "what": CHANGE_WORDS.get(change.kind, change.kind),
                   "amount": None, "run_id": change.run_id, "mixture_id": change.into_mixture_id,
                   "mixture": None, "container_id": None, "container": None, "stock_id": None, "stock": None,
                   "destination": None, "masses_ug": {}}
            _link(row, change, history)
            index[key] = row
            rows.append(row)
        row["masses_ug"][change.element] = row["masses_ug"].get(change.element, 0) + change.mass_ug
    return rows


def _link(row: dict[str, Any], change, history: History) -> None:
    if change.run_id is not None:
        row["amount"] = history.amounts.get(f"run:{change.run_id}")
    if change.into_mixture_id is not None:
        row["amount"] = history.amounts.get(f"mixture:{change.into_mixture_id}")
        row["mixture"] = history.labels.get(f"mixture:{change.into_mixture_id}")
    movement = history.movements.get(change.movement_id) if change.movement_id else None
    if movement is not None:
        row["amount"] = movement.amount_text
        row["destination"] = movement.destination
        if movement.waste_entry_id:
            row["container_id"], row["container"] = history.labels.get(f"entry:{movement.waste_entry_id}", (None, None))
        other = movement.stock_id if change.kind == "transferred_in" else movement.to_stock_id
        if other:
            row["stock_id"], row["stock"] = other, history.labels.get(f"stock:{other}")


def stock_view(record: Stock, history: History) -> dict[str, Any]:
    """The stock's JSON-ready record with its provenance and history."""
    return {**dump_stock(record), "provenance": provenance(record, history), "history": history_rows(record, history)}


