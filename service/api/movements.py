"""Stocks leaving the inventory: disposal into a waste container, transfer to another lab, shipment
out of the site; and the movements recorded."""

from __future__ import annotations

from flask import jsonify, request

from service import schemas
from service.api import bp
from service.api.inventory import json_body, page_answer
from service.api.responses import StockMovement as MovementAnswer
from service.appdata import active_rules
from service.auth import check_lab, current_user, lab_scope
from service.operations import operation
from service.present.serialize import movement
from service.store import inventory, movements
from service.store.db import get_session
from service.store.models import Stock


def _visible(ident: int) -> Stock:
    stock = inventory.get(get_session(), Stock, ident)
    check_lab(stock.lab_id)
    return stock


# action -> (body, store function, what it does)
MOVES = {
    "dispose": (schemas.DisposeIn, movements.dispose,
                "Put an amount of a stock (default: all of it) into a waste container of its lab, as a waste entry."),
    "transfer": (schemas.TransferIn, movements.transfer,
                 "Move an amount of a stock (default: all of it) to another lab, as a new stock there."),
    "ship": (schemas.ShipIn, movements.ship, "Send an amount of a stock (default: all of it) out of the site."),
}


def _move_view(body_model, move, summary: str):
    @operation(summary=summary, body=body_model, response=MovementAnswer, status=201, errors=(403, 409))
    def view(ident: int):
        body = json_body(body_model)
        _visible(ident)
        judged = {"rules": active_rules()} if move is movements.dispose else {}  # the area's clock follows an entry
        return jsonify(movement(move(get_session(), ident, body, current_user().id, **judged))), 201

    return view


for _action, (_body, _move, _summary) in MOVES.items():
    bp.add_url_rule(f"/stocks/<int:ident>/{_action}", f"{_action}_stock", _move_view(_body, _move, _summary),
                    methods=["POST"])


@bp.get("/stocks/<int:ident>/movements", endpoint="list_stock_movements_of_stock")
@operation(query=schemas.PageQuery, response=MovementAnswer, paged=True, errors=(403,))
def movements_of(ident: int):
    """One page of a stock's movements (and the transfer that brought it), in the order they were made."""
    query = schemas.PageQuery.model_validate(request.args.to_dict())
    page = movements.movements_of(get_session(), _visible(ident), limit=query.limit, offset=query.offset)
    return jsonify(page_answer(page, movement))


@bp.get("/stock_movements", endpoint="list_stock_movements")
@operation(query=schemas.MovementQuery, response=MovementAnswer, paged=True)
def list_movements():
    """One page of stock movements, optionally of one kind, of one lab (out of it or into it), within a time window."""
    query = schemas.MovementQuery.model_validate(request.args.to_dict())
    page = movements.list_movements(get_session(), lab_ids=lab_scope(), **query.model_dump())
    return jsonify(page_answer(page, movement))
