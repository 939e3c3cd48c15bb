"""Procedures: register, read with element masses and findings, edit, move through review."""

from __future__ import annotations

from flask import jsonify, request
from pydantic import Field

from service import schemas
from service.api import bp
from service.api.inventory import json_body, page_answer
from service.api.responses import Decision, Preview, Procedure as ProcedureAnswer, ReviewItem
from service.appdata import active_rules
from service.auth import check_lab, current_user, lab_scope
from service.operations import operation
from service.present.procedures import CAUTION, dump_procedure
from service.present.serialize import element_rows_from, finding
from service.store import inventory, procedures
from service.store.db import get_session
from service.store.models import Procedure


def _visible(ident: int) -> Procedure:
    proc = inventory.get(get_session(), Procedure, ident)
    check_lab(proc.lab_id)
    return proc


class ProcedureQuery(schemas.PageQuery):
    state: str | None = Field(default=None, max_length=40)
    lab_id: schemas.RecordId | None = None


def _listed(proc: Procedure) -> dict:
    return dump_procedure(proc, with_findings=False)


@bp.get("/procedures", endpoint="list_procedures")
@operation(query=ProcedureQuery, response=ProcedureAnswer, paged=True)
def list_procedures():
    """One page of procedures (without findings)."""
    query = ProcedureQuery.model_validate(request.args.to_dict())
    found = procedures.list_procedures(get_session(), state=query.state, lab_id=query.lab_id, lab_ids=lab_scope(),
                                       limit=query.limit, offset=query.offset)
    return jsonify(page_answer(found, _listed))


@bp.post("/procedures", endpoint="create_procedures")
@operation(body=schemas.ProcedureIn, response=ProcedureAnswer, status=201, errors=(403,))
def create_procedure():
    """Register a procedure as a draft."""
    body = json_body(schemas.ProcedureIn)
    check_lab(body.lab_id)
    proc = procedures.create_procedure(get_session(), body, current_user())
    return jsonify(dump_procedure(proc)), 201, {"Location": f"{bp.url_prefix}/procedures/{proc.id}"}


@bp.get("/procedures/<int:ident>", endpoint="read_procedures")
@operation(response=ProcedureAnswer, errors=(403,))
def read_procedure(ident: int):
    """A procedure with its element masses per batch and findings."""
    return jsonify(dump_procedure(_visible(ident)))


@bp.patch("/procedures/<int:ident>", endpoint="update_procedures")
@operation(body=schemas.ProcedurePatch, response=ProcedureAnswer, status=(200, 201), errors=(403, 409))
def update_procedure(ident: int):
    """Edit a procedure (201 when an approved one gets a new draft revision)."""
    body = json_body(schemas.ProcedurePatch)
    proc, created = procedures.update_procedure(get_session(), _visible(ident), body)
    return jsonify(dump_procedure(proc)), 201 if created else 200


@bp.get("/procedures/<int:ident>/revisions", endpoint="list_procedure_revisions")
@operation(query=schemas.PageQuery, response=ProcedureAnswer, paged=True, errors=(403,))
def list_revisions(ident: int):
    """One page of the revisions of a procedure."""
    query = schemas.PageQuery.model_validate(request.args.to_dict())
    proc = _visible(ident)
    family = procedures.list_procedures(get_session(), family_id=proc.family_id, limit=query.limit,
                                        offset=query.offset)
    return jsonify(page_answer(family, _listed))


def _decision(d) -> dict:
    return {"from_state": d.from_state, "to_state": d.to_state, "actor_id": d.actor_id, "comment": d.comment,
            "highest_level": d.highest_level, "at": d.at.isoformat()}


@bp.get("/procedures/<int:ident>/decisions", endpoint="list_procedure_decisions")
@operation(query=schemas.PageQuery, response=Decision, paged=True, errors=(403,))
def list_decisions(ident: int):
    """One page of a procedure's workflow decisions, oldest first."""
    query = schemas.PageQuery.model_validate(request.args.to_dict())
    rows = procedures.decisions_of(get_session(), _visible(ident), limit=query.limit, offset=query.offset)
    return jsonify(page_answer(rows, _decision))


def _transition_view(action: str):
    @operation(summary=f"Procedure workflow: {action.replace('_', ' ')}", body=schemas.DecisionIn, body_required=False,
               response=ProcedureAnswer, errors=(403, 409))
    def view(ident: int):
        body = json_body(schemas.DecisionIn) if request.get_data() else schemas.DecisionIn()
        proc = procedures.transition(get_session(), _visible(ident), action, current_user(), body.comment,
                                     active_rules())
        return jsonify(dump_procedure(proc))

    return view


for _action in procedures.TRANSITIONS:
    bp.add_url_rule(f"/procedures/<int:ident>/{_action}", f"{_action}_procedure", _transition_view(_action),
                    methods=["POST"])


@bp.get("/procedures/<int:ident>/preview", endpoint="preview_procedure")
@operation(query=schemas.PreviewQuery, response=Preview, errors=(403,))
def preview(ident: int):
    """Element masses and findings of a procedure at other scales (nothing is stored)."""
    query = schemas.PreviewQuery.model_validate({"scales": request.args.get("scales", "2,5,10")})
    proc = _visible(ident)
    rows = procedures.preview(get_session(), proc, active_rules(), query.scales)
    return jsonify({"procedure_id": proc.id, "caution": CAUTION,
                    "scales": [{"scale": s, "highest_level": lvl, "element_masses_per_batch": element_rows_from(m),
                                "findings": [finding(f) for f in fs]} for s, lvl, m, fs in rows]})


@bp.get("/review_queue", endpoint="review_queue")
@operation(query=schemas.PageQuery, response=ReviewItem, paged=True)
def review_queue():
    """One page of submitted procedures, oldest submission first, with their highest finding level."""
    query = schemas.PageQuery.model_validate(request.args.to_dict())
    rows = procedures.review_queue(get_session(), active_rules(), limit=query.limit, offset=query.offset)
    return jsonify(page_answer(rows, lambda row: {**dump_procedure(row[0], with_findings=False), "highest_level": row[1]}))
