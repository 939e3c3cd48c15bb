"""Preparing a mixture from stocks (or recording one received as a solution) with a form.

The form becomes the API's ``MixtureIn`` body and is saved by ``inventory.create_mixture``, which
draws each component from its source in the same transaction. A component's source is typed as its
label and picked from a list, as in the procedure editor; a stock's substance is taken when the
substance is left blank. Rows left wholly blank are not part of the body.
"""

from __future__ import annotations

import re

from flask import redirect, render_template, request, url_for
from pydantic import ValidationError

from service.auth import check_lab, lab_scope
from service.chem.units import MAX_AMOUNT_CHARS
from service.schemas import MixtureIn
from service.store import inventory
from service.store.db import get_session
from service.store.models import Lab, Location, Stock, Substance
from service.web import bp
from service.web.editor import _source_index, _sources
from service.web.fields import REFUSALS, number, store_error, summary, text_or_none, validation_errors, whole

TOP = {"label": "Label", "name": "Name", "lab_id": "Lab", "location_id": "Location", "volume": "Volume",
       "density_g_per_ml": "Density (g/mL)", "prepared_on": "Prepared on", "expires_on": "Expires on",
       "received_as_solution": "Received as a solution", "components": "Components"}
PARTS = {"substance_id": "substance", "stated": "stated as", "value": "concentration", "source": "drawn from",
         "amount": "amount drawn"}
STATED = (("molarity", "molarity (mol/L)"), ("mass_fraction", "mass fraction (0–1)"),
          ("volume_fraction", "volume fraction (0–1)"))
FIRST_ROWS, MAX_ROWS = 3, 50
_ROW = re.compile(r"^components-(\d{1,2})-([a-z_]+)$")
_SOURCE = re.compile(r"^(stock|mixture):(\d{1,10})$")


def _state_from_form(form) -> dict:
    state = {key: form.get(key, "")[:2000] for key in TOP if key != "components"}
    rows: dict[int, dict[str, str]] = {}
    for key, value in form.items():
        found = _ROW.match(key)
        if found and found[2] in PARTS and int(found[1]) < MAX_ROWS:
            rows.setdefault(int(found[1]), {p: "" for p in PARTS})[found[2]] = value[:300]
    state["components"] = [rows[i] for i in sorted(rows)] or [{p: "" for p in PARTS}]
    return state


def _component(row: dict[str, str], sources: dict[str, str], session) -> tuple[dict, dict[str, str]]:
    item: dict = {"substance_id": whole(row["substance_id"])}
    stated, value = row["stated"], row["value"].strip()
    if stated and value:
        item[stated] = value if stated == "molarity" else number(value)
    typed = row["source"].strip()
    found = _SOURCE.match(typed) or _SOURCE.match(sources.get(typed.casefold(), ""))
    errors = {}
    if found:
        item[f"source_{found[1]}_id"] = int(found[2])
        if item["substance_id"] is None and found[1] == "stock":
            stock = session.get(Stock, int(found[2]))
            item["substance_id"] = stock.substance_id if stock is not None else None
    elif typed:
        errors["source"] = "Choose a stock or mixture from the list (type its label or substance)."
    if text_or_none(row["amount"]):
        item["amount"] = row["amount"].strip()
    return item, errors


def _body(state: dict) -> tuple[dict, list[int], dict[str, str]]:
    session = get_session()
    sources = _source_index(_sources(session))
    data = {key: text_or_none(state[key]) for key in ("prepared_on", "expires_on")}
    data.update(label=state["label"].strip(), name=state["name"].strip(), volume=state["volume"].strip(),
                lab_id=whole(state["lab_id"]), location_id=whole(state["location_id"]),
                density_g_per_ml=number(state["density_g_per_ml"]),
                received_as_solution=state["received_as_solution"] == "yes", components=[])
    kept = [i for i, row in enumerate(state["components"]) if any(v.strip() for v in row.values())]
    errors: dict[str, str] = {}
    for i in kept:
        item, problems = _component(state["components"][i], sources, session)
        data["components"].append(item)
        errors.update({f"components-{i}-{part}": message for part, message in problems.items()})
    return data, kept, errors


def _on_row(errors: dict[str, str], kept: list[int]) -> dict[str, str]:
    """Errors named by the body's component index, on the form's row and part."""
    out = {}
    for field, message in errors.items():
        found = re.match(r"^components-(\d+)(?:-([a-z_]+))?$", field)
        if found and int(found[1]) < len(kept):
            part = found[2] or "source"
            part = {"source_stock_id": "source", "source_mixture_id": "source", "molarity": "value",
                    "mass_fraction": "value", "volume_fraction": "value"}.get(part, part)
            field = f"components-{kept[int(found[1])]}-{part}"
        out.setdefault(field, message)
    return out


def _labels(state: dict) -> dict[str, str]:
    labels = {k: v for k, v in TOP.items() if k != "components"}
    for i in range(len(state["components"])):
        labels.update({f"components-{i}-{p}": f"Component {i + 1} {w}" for p, w in PARTS.items()})
    labels["components"] = TOP["components"]
    return labels


def _render(state: dict, errors=None, focus=None, status: int = 200):
    session = get_session()
    errors = errors or {}
    scope = lab_scope()
    codes = {lab.id: lab.code for lab in inventory.list_records(session, Lab, lab_ids=scope)}
    return render_template(
        "pages/mixture_form.html", state=state, errors=errors, summary=summary(errors, _labels(state)), top=TOP,
        focus=focus, stated=STATED, max_rows=MAX_ROWS, amount_chars=MAX_AMOUNT_CHARS, sources=_sources(session),
        labs=[(str(i), c) for i, c in codes.items()],
        locations=[(str(p.id), f"{codes.get(p.lab_id, 'shared')} · {p.building} {p.room} · {p.storage}")
                   for p in inventory.list_records(session, Location, lab_ids=scope) if p.kind == "storage"],
        substances=[(str(s.id), f"{s.name} · {s.formula}") for s in inventory.list_records(session, Substance)],
    ), status


@bp.get("/mixtures/new", endpoint="mixture_new")
def mixture_new():
    labs = inventory.list_records(get_session(), Lab, lab_ids=lab_scope(), limit=2)
    state = {key: "" for key in TOP if key != "components"}
    state["lab_id"] = str(labs[0].id) if len(labs) == 1 else ""
    state["components"] = [{p: "" for p in PARTS} for _ in range(FIRST_ROWS)]
    return _render(state)


@bp.post("/mixtures/new", endpoint="mixture_create")
def mixture_create():
    state = _state_from_form(request.form)
    if request.form.get("action") == "add-component":
        if len(state["components"]) < MAX_ROWS:
            state["components"].append({p: "" for p in PARTS})
        return _render(state, focus=f"components-{len(state['components']) - 1}-substance_id")
    session = get_session()
    data, kept, errors = _body(state)
    try:
        body = MixtureIn.model_validate(data)
        if errors:
            return _render(state, errors=errors, status=422)
        check_lab(body.lab_id)
        mixture = inventory.create_mixture(session, body)
    except ValidationError as exc:
        return _render(state, errors={**errors, **_on_row(validation_errors(exc), kept)}, status=422)
    except REFUSALS as exc:
        session.rollback()
        return _render(state, errors=_on_row(store_error(exc), kept), status=422)
    return redirect(url_for("web.mixtures", _anchor=f"mixture-{mixture.id}"), 303)
