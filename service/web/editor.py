"""The procedure editor: a new procedure or an edit, as a form of flat, index-numbered fields.

The form becomes the body the JSON API takes, validated with the same schemas (``ProcedureIn``,
``ProcedurePatch``) and saved by the same store functions; every error, whether pydantic's or the
store's, is shown next to the field it names. "Check" judges the form without storing anything.
Row buttons (add, remove, move up or down) work without JavaScript as submit buttons;
``static/editor.js`` does the same in the page and refreshes the check panel as one types.
"""

from __future__ import annotations

import re
from typing import Optional, get_args

from flask import redirect, render_template, request, url_for
from pydantic import ValidationError
from werkzeug.exceptions import BadRequest

from service import vocab
from service.appdata import active_rules
from service.auth import check_lab, current_user, lab_scope
from service.chem.units import MAX_AMOUNT_CHARS, QuantityError
from service.errors import Conflict, InvalidInput
from service.present.procedures import CAUTION
from service.present.serialize import element_rows_from, finding
from service.schemas import ID_MAX, Atmosphere, Operation, ProcedureIn, ProcedurePatch
from service.store import inventory, procedures
from service.store.db import get_session
from service.store.models import Lab, Mixture, Procedure, Stock
from service.web import bp
from service.web.fields import field_message, number, whole
from service.web.pages import TRACKED

# The rows of the form: form name -> (fields, the body's key, the word in buttons and labels, most rows).
ROWS = {
    "steps": (("operation", "temperature_c", "atmosphere", "duration_min", "note"), "steps", "step", 200),
    "draws": (("source", "amount", "step"), "draws", "draw", 200),
    "waste": (("stream", "contents", "expected_amount"), "waste_plan", "waste", 50),
}
_BODY_KEYS = {key: name for name, (_, key, _, _) in ROWS.items()}
_NOUNS = {noun: name for name, (_, _, noun, _) in ROWS.items()}
TOP_FIELDS = ("title", "lab_id", "summary", "scale")
SCALES = (1.0, 2.0, 5.0, 10.0)  # the scale-up preview

_LABELS = {"title": "Title", "lab_id": "Lab", "summary": "Summary", "scale": "Scale (batches)",
           "steps": "Steps", "draws": "Draws", "waste": "Waste plan"}
_ROW_LABELS = {
    "operation": "operation", "temperature_c": "temperature (°C)", "atmosphere": "atmosphere",
    "duration_min": "duration (min)", "note": "note", "source": "stock or mixture", "amount": "amount",
    "step": "added at step",
    "stream": "stream", "contents": "contents", "expected_amount": "expected amount",
}
_ROW_KEY = re.compile(r"^(steps|draws|waste)-(\d{1,4})-([a-z_]+)$")
_ACTION = re.compile(r"^(add|remove|up|down)-(step|draw|waste)(?:-(\d{1,4}))?$")
_SOURCE = re.compile(r"^(stock|mixture):(\d{1,10})$")
_STORE_FIELD = re.compile(r"^(steps|draws|waste_plan)\[(\d+)\]\.([a-z_]+)$")


def label_of(field: str) -> str:
    """What a person calls a form field: "Step 2 temperature (°C)" for ``steps-1-temperature_c``."""
    found = _ROW_KEY.match(field)
    if found:
        name, index, part = found.groups()
        return f"{ROWS[name][2].capitalize()} {int(index) + 1} {_ROW_LABELS.get(part, part)}"
    return _LABELS.get(field, field)


def _order(field: str) -> tuple:
    found = _ROW_KEY.match(field)
    if found:
        name, index, part = found.groups()
        fields = ROWS[name][0]
        return (len(TOP_FIELDS), list(ROWS).index(name), int(index), fields.index(part) if part in fields else 99)
    if field in ROWS:
        return (len(TOP_FIELDS), list(ROWS).index(field), -1, -1)
    return (TOP_FIELDS.index(field) if field in TOP_FIELDS else len(TOP_FIELDS) + 1, 0, 0, 0)


# --- the form as it came --------------------------------------------------------------------------


def _blank(name: str) -> dict[str, str]:
    return {field: "" for field in ROWS[name][0]}


def _state_from_form(form) -> dict:
    """The form as typed: top fields and rows (in index order, renumbered from 0), all text."""
    state = {key: form.get(key, "") for key in TOP_FIELDS}
    found: dict[str, dict[int, dict[str, str]]] = {name: {} for name in ROWS}
    for key, value in form.items():
        match = _ROW_KEY.match(key)
        if match and match[3] in ROWS[match[1]][0]:
            found[match[1]].setdefault(int(match[2]), _blank(match[1]))[match[3]] = value
    for name in ROWS:
        state[name] = [found[name][i] for i in sorted(found[name])]
    return state


def _text(value) -> str:
    return "" if value is None else f"{value:g}" if isinstance(value, float) else str(value)


def _state_of(proc: Procedure) -> dict:
    """A stored procedure as the form shows it."""
    return {
        "title": proc.title, "lab_id": str(proc.lab_id), "summary": proc.summary or "", "scale": _text(proc.scale),
        "steps": [{f: _text(getattr(s, f)) for f in ROWS["steps"][0]} for s in proc.steps],
        "draws": [{"source": f"stock:{d.stock_id}" if d.stock_id is not None else f"mixture:{d.mixture_id}",
                   "amount": d.amount_text, "step": "" if d.step is None else str(d.step + 1)}  # people count from 1
                  for d in proc.draws],
        "waste": [{f: _text(getattr(w, f)) for f in ROWS["waste"][0]} for w in proc.waste_plan],
    }


def _row_action(state: dict, verb: str, noun: str, index: Optional[str]) -> Optional[str]:
    """Add, remove or move a row of ``state``; returns the id of the field to focus next."""
    name = _NOUNS[noun]
    rows, first = state[name], ROWS[name][0][0]
    if verb == "add":
        if len(rows) >= ROWS[name][3]:
            return f"add-{noun}"
        rows.append(_blank(name))
        return f"{name}-{len(rows) - 1}-{first}"
    i = int(index) if index is not None else len(rows)
    if i >= len(rows):
        return None
    if verb == "remove":
        rows.pop(i)
        return f"{name}-{i - 1}-{first}" if i > 0 else (f"{name}-0-{first}" if rows else f"add-{noun}")
    j = i - 1 if verb == "up" else i + 1
    if 0 <= j < len(rows):
        rows[i], rows[j] = rows[j], rows[i]
        return f"{verb}-{noun}-{j}"
    return f"{verb}-{noun}-{i}"


# --- the form as the API's body -----------------------------------------------------------------


def _or_none(text: str) -> Optional[str]:
    return text if text.strip() else None


def _source_index(sources: list[tuple[str, str]]) -> dict[str, str]:
    """Typed text (case ignored) -> option value: the record's label, the whole option text, or a
    substance or solution name that only one of the records has."""
    index: dict[str, str] = {}
    names: dict[str, set[str]] = {}
    for value, text in sources:
        label, name, _ = (text.split(" · ", 2) + ["", ""])[:3]
        for key in (text.casefold(), label.casefold()):
            # a label two records share (a stock and a mixture, or labels differing only in case) picks
            # neither: the person chooses from the list
            index[key] = value if index.get(key, value) == value else ""
        names.setdefault(name.casefold(), set()).add(value)
    for name, values in names.items():
        if len(values) == 1:
            index.setdefault(name, values.pop())
    return index


def _body(state: dict, sources: dict[str, str]) -> tuple[dict, dict[str, list[int]], dict[str, str]]:
    """The JSON body the form describes, which form row each list item came from, and errors found on the way.

    Rows left wholly blank are not part of the body.
    """
    data: dict = {"title": state["title"]}
    lab_id, scale = whole(state["lab_id"]), number(state["scale"])
    if lab_id is not None:
        data["lab_id"] = lab_id
    if scale is not None:
        data["scale"] = scale
    data["summary"] = _or_none(state["summary"])
    kept: dict[str, list[int]] = {}
    errors: dict[str, str] = {}
    for name, (fields, key, _, _) in ROWS.items():
        kept[name] = [i for i, row in enumerate(state[name]) if any(row[f].strip() for f in fields)]
        items = []
        for i in kept[name]:
            row = state[name][i]
            if name == "steps":
                item = {"temperature_c": number(row["temperature_c"]), "duration_min": number(row["duration_min"]),
                        "atmosphere": _or_none(row["atmosphere"]), "note": _or_none(row["note"])}
                if row["operation"].strip():
                    item["operation"] = row["operation"]
            elif name == "draws":
                item = {"amount": row["amount"]}
                step = whole(row["step"])
                if isinstance(step, int) and step >= 1:
                    item["step"] = step - 1  # the form counts steps from 1, the body from 0
                elif step is not None:
                    errors[f"draws-{i}-step"] = "Give the number of a step (from 1), or leave it empty for the start."
                typed = row["source"].strip()
                found = _SOURCE.match(typed) or _SOURCE.match(sources.get(typed.casefold(), ""))
                if found:
                    item[f"{found[1]}_id"] = int(found[2])
                else:
                    errors[f"draws-{i}-source"] = ("Choose a stock or mixture from the list (type its label or "
                                                   "substance)" if typed else "Choose a stock or mixture.")
            else:
                item = {"stream": row["stream"], "contents": row["contents"],
                        "expected_amount": _or_none(row["expected_amount"])}
            items.append(item)
        data[key] = items
    return data, kept, errors


def _field_of(loc: tuple, kept: dict[str, list[int]]) -> str:
    """The form field a body location names: ('steps', 1, 'temperature_c') -> steps-<row>-temperature_c."""
    name = _BODY_KEYS.get(loc[0]) if loc else None
    if name is None:
        return str(loc[0]) if loc else "form"
    if len(loc) < 2 or not isinstance(loc[1], int) or loc[1] >= len(kept[name]):
        return name
    row = kept[name][loc[1]]
    part = loc[2] if len(loc) > 2 else None
    if name == "draws" and part in (None, "stock_id", "mixture_id"):
        part = "source"
    return f"{name}-{row}-{part or ROWS[name][0][0]}"




def _validation_errors(exc: ValidationError, kept) -> dict[str, str]:
    out: dict[str, str] = {}
    for err in exc.errors():
        out.setdefault(_field_of(tuple(err["loc"]), kept), field_message(err))
    return out


def _store_error(exc: Exception, kept) -> dict[str, str]:
    """An InvalidInput or QuantityError of the store on its field ("draws[2].amount" -> draws-<row>-amount)."""
    field = getattr(exc, "field", None) or "form"
    found = _STORE_FIELD.match(field)
    loc = (found[1], int(found[2]), found[3]) if found else (field,)
    message = getattr(exc, "reason", None) or str(exc).split(": ", 1)[-1]
    target = _field_of(loc, kept)
    if target.endswith("-source"):
        message += " in this procedure's lab"  # the store answers another lab's record as a missing one
    return {target: message[:1].upper() + message[1:]}


def _validated(model, data: dict, kept, errors: dict[str, str]):
    try:
        body = model.model_validate(data)
    except ValidationError as exc:
        for field, message in _validation_errors(exc, kept).items():
            errors.setdefault(field, message)
        return None
    return None if errors else body


# --- judging and saving -------------------------------------------------------------------------------


def _judge(state: dict, proc: Optional[Procedure]) -> tuple[Optional[dict], dict[str, str]]:
    """Element masses, findings and the scale-up preview of the form as it stands; nothing is stored."""
    session = get_session()
    data, kept, errors = _body(state, _source_index(_sources(session)))
    if proc is not None:
        data["lab_id"] = proc.lab_id
    body = _validated(ProcedureIn, data, kept, errors)
    if body is None:
        return None, errors
    check_lab(body.lab_id)
    try:
        draft = procedures.unsaved_procedure(session, body, family_id=proc.family_id if proc is not None else None)
    except (InvalidInput, QuantityError) as exc:
        return None, _store_error(exc, kept)
    rules = active_rules()
    rows = procedures.preview(session, draft, rules, [body.scale, *SCALES])
    (_, level, masses, found), scaled = rows[0], rows[1:]
    shown = [s for s in TRACKED if any(m.get(s) for _, _, m, _ in rows)]
    return {
        "scale": body.scale, "highest_level": level, "elements": shown,
        "masses": [r for r in element_rows_from(masses) if r["element"] in shown],
        "findings": [finding(f) for f in found],
        "scales": [{"scale": s, "highest_level": lvl, "masses": m} for s, lvl, m, _ in scaled],
        "caution": CAUTION, "rule_packs": [{"pack": n, "version": v} for n, v in rules.packs],
    }, {}


def _save(state: dict, proc: Optional[Procedure]):
    """Create or edit through the store; a redirect to the procedure, or the errors by field."""
    session = get_session()
    data, kept, errors = _body(state, _source_index(_sources(session)))
    try:
        if proc is None:
            body = _validated(ProcedureIn, data, kept, errors)
            if body is None:
                return errors
            check_lab(body.lab_id)
            saved, done = procedures.create_procedure(session, body, current_user()), "created"
        else:
            data.pop("lab_id", None)  # a procedure stays in its lab
            body = _validated(ProcedurePatch, data, kept, errors)
            if body is None:
                return errors
            saved, created = procedures.update_procedure(session, proc, body)
            done = "revision" if created else "saved"
    except (InvalidInput, QuantityError) as exc:
        session.rollback()  # nothing of a half-applied edit stays
        return _store_error(exc, kept)
    return redirect(url_for("web.procedure", ident=saved.id, done=done), 303)


def _sources(session) -> list[tuple[str, str]]:
    """The stocks and mixtures the user may draw from: ("stock:12", "CdO-01 · cadmium oxide · 5.000 g")."""
    scope = lab_scope()
    stocks = inventory.list_records(session, Stock, lab_ids=scope)
    mixtures = inventory.list_records(session, Mixture, lab_ids=scope)
    return ([(f"stock:{s.id}", f"{s.label} · {s.substance.name} · {s.amount_text}") for s in stocks]
            + [(f"mixture:{m.id}", f"{m.label} · {m.name} · {m.volume_text}") for m in mixtures])


def _render(state: dict, proc: Optional[Procedure] = None, *, errors=None, live=None, focus=None,
            problem: Optional[str] = None, status: int = 200):
    session = get_session()
    errors = errors or {}
    sources = _sources(session)
    labs = inventory.list_records(session, Lab, lab_ids=lab_scope())
    page = render_template(
        "pages/editor.html", state=state, proc=proc, errors=errors, live=live, focus=focus, problem=problem,
        summary=[(f, label_of(f), errors[f]) for f in sorted(errors, key=_order)], label=label_of,
        nouns={name: noun for name, (_, _, noun, _) in ROWS.items()}, row_labels=_ROW_LABELS,
        labs=[(str(lab.id), f"{lab.code} · {lab.name}") for lab in labs], sources=sources,
        source_names=dict(sources), operations=get_args(Operation), atmospheres=get_args(Atmosphere),
        streams=[s.replace("_", " ") for s in vocab.STREAMS], amount_chars=MAX_AMOUNT_CHARS,
    )
    return page, status


def _editable(ident: int) -> Procedure:
    proc = inventory.get(get_session(), Procedure, ident)
    check_lab(proc.lab_id)
    if proc.state not in procedures.EDITABLE and proc.state != "approved":
        raise Conflict(f"a {proc.state.replace('_', ' ')} procedure cannot be edited; only a draft, one with "
                       "changes requested, or an approved one (as a new revision)", "state", proc.state)
    return proc


def _without_inner_blanks(state: dict) -> dict:
    """The form without wholly blank rows that stand before a filled one (trailing blank rows stay)."""
    out = dict(state)
    for name, (fields, _, _, _) in ROWS.items():
        rows = state[name]
        filled = [i for i, row in enumerate(rows) if any(row[f].strip() for f in fields)]
        if filled:
            out[name] = [row for i, row in enumerate(rows) if i in filled or i > filled[-1]]
    return out


def _submit(proc: Optional[Procedure]):
    state = _state_from_form(request.form)
    action = request.form.get("action", "save")
    row = _ACTION.match(action)
    if row:
        return _render(state, proc, focus=_row_action(state, *row.groups()))
    if action == "check":
        state = _without_inner_blanks(state)  # so the findings' "step N" is the row the page numbers N
        live, errors = _judge(state, proc)
        return _render(state, proc, errors=errors, live=live, status=422 if errors else 200)
    if action != "save":
        raise BadRequest(f"unknown action {action[:40]!r}")
    try:
        answer = _save(state, proc)
    except Conflict as exc:  # e.g. an approved procedure that already has an open revision
        get_session().rollback()
        return _render(state, proc, problem=str(exc), status=409)
    if isinstance(answer, dict):
        return _render(state, proc, errors=answer, focus="error-summary", status=422)
    return answer


@bp.get("/procedures/new", endpoint="procedure_new")
def procedure_new():
    labs = inventory.list_records(get_session(), Lab, lab_ids=lab_scope(), limit=2)
    state = {"title": "", "lab_id": str(labs[0].id) if len(labs) == 1 else "", "summary": "", "scale": "1",
             **{name: [_blank(name)] for name in ROWS}}
    return _render(state)


@bp.post("/procedures/new", endpoint="procedure_create")
def procedure_create():
    return _submit(None)


@bp.get("/procedures/<int:ident>/edit", endpoint="procedure_edit")
def procedure_edit(ident: int):
    proc = _editable(ident)
    state = _state_of(proc)
    live, _ = _judge(state, proc)
    return _render(state, proc, live=live)


@bp.post("/procedures/<int:ident>/edit", endpoint="procedure_save")
def procedure_save(ident: int):
    return _submit(_editable(ident))


@bp.post("/procedures/check", endpoint="procedure_check")
def procedure_check():
    """The check panel alone (masses, findings, scale-up preview) for the form as sent; nothing is stored."""
    ident = whole(request.form.get("procedure_id", ""))
    proc = None
    if ident is not None:
        if not isinstance(ident, int) or not 1 <= ident <= ID_MAX:
            raise BadRequest("procedure_id must be a record id")
        proc = _editable(ident)
    state = _state_from_form(request.form)
    live, errors = _judge(state, proc)
    summary = [(f, label_of(f), errors[f]) for f in sorted(errors, key=_order)]
    return render_template("pages/_editor_panel.html", live=live, summary=summary), 422 if errors else 200
