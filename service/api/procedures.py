"""Procedures: register, read with element masses and findings, edit, move through review."""

from __future__ import annotations

from flask import jsonify, request
from pydantic import BaseModel, ConfigDict, Field

from service import schemas
from service.api import bp
from service.api.inventory import json_body
from service.appdata import active_rules
from service.auth import check_lab, current_user, lab_scope
from service.present.procedures import CAUTION, dump_procedure
from service.present.serialize import element_rows_from, finding
from service.store import inventory, procedures
from service.store.db import get_session
from service.store.models import Procedure


def _visible(ident: int) -> Procedure:
    proc = inventory.get(get_session(), Procedure, ident)
    check_lab(proc.lab_id)
    return proc


class ProcedureQuery(BaseModel):
    model_config = ConfigDict(extra="forbid")
    state: str | None = None
    lab_id: int | None = None
    limit: int = Field(default=100, ge=1, le=1000)
    offset: int = Field(default=0, ge=0)


@bp.get("/procedures", endpoint="list_procedures")
def list_procedures():
    query = ProcedureQuery.model_validate(request.args.to_dict())
    found = procedures.list_procedures(get_session(), state=query.state, lab_id=query.lab_id, lab_ids=lab_scope(),
                                       limit=query.limit, offset=query.offset)
    return jsonify({"items": [dump_procedure(p, with_findings=False) for p in found], "count": len(found)})


@bp.post("/procedures", endpoint="create_procedures")
def create_procedure():
    body = json_body(schemas.ProcedureIn)
    check_lab(body.lab_id)
    proc = procedures.create_procedure(get_session(), body, current_user())
    return jsonify(dump_procedure(proc)), 201, {"Location": f"{bp.url_prefix}/procedures/{proc.id}"}


@bp.get("/procedures/<int:ident>", endpoint="read_procedures")
def read_procedure(ident: int):
    return jsonify(dump_procedure(_visible(ident)))


@bp.patch("/procedures/<int:ident>", endpoint="update_procedures")
def update_procedure(ident: int):
    body = json_body(schemas.ProcedurePatch)
    proc, created = procedures.update_procedure(get_session(), _visible(ident), body)
    return jsonify(dump_procedure(proc)), 201 if created else 200


@bp.get("/procedures/<int:ident>/revisions", endpoint="list_procedure_revisions")
def list_revisions(ident: int):
    proc = _visible(ident)
    family = procedures.list_procedures(get_session(), family_id=proc.family_id, limit=1000)
    return jsonify({"items": [dump_procedure(p, with_findings=False) for p in family]})


@bp.get("/procedures/<int:ident>/decisions", endpoint="list_procedure_decisions")
def list_decisions(ident: int):
    rows = procedures.decisions_of(get_session(), _visible(ident))
    return jsonify({"items": [{"from_state": d.from_state, "to_state": d.to_state, "actor_id": d.actor_id,
                               "comment": d.comment, "highest_level": d.highest_level, "at": d.at.isoformat()}
                              for d in rows]})


def _transition_view(action: str):
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
def preview(ident: int):
    query = schemas.PreviewQuery.model_validate({"scales": request.args.get("scales", "2,5,10")})
    proc = _visible(ident)
    rows = procedures.preview(get_session(), proc, active_rules(), query.scales)
    return jsonify({"procedure_id": proc.id, "caution": CAUTION,
                    "scales": [{"scale": s, "highest_level": lvl, "element_masses_per_batch": element_rows_from(m),
                                "findings": [finding(f) for f in fs]} for s, lvl, m, fs in rows]})


@bp.get("/review_queue", endpoint="review_queue")
def review_queue():
    rows = procedures.review_queue(get_session(), active_rules())
    return jsonify({"items": [{**dump_procedure(p, with_findings=False), "highest_level": level}
                              for p, level in rows]})
