"""Run pages: the list, starting a run, its outputs, losses and product stocks, its balance and closing.

Every form becomes the body the JSON API takes (``RunIn``, ``OutputIn``, ``LossIn``, ``ProductStockIn``),
validated by the same schemas and saved by the same store functions; each error, pydantic's or the
store's ("draws[2].amount"), is shown next to the form field of that path ("draws-2-amount").
"""

from __future__ import annotations

import re
from typing import Optional

from flask import redirect, render_template, request, url_for
from pydantic import ValidationError
from sqlalchemy import select

from service import estimates, schemas
from service.appdata import active_rules
from service.auth import check_lab, current_user, lab_scope
from service.chem.units import MAX_AMOUNT_CHARS, QuantityError
from service.errors import Blocked, Conflict, InvalidInput, NotFound
from service.permissions import allowed
from service.present.runs import balance_charts, balance_elements, balance_tolerance, dump_run
from service.present.serialize import finding
from service.store import inventory, procedures, runs
from service.store.db import get_session
from service.store.models import Lab, Location, Mixture, Procedure, Run, Stock, Substance
from service.web import bp
from service.web.fields import field_message, number, whole

_STORE_PATH = re.compile(r"\[(\d+)\]\.?")
METHODS = {"mass": "by mass", "assay": "by assay", "estimate": "from absorbance", "by_difference": "by difference"}
DONE = {"started": "Run started: its draws were taken from the inventory.", "output": "Output recorded.",
        "loss": "Loss recorded.", "stocked": "Product put into the inventory.", "closed": "Run closed."}


def field_of(path) -> str:
    """The form field of a body path: ('draws', 2, 'amount') or "draws[2].amount" -> "draws-2-amount"."""
    if isinstance(path, str):
        path = [p for p in _STORE_PATH.sub(r".\1.", path).split(".") if p]
    return "-".join(str(p) for p in path) or "form"


def _errors(exc: Exception) -> dict[str, str]:
    """Errors of a refused form by field: pydantic's, or the store's one (its ``field``)."""
    if isinstance(exc, ValidationError):
        out: dict[str, str] = {}
        for err in exc.errors():
            out.setdefault(field_of(err["loc"]), field_message(err))
        return out
    field = getattr(exc, "field", None)
    message = getattr(exc, "reason", None) or str(exc)
    if field and message.startswith(f"{field}: "):
        message = message[len(field) + 2:]
    return {field_of(field or "form"): message[:1].upper() + message[1:]}


def _visible_run(ident: int) -> Run:
    run = inventory.get(get_session(), Run, ident)
    check_lab(run.lab_id)
    return run


def _may_record(run: Run) -> bool:
    return run.state == "open" and allowed("web.run_output_add", current_user().role)


# --- the list -------------------------------------------------------------------------------------


@bp.get("/runs", endpoint="runs")
def run_list():
    query = schemas.RunQuery.model_validate(request.args.to_dict())
    session = get_session()
    scope = lab_scope()
    found = runs.list_runs(session, lab_ids=runs.lab_filter(scope, query.lab_id), procedure_id=query.procedure_id, state=query.state,
                           limit=query.limit, offset=query.offset)
    titles = {p.id: p.title for p in procedures.list_procedures(session, lab_ids=scope, limit=None)}
    return render_template("pages/runs.html", page=found, query=query, titles=titles,
                           rows=[dump_run(r, with_balance=False) for r in found],
                           labs=inventory.list_records(session, Lab, lab_ids=scope, limit=None))


# --- starting a run -------------------------------------------------------------------------------


def _approved(ident: int) -> Procedure:
    proc = inventory.get(get_session(), Procedure, ident)
    check_lab(proc.lab_id)
    if proc.state != "approved":
        raise Conflict(f"procedure {proc.id} is {proc.state.replace('_', ' ')}; only approved procedures are run",
                       "procedure_id", proc.id)
    return proc


def _draw_rows(proc: Procedure, scale: float) -> list[dict]:
    """The planned draws × ``scale``, with what each source holds now."""
    rows = []
    for draw in proc.draws:
        source = draw.stock or draw.mixture
        held = source.amount_text if draw.stock is not None else source.volume_text
        rows.append({"kind": "stock" if draw.stock is not None else "mixture", "id": source.id, "label": source.label,
                     "held": held, "planned": draw.amount_text,
                     "amount": draw.amount_text if scale == 1 else procedures.scaled_amount(draw.amount_text, scale)})
    return rows


def _render_start(proc: Procedure, form: dict, rows: list[dict], *, errors=None, findings=(), status=200):
    errors = errors or {}
    return render_template("pages/run_start.html", proc=proc, form=form, rows=rows, errors=errors,
                           findings=[finding(f) for f in findings], summary=_summary(errors, _start_label(rows)),
                           amount_chars=MAX_AMOUNT_CHARS), status


def _start_label(rows):
    def label(field: str) -> str:
        found = re.fullmatch(r"draws-(\d+)-\w+", field)
        if found and int(found[1]) < len(rows):
            return f"Draw {int(found[1]) + 1} ({rows[int(found[1])]['label']})"
        return {"scale": "Scale (batches)", "note": "Note", "procedure_id": "Procedure"}.get(field, field)
    return label


def _summary(errors: dict[str, str], label) -> list[tuple[str, str, str]]:
    return [(f, label(f), m) for f, m in errors.items()]


@bp.get("/procedures/<int:ident>/runs/new", endpoint="run_new")
def run_new(ident: int):
    proc = _approved(ident)
    scale = proc.scale
    return _render_start(proc, {"scale": f"{scale:g}", "note": ""}, _draw_rows(proc, scale))


@bp.post("/procedures/<int:ident>/runs/new", endpoint="run_start")
def run_start(ident: int):
    proc = _approved(ident)
    form = {"scale": request.form.get("scale", "").strip(), "note": request.form.get("note", "")}
    try:
        scale = float(form["scale"])
    except ValueError:
        scale = None
    if request.form.get("action") == "rescale":
        if scale is None or not 0 < scale <= proc.scale:
            return _render_start(proc, form, _draw_rows(proc, proc.scale), status=422, errors={
                "scale": f"Enter a number above 0 and at most the approved scale {proc.scale:g}."})
        return _render_start(proc, form, _draw_rows(proc, scale))
    rows = _draw_rows(proc, scale if scale is not None and 0 < scale <= proc.scale else proc.scale)
    for i, row in enumerate(rows):
        row["amount"] = request.form.get(f"draws-{i}-amount", row["amount"])
    data = {"procedure_id": proc.id, "scale": scale if scale is not None else form["scale"] or None, "note": form["note"].strip() or None,
            "draws": [{f"{row['kind']}_id": row["id"], "amount": row["amount"]} for row in rows]}
    session = get_session()
    try:
        body = schemas.RunIn.model_validate(data)
        run = runs.start_run(session, body, current_user(), active_rules())
    except Blocked as exc:  # beyond the approved scale
        session.rollback()
        return _render_start(proc, form, rows, errors={"scale": str(exc)}, findings=exc.findings, status=409)
    except (ValidationError, InvalidInput, QuantityError, Conflict) as exc:
        session.rollback()  # a refused draw takes nothing from any stock
        return _render_start(proc, form, rows, errors=_errors(exc), status=409 if isinstance(exc, Conflict) else 422)
    return redirect(url_for("web.run", ident=run.id, done="started"), 303)


# --- the run page and closing ---------------------------------------------------------------------


def _run_context(run: Run) -> dict:
    session = get_session()
    shown = dump_run(run)
    stocked = {s.origin_output_id: s for s in session.scalars(select(Stock).where(Stock.origin_run_id == run.id))}
    return {"run": shown, "procedure_title": session.get(Procedure, run.procedure_id).title,
            "sources": _source_labels(session, run), "panels": balance_charts(shown["balance"]),
            "stocked": {oid: {"id": s.id, "label": s.label} for oid, s in stocked.items()},
            "may_record": _may_record(run), "may_stock": allowed("web.run_stock_add", current_user().role),
            "may_close": run.state == "open" and allowed("web.run_close", current_user().role)}


def _source_labels(session, run: Run) -> dict[str, str]:
    """Labels of the stocks and mixtures a run drew from, keyed ``stock:<id>`` / ``mixture:<id>``."""
    out = {}
    for draw in run.draws:
        if draw.stock_id is not None:
            out[f"stock:{draw.stock_id}"] = session.get(Stock, draw.stock_id).label
        if draw.mixture_id is not None:
            out[f"mixture:{draw.mixture_id}"] = session.get(Mixture, draw.mixture_id).label
    return out


@bp.get("/runs/<int:ident>", endpoint="run")
def run_page(ident: int):
    return render_template("pages/run.html", notice=DONE.get(request.args.get("done", "")),
                           **_run_context(_visible_run(ident)))


@bp.post("/runs/<int:ident>/close", endpoint="run_close")
def run_close(ident: int):
    run = _visible_run(ident)
    session = get_session()
    try:
        runs.close_run(session, run, balance_tolerance(), balance_elements())
    except Conflict as exc:  # an unbalanced run, or one closed already
        session.rollback()
        return render_template("pages/run.html", notice=None, refusal=str(exc), **_run_context(run)), 409
    return redirect(url_for("web.run", ident=run.id, done="closed"), 303)


# --- outputs, losses, product stocks --------------------------------------------------------------


def _element_rows(run: Run) -> list[str]:
    """The elements a form offers a row for: those the run's balance follows and its draws carry."""
    followed = balance_elements()
    carried = {s for d in run.draws for s, ug in d.element_mass_ug.items() if ug and s in followed}
    return [s for s in followed if s in carried]


def _rows_from(form, prefix: str, fields: tuple[str, ...], elements: list[str]):
    """Element rows typed into the form (blank rows left out) and the form index of each body row."""
    rows, kept = [], []
    for i, symbol in enumerate(elements):
        values = {f: form.get(f"{prefix}-{i}-{f}", "").strip() for f in fields}
        if any(values.values()):
            rows.append({"element": symbol, **values})
            kept.append(i)
    return rows, kept


def _renumber(errors: dict[str, str], prefix: str, kept: list[int]) -> dict[str, str]:
    """Body row numbers in error fields back to form rows ("elements-0-mass" -> "elements-2-mass")."""
    out = {}
    for field, message in errors.items():
        found = re.fullmatch(rf"{prefix}-(\d+)(-\w+)?", field)
        if found and int(found[1]) < len(kept):
            field = f"{prefix}-{kept[int(found[1])]}{found[2] or ''}"
        out[field] = message
    return out


ESTIMATE_TEXT = ("core", "volume", "shell")  # the rest are numbers
ESTIMATE_FIELDS = ("core", "wavelength_nm", "absorbance", "path_length_cm", "dilution_factor", "volume", "shell",
                   "shell_monolayers")


def _output_body(form, elements) -> tuple[dict, dict[str, list[int]]]:
    method = form.get("method", "")
    data = {"label": form.get("label", ""), "description": form.get("description", "").strip() or None}
    kept: dict[str, list[int]] = {}
    if method == "mass":
        rows, kept["elements"] = _rows_from(form, "elements", ("mass",), elements)
        data.update(method="measured", elements=rows)
    elif method == "assay":
        rows, kept["assays"] = _rows_from(form, "assays", ("concentration", "volume"), elements)
        data.update(method="measured", assays=rows)
    elif method == "estimate":
        values = {f: form.get(f"estimate-{f}", "").strip() for f in ESTIMATE_FIELDS}
        data.update(method="estimated", estimate={f: v if f in ESTIMATE_TEXT else number(v)
                                                  for f, v in values.items() if v})
    elif method == "by_difference":
        data["method"] = "by_difference"
    return data, kept


def _output_form(run: Run, form, *, errors=None, preview=None, status=200):
    errors = errors or {}
    labels = {"label": "Label", "method": "Method", "description": "Description", "form": "Output"}
    return render_template("pages/run_output.html", run=dump_run(run, with_balance=False), form=form,
                           elements=_element_rows(run), methods=METHODS, errors=errors, preview=preview,
                           summary=_summary(errors, lambda f: labels.get(f, f.replace("-", " "))),
                           amount_chars=MAX_AMOUNT_CHARS), status


@bp.get("/runs/<int:ident>/outputs/new", endpoint="run_output_new")
def run_output_new(ident: int):
    run = _visible_run(ident)
    return _output_form(run, {"method": request.args.get("method", "assay") if request.args.get("method") in METHODS
                              else "assay", "estimate-path_length_cm": "1", "estimate-dilution_factor": "1"})


@bp.post("/runs/<int:ident>/outputs/new", endpoint="run_output_add")
def run_output_add(ident: int):
    run = _visible_run(ident)
    form = request.form
    if form.get("method") not in METHODS:
        return _output_form(run, form, errors={"method": "Choose how the output's metal is known."}, status=422)
    data, kept = _output_body(form, _element_rows(run))
    session = get_session()
    if form.get("action") == "estimate":  # the estimate alone, as POST /api/v1/estimates answers it; nothing stored
        try:
            estimate = schemas.EstimateIn.model_validate(data.get("estimate", {}))
            return _output_form(run, form, preview=estimates.as_dict(estimates.estimate(estimate)))
        except (ValidationError, QuantityError, ValueError) as exc:
            errors = {f"estimate-{f}": m for f, m in _errors(exc).items()}
            return _output_form(run, form, errors=errors, status=422)
    try:
        body = schemas.OutputIn.model_validate(data)
        runs.add_output(session, run, body)
    except (ValidationError, InvalidInput, QuantityError, Conflict) as exc:
        session.rollback()
        errors = _errors(exc)
        for prefix, rows in kept.items():
            errors = _renumber(errors, prefix, rows)
        return _output_form(run, form, errors=errors, status=409 if isinstance(exc, Conflict) else 422)
    return redirect(url_for("web.run", ident=run.id, done="output"), 303)


def _loss_form(run: Run, form, *, errors=None, status=200):
    errors = errors or {}
    return render_template("pages/run_loss.html", run=dump_run(run, with_balance=False), form=form,
                           elements=_element_rows(run), errors=errors,
                           summary=_summary(errors, lambda f: {"description": "Description"}.get(f, f.replace("-", " "))),
                           amount_chars=MAX_AMOUNT_CHARS), status


@bp.get("/runs/<int:ident>/losses/new", endpoint="run_loss_new")
def run_loss_new(ident: int):
    return _loss_form(_visible_run(ident), {})


@bp.post("/runs/<int:ident>/losses/new", endpoint="run_loss_add")
def run_loss_add(ident: int):
    run = _visible_run(ident)
    rows, kept = _rows_from(request.form, "elements", ("mass",), _element_rows(run))
    session = get_session()
    try:
        body = schemas.LossIn.model_validate({"description": request.form.get("description", ""), "elements": rows})
        runs.add_loss(session, run, body)
    except (ValidationError, InvalidInput, QuantityError, Conflict) as exc:
        session.rollback()
        errors = _renumber(_errors(exc), "elements", kept)
        return _loss_form(run, request.form, errors=errors, status=409 if isinstance(exc, Conflict) else 422)
    return redirect(url_for("web.run", ident=run.id, done="loss"), 303)


def _output_of(run: Run, output_id: int):
    for output in run.outputs:
        if output.id == output_id:
            return output
    raise NotFound(f"output of run {run.id}", output_id)


def _stock_form(run: Run, output, form, *, errors=None, status=200):
    session = get_session()
    errors = errors or {}
    labels = {"label": "Label", "location_id": "Location", "amount": "Amount as held", "substance_id": "Substance",
              "output_id": "Output"}
    return render_template(
        "pages/run_stock.html", run=dump_run(run, with_balance=False), output=output, form=form, errors=errors,
        summary=_summary(errors, lambda f: labels.get(f, f)),
        locations=inventory.list_records(session, Location, lab_id=run.lab_id, limit=None),
        substances=inventory.list_records(session, Substance, limit=None), amount_chars=MAX_AMOUNT_CHARS), status


@bp.get("/runs/<int:ident>/outputs/<int:output_id>/stock", endpoint="run_stock_new")
def run_stock_new(ident: int, output_id: int):
    run = _visible_run(ident)
    output = _output_of(run, output_id)
    return _stock_form(run, output, {"label": "", "location_id": "", "amount": "", "substance_id": ""})


@bp.post("/runs/<int:ident>/outputs/<int:output_id>/stock", endpoint="run_stock_add")
def run_stock_add(ident: int, output_id: int):
    run = _visible_run(ident)
    output = _output_of(run, output_id)
    form = request.form
    data = {"label": form.get("label", ""), "location_id": whole(form.get("location_id", "")),
            "amount": form.get("amount", ""), "substance_id": whole(form.get("substance_id", ""))}
    session = get_session()
    try:
        body = schemas.ProductStockIn.model_validate(data)
        stock = runs.stock_output(session, run, output.id, body, balance_elements())
    except (ValidationError, InvalidInput, QuantityError, Conflict) as exc:
        session.rollback()
        return _stock_form(run, output, form, errors=_errors(exc), status=409 if isinstance(exc, Conflict) else 422)
    return redirect(url_for("web.run", ident=run.id, done="stocked", stock=stock.id), 303)


def runs_of(proc_id: int, limit: Optional[int] = 20):
    """The runs of one procedure the user may see, newest last (for the procedure page)."""
    found = runs.list_runs(get_session(), lab_ids=lab_scope(), procedure_id=proc_id, limit=limit)
    return found, [dump_run(r, with_balance=False) for r in found]
