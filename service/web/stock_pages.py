"""A stock's page (element content, provenance, history) and the forms that add and correct stocks.

The forms are validated by the API's schemas (``StockIn``, ``StockPatch``) and saved by the store
functions the API calls (``inventory.create_stock``, ``update_stock``); an edit sends only the fields
that changed, so that an unchanged amount does not recompute a content that draws left exact.
"""

from __future__ import annotations

from typing import Optional

from flask import redirect, render_template, request, url_for
from pydantic import ValidationError

from service.auth import check_lab, current_user, lab_scope
from service.chem.units import MAX_AMOUNT_CHARS
from service.permissions import allowed
from service.present.stocks import stock_view
from service.schemas import StockIn, StockPatch
from service.store import inventory, movements
from service.store.db import get_session
from service.store.models import Lab, Location, Stock, Substance
from service.web import bp
from service.web.fields import REFUSALS, number, store_error, summary, text_or_none, validation_errors, whole
from service.web.pages import TRACKED

FIELDS = {"label": "Label", "substance_id": "Substance", "lab_id": "Lab", "location_id": "Location",
          "amount": "Amount", "purity_percent": "Purity (%)", "density_g_per_ml": "Density (g/mL)",
          "opened_on": "Opened on", "expires_on": "Expires on"}
EDITABLE = ("label", "location_id", "amount", "purity_percent", "density_g_per_ml", "opened_on", "expires_on")
DONE = {"created": "Stock added.", "saved": "Saved.", "dispose": "Disposed of into the waste container.",
        "transfer": "Transferred: a new stock in the receiving lab holds what left this one.",
        "ship": "Shipped out of the site."}


def visible_stock(ident: int) -> Stock:
    stock = inventory.get(get_session(), Stock, ident)
    check_lab(stock.lab_id)
    return stock


@bp.get("/stocks/<int:ident>", endpoint="stock")
def stock_page(ident: int):
    session = get_session()
    stock = visible_stock(ident)
    view = stock_view(stock, movements.history_of(session, stock))
    role = current_user().role
    moved = {e for row in view["history"] for e in row["masses_ug"]}
    return render_template(
        "pages/stock.html", stock=view, masses=[(e["element"], e["mass_ug"]) for e in view["elements"]],
        history_elements=[e for e in TRACKED if e in moved] or sorted(moved), notice=DONE.get(request.args.get("done", "")),
        location=session.get(Location, stock.location_id), lab=session.get(Lab, stock.lab_id),
        may_edit=allowed("web.stock_edit", role) and stock.retired_at is None,
        may_move=allowed("web.stock_move", role) and stock.retired_at is None and stock.quantity_micro > 0)


def _text(value) -> str:
    return "" if value is None else f"{value:g}" if isinstance(value, float) else str(value)


def _state_of(stock: Stock) -> dict[str, str]:
    return {"label": stock.label, "substance_id": str(stock.substance_id), "lab_id": str(stock.lab_id),
            "location_id": str(stock.location_id), "amount": stock.amount_text,
            "purity_percent": _text(stock.purity_percent), "density_g_per_ml": _text(stock.density_g_per_ml),
            "opened_on": _text(stock.opened_on), "expires_on": _text(stock.expires_on)}


def _body(state: dict[str, str], keys) -> dict:
    """The API's JSON body of the fields ``keys`` as typed (blank optional fields are null)."""
    convert = {"substance_id": whole, "lab_id": whole, "location_id": whole, "purity_percent": number,
               "density_g_per_ml": number}
    data = {}
    for key in keys:
        value = state.get(key, "")
        data[key] = convert[key](value) if key in convert else (value.strip() if key in ("label", "amount")
                                                                else text_or_none(value))
    if data.get("purity_percent") is None and "purity_percent" in data:
        data.pop("purity_percent")  # blank: the schema's default (100 %) on a new stock; unchanged on an edit
    return data


def _choices(session) -> dict:
    scope = lab_scope()
    labs = inventory.list_records(session, Lab, lab_ids=scope)
    places = inventory.list_records(session, Location, lab_ids=scope)
    codes = {lab.id: lab.code for lab in labs}
    return {
        "labs": [(str(lab.id), f"{lab.code} · {lab.name}") for lab in labs],
        "locations": [(str(p.id), f"{codes.get(p.lab_id, 'shared')} · {p.building} {p.room} · {p.storage}")
                      for p in places if p.kind == "storage"],
        "substances": [(str(s.id), f"{s.name} · {s.formula}")
                       for s in inventory.list_records(session, Substance)],
    }


def _render(state, stock: Optional[Stock] = None, errors=None, status: int = 200):
    errors = errors or {}
    return render_template("pages/stock_form.html", state=state, stock=stock, errors=errors,
                           summary=summary(errors, FIELDS), labels=FIELDS, amount_chars=MAX_AMOUNT_CHARS,
                           **_choices(get_session())), status


@bp.get("/stocks/new", endpoint="stock_new")
def stock_new():
    labs = inventory.list_records(get_session(), Lab, lab_ids=lab_scope(), limit=2)
    state = {key: "" for key in FIELDS}
    state.update(lab_id=str(labs[0].id) if len(labs) == 1 else "", purity_percent="100")
    return _render(state)


@bp.post("/stocks/new", endpoint="stock_create")
def stock_create():
    state = {key: request.form.get(key, "")[:2000] for key in FIELDS}
    session = get_session()
    try:
        body = StockIn.model_validate(_body(state, FIELDS))
        check_lab(body.lab_id)
        stock = inventory.create_stock(session, body)
    except ValidationError as exc:
        return _render(state, errors=validation_errors(exc), status=422)
    except REFUSALS as exc:
        session.rollback()
        return _render(state, errors=store_error(exc), status=422)
    return redirect(url_for("web.stock", ident=stock.id, done="created"), 303)


@bp.get("/stocks/<int:ident>/edit", endpoint="stock_edit")
def stock_edit(ident: int):
    stock = visible_stock(ident)
    return _render(_state_of(stock), stock)


@bp.post("/stocks/<int:ident>/edit", endpoint="stock_save")
def stock_save(ident: int):
    stock = visible_stock(ident)
    stored = _state_of(stock)
    state = {**stored, **{key: request.form.get(key, "")[:2000] for key in EDITABLE}}
    changed = [key for key in EDITABLE if state[key].strip() != stored[key]]
    session = get_session()
    try:
        body = StockPatch.model_validate(_body(state, changed))
        inventory.update_stock(session, stock, body)
    except ValidationError as exc:
        return _render(state, stock, errors=validation_errors(exc), status=422)
    except REFUSALS as exc:
        session.rollback()
        return _render(state, stock, errors=store_error(exc), status=422)
    return redirect(url_for("web.stock", ident=stock.id, done="saved"), 303)
