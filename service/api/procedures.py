"""Procedures: register, read with element masses and findings, edit, move through review."""

from __future__ import annotations

from flask import current_app, jsonify, request
from pydantic import BaseModel, ConfigDict, Field, field_validator

from service import schemas
from service.api import bp
from service.api.inventory import json_body, page_answer
from service.api.openapi import operation
from service.api.responses import Decision, Preview, Procedure as ProcedureAnswer, ReviewItem
from service.api.serialize import element_rows_from, finding
from service.auth import check_lab, current_user, lab_scope
from service.store import inventory, procedures
from service.store.db import get_session
from service.store.models import Procedure

CAUTION = ("Findings are suggestions from the active rule packs. Approval rests with the site safety "
           "officer and local regulations decide; check every value before you rely on it.")


def active_rules():
    return current_app.extensions["dotledger.rules"]


def _draw(draw, reagent) -> dict:
    source = draw.stock or draw.mixture
    return {
        "position": draw.position,
        "stock_id": draw.stock_id,
        "mixture_id": draw.mixture_id,
        "label": source.label,
        "name": reagent.name,
        "amount": draw.amount_text,
        "elements": element_rows_from(reagent.element_mass_ug),
    }


def dump_procedure(proc: Procedure, *, with_findings: bool = True) -> dict:
    session = get_session()
    subject = procedures.subject_of(proc)
    out = {
        "id": proc.id, "family_id": proc.family_id, "revision": proc.revision, "revision_of_id": proc.revision_of_id,
        "lab_id": proc.lab_id, "researcher_id": proc.researcher_id, "title": proc.title, "summary": proc.summary,
        "scale": proc.scale, "state": proc.state,
        "submitted_at": proc.submitted_at.isoformat() if proc.submitted_at else None,
        "decided_at": proc.decided_at.isoformat() if proc.decided_at else None,
        "decided_by_id": proc.decided_by_id, "decision_comment": proc.decision_comment,
        "steps": [{"position": s.position, "operation": s.operation, "temperature_c": s.temperature_c,
                   "atmosphere": s.atmosphere, "duration_min": s.duration_min, "note": s.note} for s in proc.steps],
        "draws": [_draw(d, r) for d, r in zip(proc.draws, subject.reagents)],
        "waste_plan": [{"position": w.position, "stream": w.stream, "contents": w.contents,
                        "expected_amount": w.expected_amount} for w in proc.waste_plan],
        "element_masses_per_batch": element_rows_from(procedures.element_totals_ug(subject)),
    }
    if with_findings:
        findings = procedures.findings_of(session, proc, active_rules())
        out["findings"] = [finding(f) for f in findings]
        out["highest_level"] = procedures.highest_level(findings)
        out["rule_packs"] = [{"pack": n, "version": v} for n, v in active_rules().packs]
        out["caution"] = CAUTION
    return out


def _visible(ident: int) -> Procedure:
    proc = inventory.get(get_session(), Procedure, ident)
    check_lab(proc.lab_id)
    return proc


class ProcedureQuery(schemas.PageQuery):
    state: str | None = Field(default=None, max_length=40)
    lab_id: int | None = None


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


class PreviewQuery(BaseModel):
    model_config = ConfigDict(extra="forbid")
    scales: list[float] = Field(default=[2.0, 5.0, 10.0], description="1 to 20 comma-separated scale factors")

    @field_validator("scales", mode="before")
    @classmethod
    def _split(cls, value):
        parts = [p for p in str(value or "").split(",") if p.strip()]
        if not parts or len(parts) > 20:
            raise ValueError("give 1 to 20 comma-separated scale factors, e.g. scales=2,5,10")
        return parts

    @field_validator("scales")
    @classmethod
    def _positive(cls, value: list[float]) -> list[float]:
        if any(v <= 0 or v > 1000 for v in value):
            raise ValueError("scale factors must be above 0 and at most 1000")
        return value


@bp.get("/procedures/<int:ident>/preview", endpoint="preview_procedure")
@operation(query=PreviewQuery, response=Preview, errors=(403,))
def preview(ident: int):
    """Element masses and findings of a procedure at other scales (nothing is stored)."""
    query = PreviewQuery.model_validate({"scales": request.args.get("scales", "2,5,10")})
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
    return jsonify(page_answer(rows, lambda row: {**_listed(row[0]), "highest_level": row[1]}))


def init_app(app) -> None:
    """Load the active rule packs once; a bad pack stops the start with its file and rule id."""
    from service.rules import load_packs

    names = [n.strip() for n in app.config["RULE_PACKS"].split(",") if n.strip()]
    app.extensions["dotledger.rules"] = load_packs(app.config["RULES_DIR"], names)

