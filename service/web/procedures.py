"""Procedure, review-queue and run pages (read-only), rendered from the views the JSON API uses (service.present)."""

from __future__ import annotations

from flask import render_template, request

from service.appdata import active_rules
from service.auth import check_lab, current_user, lab_scope
from service.permissions import allowed
from service.schemas import PageQuery
from service.present.procedures import dump_procedure
from service.present.runs import dump_run
from service.store import inventory, procedures
from service.store.db import get_session
from service.store.models import Mixture, Procedure, Run, Stock
from service.web import bp
from service.web.pages import TRACKED

# How a measured unit reads on a page (the rule packs use pint's names).
_UNIT_LABELS = {"ug": "µg", "degC": "°C", "delta_degC": "°C (difference)", "day": "days", "percent": "%"}


@bp.get("/procedures", endpoint="procedures")
def procedure_list():
    query = PageQuery.model_validate(request.args.to_dict())
    found = procedures.list_procedures(get_session(), lab_ids=lab_scope(), limit=query.limit, offset=query.offset)
    return render_template("pages/procedures.html", procedures=[dump_procedure(p) for p in found], page=found)


@bp.get("/procedures/<int:ident>", endpoint="procedure")
def procedure_page(ident: int):
    proc = inventory.get(get_session(), Procedure, ident)
    check_lab(proc.lab_id)
    return render_template("pages/procedure.html", proc=dump_procedure(proc), tracked=TRACKED)


@bp.get("/review", endpoint="review")
def review_page():
    query = PageQuery.model_validate(request.args.to_dict())
    rows = procedures.review_queue(get_session(), active_rules(), limit=query.limit, offset=query.offset)
    return render_template("pages/review.html",
                           queue=[{**dump_procedure(p, with_findings=False), "highest_level": level}
                                  for p, level in rows], page=rows)


@bp.get("/runs/<int:ident>", endpoint="run")
def run_page(ident: int):
    session = get_session()
    run = inventory.get(session, Run, ident)
    check_lab(run.lab_id)
    return render_template("pages/run.html", run=dump_run(run),
                           procedure_title=session.get(Procedure, run.procedure_id).title,
                           sources=_source_labels(session, run))


def _source_labels(session, run: Run) -> dict[str, str]:
    """Labels of the stocks and mixtures a run drew from, keyed ``stock:<id>`` / ``mixture:<id>``."""
    out = {}
    for draw in run.draws:
        if draw.stock_id is not None:
            out[f"stock:{draw.stock_id}"] = session.get(Stock, draw.stock_id).label
        if draw.mixture_id is not None:
            out[f"mixture:{draw.mixture_id}"] = session.get(Mixture, draw.mixture_id).label
    return out


@bp.app_template_filter("measured")
def measured(value, unit: str) -> str:
    """A finding's measured value with its unit as a person reads it (µg shown as mg)."""
    if value is None:
        return "—"
    if unit == "ug":
        return f"{value / 1000:,.3f} mg"
    text = f"{value:,.3f}".rstrip("0").rstrip(".") if isinstance(value, float) else f"{value:,}"
    label = _UNIT_LABELS.get(unit, unit)
    return f"{text} {label}".strip()


@bp.app_context_processor
def _may():
    # The nav shows only the pages the signed-in role may open (same matrix as the check).
    def may(endpoint: str) -> bool:
        user = current_user()
        return user is not None and allowed(endpoint, user.role)

    return {"may": may}
