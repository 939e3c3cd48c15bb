"""Disposing of, transferring and shipping a stock from its page, each confirmed before it is made.

"Review" makes the movement with the store function the API calls (``movements.dispose``,
``transfer``, ``ship``) inside the request's transaction and rolls it back: the confirmation shows
exactly the element masses the store would record, and any refusal (a container of the wrong form,
an overfill, more than the stock holds) next to its field before anything is stored. "Confirm" makes
it again, for real, from the same fields.
"""

from __future__ import annotations

from flask import abort, redirect, render_template, request, url_for
from pydantic import ValidationError

from service.appdata import active_rules
from service.auth import current_user, lab_scope
from service.chem.units import MAX_AMOUNT_CHARS
from service.present.serialize import movement as dump_movement
from service.schemas import DisposeIn, ShipIn, TransferIn
from service.store import inventory, movements, waste
from service.store.db import get_session
from service.store.models import Lab, Location, Stock, WasteContainer, WasteEntry
from service.web import bp
from service.web.fields import REFUSALS, store_error, summary, text_or_none, validation_errors, whole
from service.web.stock_pages import visible_stock

# kind -> (body, store function, the form's fields with their labels, the heading, the confirm button's verb)
KINDS = {
    "dispose": (DisposeIn, movements.dispose,
                {"container_id": "Waste container", "amount": "Amount", "description": "Description"},
                "Dispose of {label} into waste", "Dispose of"),
    "transfer": (TransferIn, movements.transfer,
                 {"lab_id": "Receiving lab", "location_id": "Location there", "label": "New label", "amount": "Amount"},
                 "Transfer {label} to another lab", "Transfer"),
    "ship": (ShipIn, movements.ship, {"destination": "Destination", "amount": "Amount", "note": "Note"},
             "Ship {label} out of the site", "Ship"),
}
_IDS = ("container_id", "lab_id", "location_id")


def _kind(kind: str):
    if kind not in KINDS:
        abort(404)
    return KINDS[kind]


def _body(kind: str, state: dict[str, str]) -> dict:
    data = {}
    for key in KINDS[kind][2]:
        value = state.get(key, "")
        if key in _IDS:
            data[key] = whole(value)
        elif key in ("amount", "note"):
            if text_or_none(value) is not None:  # blank amount: all the stock holds
                data[key] = value.strip()
        else:
            data[key] = value.strip()
    return data


def _choices(stock: Stock) -> dict:
    """The containers a disposal may go into (open, of the stock's lab, of its form), the labs and places
    a transfer may go to."""
    session = get_session()
    form = stock.substance.state
    containers = [c for c in waste.list_containers(session, lab_ids={stock.lab_id}, state="open") if c.form == form]
    labs = [lab for lab in inventory.list_records(session, Lab, lab_ids=lab_scope()) if lab.id != stock.lab_id]
    codes = {lab.id: lab.code for lab in labs}
    places = [p for p in inventory.list_records(session, Location, lab_ids=lab_scope())
              if p.kind == "storage" and p.lab_id != stock.lab_id]
    return {
        "containers": [(str(c.id), f"{c.label} · {c.stream.replace('_', ' ')} · {c.form}") for c in containers],
        "form": form,
        "labs": [(str(lab.id), f"{lab.code} · {lab.name}") for lab in labs],
        "locations": [(str(p.id), f"{codes.get(p.lab_id, 'shared')} · {p.building} {p.room} · {p.storage}")
                      for p in places],
    }


def _render(stock: Stock, kind: str, state: dict, *, errors=None, preview=None, status: int = 200):
    errors = errors or {}
    _, _, labels, heading, verb = KINDS[kind]
    return render_template("pages/stock_move.html", stock=stock, kind=kind, state=state, errors=errors,
                           summary=summary(errors, labels), labels=labels, heading=heading.format(label=stock.label),
                           verb=verb, preview=preview, amount_chars=MAX_AMOUNT_CHARS, **_choices(stock)), status


def _make(kind: str, stock_id: int, state: dict):
    """The movement made through the store (its body validated by the API's schema)."""
    model, move, _, _, _ = KINDS[kind]
    body = model.model_validate(_body(kind, state))
    judged = {"rules": active_rules()} if move is movements.dispose else {}  # the area's clock follows an entry
    return move(get_session(), stock_id, body, current_user().id, **judged)


def _preview(kind: str, made) -> dict:
    """What the confirmation shows of a movement made and about to be rolled back."""
    session = get_session()
    shown = dump_movement(made)
    shown["masses"] = [(row["element"], row["mass_ug"]) for row in shown["elements"]]
    if made.waste_entry_id:
        container = session.get(WasteContainer, session.get(WasteEntry, made.waste_entry_id).container_id)
        shown["container"] = container.label
    if made.to_stock_id:
        received = session.get(Stock, made.to_stock_id)
        shown["new_stock"] = {"label": received.label, "lab": session.get(Lab, received.lab_id).code}
    return shown


@bp.get("/stocks/<int:ident>/dispose", endpoint="stock_move", defaults={"kind": "dispose"})
@bp.get("/stocks/<int:ident>/transfer", endpoint="stock_move", defaults={"kind": "transfer"})
@bp.get("/stocks/<int:ident>/ship", endpoint="stock_move", defaults={"kind": "ship"})
def stock_move(ident: int, kind: str):
    _kind(kind)
    stock = visible_stock(ident)
    return _render(stock, kind, {key: "" for key in KINDS[kind][2]})


@bp.post("/stocks/<int:ident>/dispose", endpoint="stock_move_submit", defaults={"kind": "dispose"})
@bp.post("/stocks/<int:ident>/transfer", endpoint="stock_move_submit", defaults={"kind": "transfer"})
@bp.post("/stocks/<int:ident>/ship", endpoint="stock_move_submit", defaults={"kind": "ship"})
def stock_move_submit(ident: int, kind: str):
    _, _, labels, _, _ = _kind(kind)
    stock = visible_stock(ident)
    state = {key: request.form.get(key, "")[:2000] for key in labels}
    action = request.form.get("action", "review")
    if action == "change":
        return _render(stock, kind, state)
    session = get_session()
    try:
        made = _make(kind, stock.id, state)
        if action != "confirm":
            preview = _preview(kind, made)
            session.rollback()  # a review stores nothing
            return _render(visible_stock(ident), kind, state, preview=preview)
    except ValidationError as exc:
        return _render(stock, kind, state, errors=validation_errors(exc), status=422)
    except REFUSALS as exc:
        session.rollback()
        return _render(visible_stock(ident), kind, state, errors=store_error(exc), status=422)
    return redirect(url_for("web.stock", ident=stock.id, done=kind), 303)
