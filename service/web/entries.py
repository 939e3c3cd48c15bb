"""Waste entries from the pages: choose a container, fill the entry form, check it, save it, reverse one.

The form becomes the JSON body the API takes (:class:`service.schemas.EntryIn`) and goes through the
same store functions: "Check" calls :func:`service.store.waste.check_entry`, which judges the entry as
:func:`~service.store.waste.add_entry` does and says what it would add (the milligrams of each element,
the room left) without writing; "Save entry" calls ``add_entry``. Every error, pydantic's or the store's,
is shown next to the field it names and summarised at the top. Numbers are typed as numbers with a unit
chosen beside them, so a phone shows its numeric keyboard. ``/waste/<id>/entry`` is the container's
stable address (its label's QR code opens it).
"""

from __future__ import annotations

import re
from typing import Optional

from flask import redirect, render_template, request, url_for
from pydantic import ValidationError
from werkzeug.exceptions import BadRequest

from service import vocab
from service.auth import check_lab, current_user, lab_scope
from service.chem.units import QuantityError
from service.errors import Conflict, InvalidInput
from service.present.runs import balance_elements
from service.present.waste import basis_note, dump_container
from service.appdata import active_rules
from service.schemas import EntryIn, ReverseIn
from service.store import inventory, runs, waste
from service.store.amounts import mg_text
from service.store.db import get_session
from service.store.models import Substance, WasteContainer
from service.web import bp
from service.web.fields import field_message, number
from service.web.waste import container_page

# Units offered beside each number (the first is the default); the number and the unit become "25 mL".
UNITS = {"volume": ("mL", "L"), "mass": ("g", "kg", "mg"), "el_mass": ("mg", "µg", "g"),
         "concentration": ("mg/L", "µg/mL", "µg/L", "g/L")}
ELEMENT_ROWS, COMPONENT_ROWS, MAX_ROWS = 3, 2, 30
_ROW = re.compile(r"^(elements|components)-(\d{1,2})-([a-z_]+)$")
_STORE_FIELD = re.compile(r"^(elements|components)\[(\d+)\](?:\.([a-z_]+))?")
_ELEMENT_FIELDS = ("element", "mass", "mass_unit", "concentration", "concentration_unit", "volume", "share_percent")
_COMPONENT_FIELDS = ("substance_id", "volume")
KINDS = {"liquid": "Liquid waste (solvents, aqueous)", "solid": "Solid waste (solids, sharps)"}


def _open_container(ident: int) -> WasteContainer:
    container = inventory.get(get_session(), WasteContainer, ident)
    check_lab(container.lab_id)
    return container


def _run_arg() -> Optional[int]:
    text = request.args.get("run", "")
    return int(text) if text.isascii() and text.isdigit() and len(text) <= 9 else None


# --- the form as typed -------------------------------------------------------------------------------


def _blank_state(run_id: Optional[int], elements: list[str]) -> dict:
    rows = [{**{f: "" for f in _ELEMENT_FIELDS}, "element": e} for e in elements]
    rows += [{f: "" for f in _ELEMENT_FIELDS} for _ in range(max(ELEMENT_ROWS - len(rows), 1))]
    return {"run_id": str(run_id or ""), "description": "", "amount": "", "amount_unit": "",
            "filterable_solids_percent": "", "elements": rows,
            "components": [{f: "" for f in _COMPONENT_FIELDS} for _ in range(COMPONENT_ROWS)]}


def _state_from_form(form) -> dict:
    state = {k: form.get(k, "") for k in ("run_id", "description", "amount", "amount_unit", "filterable_solids_percent")}
    found: dict[str, dict[int, dict]] = {"elements": {}, "components": {}}
    for key, value in form.items():
        match = _ROW.match(key)
        fields = _ELEMENT_FIELDS if match and match[1] == "elements" else _COMPONENT_FIELDS
        if match and match[3] in fields and int(match[2]) < MAX_ROWS:
            found[match[1]].setdefault(int(match[2]), {f: "" for f in fields})[match[3]] = value
    for name in found:
        state[name] = [found[name][i] for i in sorted(found[name])]
    return state


def _with_unit(number: str, unit: str, allowed: tuple[str, ...]) -> Optional[str]:
    """ "25" and "mL" -> "25 mL"; a text that carries its own unit goes on as typed, for the schema to judge."""
    number = number.strip()
    if not number:
        return None
    try:
        float(number)
    except ValueError:
        return number
    return f"{number} {unit if unit in allowed else allowed[0]}"


def _body(state: dict, container: WasteContainer) -> tuple[dict, dict[str, list[int]]]:
    """The EntryIn body the form describes and which form row each list item came from (blank rows left out)."""
    kind = "volume" if container.form == "liquid" else "mass"
    data: dict = {"description": state["description"], kind: _with_unit(state["amount"], state["amount_unit"], UNITS[kind])}
    run_id = state["run_id"].strip()
    if run_id:
        data["run_id"] = int(run_id) if run_id.isascii() and run_id.isdigit() and len(run_id) <= 10 else run_id
    if kind == "volume" and state["filterable_solids_percent"].strip():
        data["filterable_solids_percent"] = number(state["filterable_solids_percent"])
    kept = {"elements": [], "components": []}
    data["elements"] = []
    for i, row in enumerate(state["elements"]):
        if not any(row[f].strip() for f in ("mass", "concentration", "volume", "share_percent")):
            continue
        kept["elements"].append(i)
        item = {"element": row["element"]}
        for field, value in (("mass", _with_unit(row["mass"], row["mass_unit"], UNITS["el_mass"])),
                             ("concentration", _with_unit(row["concentration"], row["concentration_unit"],
                                                          UNITS["concentration"])),
                             ("volume", _with_unit(row["volume"], "mL", ("mL",))),
                             ("share_percent", number(row["share_percent"]))):
            if value is not None:
                item[field] = value
        data["elements"].append(item)
    data["components"] = []
    for i, row in enumerate(state["components"]):
        if not (row["substance_id"].strip() or row["volume"].strip()):
            continue
        kept["components"].append(i)
        sid = row["substance_id"].strip()
        data["components"].append({"substance_id": int(sid) if sid.isdigit() and len(sid) <= 10 else (sid or None),
                                   "volume": _with_unit(row["volume"], "mL", ("mL",))})
    return data, kept


def _field_of(loc: tuple, kept: dict[str, list[int]]) -> str:
    """The form field a body location names: ('elements', 1, 'mass') -> elements-<row>-mass."""
    head = str(loc[0]) if loc else "form"
    if head in ("volume", "mass"):
        return "amount"
    if head not in kept:
        return head
    if len(loc) < 2 or not isinstance(loc[1], int) or loc[1] >= len(kept[head]):
        return head
    row = kept[head][loc[1]]
    return f"{head}-{row}-{loc[2]}" if len(loc) > 2 else f"{head}-{row}"


def _store_field(exc: Exception, kept) -> tuple[str, str]:
    field = getattr(exc, "field", None) or "form"
    found = _STORE_FIELD.match(field)
    loc = tuple(x for x in (found[1], int(found[2]), found[3]) if x is not None) if found else (field,)
    message = getattr(exc, "reason", None) or str(exc)
    return _field_of(loc, kept), message[:1].upper() + message[1:]


def _judged(state: dict, container: WasteContainer, save: bool):
    """Check or save the form: (the check or the saved entry, errors by field, HTTP status)."""
    data, kept = _body(state, container)
    try:
        body = EntryIn.model_validate(data)
    except ValidationError as exc:
        errors: dict[str, str] = {}
        for err in exc.errors():
            errors.setdefault(_field_of(tuple(err["loc"]), kept), field_message(err))
        return None, errors, 422
    session = get_session()
    try:
        if save:
            return waste.add_entry(session, container.id, body, current_user().id,
                                   balance_elements=balance_elements(), rules=active_rules()), {}, 201
        return waste.check_entry(session, container.id, body, balance_elements=balance_elements()), {}, 200
    except (InvalidInput, QuantityError, Conflict) as exc:
        session.rollback()
        field, message = _store_field(exc, kept)
        return None, {field: message}, 409 if isinstance(exc, Conflict) else 422


def _check_view(check: waste.EntryCheck) -> dict:
    form = check.container.form
    return {"amount": waste.room_text(check.amount_micro, form),
            "room_after": waste.room_text(check.room_micro - check.amount_micro, form),
            "elements": [{"element": e.element, "mg": mg_text(e.mass_ug), "note": basis_note(e.basis)}
                         for e in sorted(check.elements, key=lambda e: e.element)]}


# --- pages ------------------------------------------------------------------------------------------


def _runs(container: WasteContainer) -> list[dict]:
    """The open runs of the container's lab, each with what its balance still leaves per element."""
    session = get_session()
    rows = []
    for run in runs.list_runs(session, lab_ids={container.lab_id}, state="open", limit=100):
        left = runs.remaining_ug(session, run, balance_elements())
        rows.append({"id": run.id, "left": [(s, mg_text(ug)) for s, ug in left.items() if ug > 0]})
    return rows


def _render(container: WasteContainer, state: dict, *, errors=None, check=None, status: int = 200):
    errors = errors or {}
    order = ["run_id", "description", "amount", "filterable_solids_percent", "elements", "components"]
    summary = sorted(errors.items(), key=lambda kv: next((i for i, p in enumerate(order) if kv[0].startswith(p)), 99))
    substances = inventory.list_records(get_session(), Substance)
    return render_template(
        "pages/entry.html", container=dump_container(container), state=state, errors=errors, summary=summary,
        check=_check_view(check) if check is not None else None, runs=_runs(container), units=UNITS,
        elements=vocab.TRACKED_ELEMENTS, substances=[(str(s.id), s.name) for s in substances],
        kind="volume" if container.form == "liquid" else "mass"), status


@bp.get("/waste/entry", endpoint="waste_entry_choose")
def choose_container():
    """Which container: the open ones the user may fill, of the kind chosen (liquid or solid)."""
    kind = request.args.get("kind", "")
    found = waste.list_containers(get_session(), lab_ids=lab_scope(), state="open", limit=200)
    shown = [dump_container(c) for c in found if not kind or c.form == kind]
    return render_template("pages/entry_choose.html", containers=shown, kinds=KINDS,
                           kind=kind if kind in KINDS else "", run_id=_run_arg())


@bp.get("/waste/<int:ident>/entry", endpoint="waste_entry")
@bp.get("/containers/<int:ident>/entry", endpoint="waste_entry")  # the address a label's QR code carries
def entry_form(ident: int):
    container = _open_container(ident)
    run_id = _run_arg()
    left = next((r["left"] for r in _runs(container) if r["id"] == run_id), [])
    return _render(container, _blank_state(run_id, [s for s, _ in left]))


@bp.post("/waste/<int:ident>/entry", endpoint="waste_entry_submit")
def entry_submit(ident: int):
    container = _open_container(ident)
    state = _state_from_form(request.form)
    action = request.form.get("action", "save")
    if action == "add-element" and len(state["elements"]) < MAX_ROWS:
        state["elements"].append({f: "" for f in _ELEMENT_FIELDS})
        return _render(container, state)
    if action == "add-component" and len(state["components"]) < MAX_ROWS:
        state["components"].append({f: "" for f in _COMPONENT_FIELDS})
        return _render(container, state)
    if action not in ("check", "save"):
        raise BadRequest(f"unknown action {action[:40]!r}")
    result, errors, status = _judged(state, container, save=action == "save")
    if errors:
        return _render(container, state, errors=errors, status=status)
    if action == "check":
        return _render(container, state, check=result)
    return redirect(url_for("web.container", ident=container.id, done="entry", entry=result.id) + "#entries", 303)


@bp.post("/waste/<int:ident>/entries/<int:entry_id>/reverse", endpoint="waste_entry_reverse")
def entry_reverse(ident: int, entry_id: int):
    """Reverse an entry with a reason; a refusal shows the container page with the reason at that entry."""
    container = _open_container(ident)
    reason = request.form.get("reason", "")
    try:
        body = ReverseIn.model_validate({"reason": reason})
        waste.reverse_entry(get_session(), container.id, entry_id, body.reason, current_user().id,
                            rules=active_rules())
    except ValidationError as exc:
        return container_page(ident, refusal={"entry": entry_id, "field": "reason", "reason": reason,
                                              "message": field_message(exc.errors()[0])}, status=422)
    except (InvalidInput, Conflict) as exc:
        get_session().rollback()
        return container_page(ident, refusal={"entry": entry_id, "field": "reason", "reason": reason,
                                              "message": str(exc)}, status=409 if isinstance(exc, Conflict) else 422)
    return redirect(url_for("web.container", ident=container.id, done="reversed") + "#entries", 303)
