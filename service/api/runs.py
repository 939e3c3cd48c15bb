"""Runs of approved procedures: start (draws decrement the inventory), outputs, losses, balance, close."""

from __future__ import annotations

from flask import jsonify, request

from service import schemas
from service.api import bp
from service.api.errors import ApiError
from service.api.inventory import json_body
from service.appdata import active_rules
from service.auth import check_lab, current_user, lab_scope
from service.present.runs import balance_elements, balance_tolerance, dump_balance, dump_run
from service.store import inventory, runs
from service.store.db import get_session
from service.store.models import Procedure, Run


def _visible(ident: int) -> Run:
    run = inventory.get(get_session(), Run, ident)
    check_lab(run.lab_id)
    return run


@bp.get("/runs", endpoint="list_runs")
def list_runs():
    raw = request.args.get("procedure_id", "")
    found = runs.list_runs(get_session(), lab_ids=lab_scope(), procedure_id=int(raw) if raw.isdigit() else None)
    return jsonify({"items": [dump_run(r, with_balance=False) for r in found]})


@bp.post("/runs", endpoint="create_runs")
def start_run():
    body = json_body(schemas.RunIn)
    session = get_session()
    proc = inventory.get(session, Procedure, body.procedure_id, field="procedure_id")
    check_lab(proc.lab_id)
    run = runs.start_run(session, body, current_user(), active_rules())
    return jsonify(dump_run(run)), 201


@bp.get("/runs/<int:ident>", endpoint="read_runs")
def read_run(ident: int):
    return jsonify(dump_run(_visible(ident)))


@bp.post("/runs/<int:ident>/outputs", endpoint="add_run_output")
def add_output(ident: int):
    body = json_body(schemas.OutputIn)
    run = _visible(ident)
    runs.add_output(get_session(), run, body)
    return jsonify(dump_run(run)), 201


@bp.post("/runs/<int:ident>/losses", endpoint="add_run_loss")
def add_loss(ident: int):
    body = json_body(schemas.LossIn)
    run = _visible(ident)
    runs.add_loss(get_session(), run, body)
    return jsonify(dump_run(run)), 201


@bp.get("/runs/<int:ident>/balance", endpoint="read_run_balance")
def read_balance(ident: int):
    balance = runs.balance_of(get_session(), _visible(ident), balance_tolerance(), balance_elements())
    return jsonify(dump_balance(balance))


@bp.post("/runs/<int:ident>/close", endpoint="close_run")
def close(ident: int):
    run = _visible(ident)
    try:
        runs.close_run(get_session(), run, balance_tolerance(), balance_elements())
    except runs.UnbalancedRun as exc:
        raise ApiError(409, "unbalanced", str(exc), dump_balance(exc.balance)) from None
    return jsonify(dump_run(run))


@bp.post("/estimates", endpoint="create_estimate")
def create_estimate():
    """The metal content of a dispersion from absorbance alone (nothing is stored)."""
    from service import estimates

    return jsonify(estimates.as_dict(estimates.estimate(json_body(schemas.EstimateIn))))
