"""Runs of approved procedures: start (draws decrement the inventory), outputs, losses, balance, close."""

from __future__ import annotations

from flask import jsonify, request

from service import schemas
from service.api import bp
from service.api.errors import ApiError
from service.api.inventory import json_body, page_answer
from service.api.responses import Balance, Estimate, Run as RunAnswer, Stock as StockAnswer
from service.appdata import active_rules
from service.auth import check_lab, current_user, lab_scope
from service.operations import operation
from service.present.runs import balance_elements, balance_tolerance, dump_balance, dump_run
from service.present.serialize import dump
from service.store import inventory, runs
from service.store.db import get_session
from service.store.models import Run


def _visible(ident: int) -> Run:
    run = inventory.get(get_session(), Run, ident)
    check_lab(run.lab_id)
    return run


@bp.get("/runs", endpoint="list_runs")
@operation(query=schemas.RunQuery, response=RunAnswer, paged=True)
def list_runs():
    """One page of runs (without their balance), optionally of one procedure, lab or state."""
    query = schemas.RunQuery.model_validate(request.args.to_dict())
    found = runs.list_runs(get_session(), lab_ids=runs.lab_filter(lab_scope(), query.lab_id),
                           procedure_id=query.procedure_id, state=query.state, limit=query.limit, offset=query.offset)
    return jsonify(page_answer(found, lambda r: dump_run(r, with_balance=False)))


@bp.post("/runs", endpoint="create_runs")
@operation(body=schemas.RunIn, response=RunAnswer, status=201, errors=(403, 409))
def start_run():
    """Start a run of an approved procedure; its draws decrement the inventory."""
    body = json_body(schemas.RunIn)
    run = runs.start_run(get_session(), body, current_user(), active_rules())
    return jsonify(dump_run(run)), 201


@bp.get("/runs/<int:ident>", endpoint="read_runs")
@operation(response=RunAnswer, errors=(403,))
def read_run(ident: int):
    """A run with its mass balance."""
    return jsonify(dump_run(_visible(ident)))


@bp.post("/runs/<int:ident>/outputs", endpoint="add_run_output")
@operation(body=schemas.OutputIn, response=RunAnswer, status=201, errors=(403, 409))
def add_output(ident: int):
    """Record a product output of an open run."""
    body = json_body(schemas.OutputIn)
    run = _visible(ident)
    runs.add_output(get_session(), run, body)
    return jsonify(dump_run(run)), 201


@bp.post("/runs/<int:ident>/outputs/<int:output_id>/stock", endpoint="stock_run_output")
@operation(body=schemas.ProductStockIn, response=StockAnswer, status=201, errors=(403, 409))
def stock_output(ident: int, output_id: int):
    """Put a run's output into the inventory as a stock of the run's lab holding exactly its element masses."""
    body = json_body(schemas.ProductStockIn)
    stock = runs.stock_output(get_session(), _visible(ident), output_id, body, balance_elements())
    return jsonify(dump(stock)), 201, {"Location": f"{bp.url_prefix}/stocks/{stock.id}"}


@bp.post("/runs/<int:ident>/losses", endpoint="add_run_loss")
@operation(body=schemas.LossIn, response=RunAnswer, status=201, errors=(403, 409))
def add_loss(ident: int):
    """Declare a loss of an open run."""
    body = json_body(schemas.LossIn)
    run = _visible(ident)
    runs.add_loss(get_session(), run, body)
    return jsonify(dump_run(run)), 201


@bp.get("/runs/<int:ident>/balance", endpoint="read_run_balance")
@operation(response=Balance, errors=(403,))
def read_balance(ident: int):
    """The run's mass balance per followed element."""
    balance = runs.balance_of(get_session(), _visible(ident), balance_tolerance(), balance_elements())
    return jsonify(dump_balance(balance))


@bp.post("/runs/<int:ident>/close", endpoint="close_run")
@operation(response=RunAnswer, errors=(403, 409))
def close(ident: int):
    """Close a run whose balance closes within the site tolerance."""
    run = _visible(ident)
    try:
        runs.close_run(get_session(), run, balance_tolerance(), balance_elements())
    except runs.UnbalancedRun as exc:
        raise ApiError(409, "unbalanced", str(exc), dump_balance(exc.balance)) from None
    return jsonify(dump_run(run))


@bp.post("/estimates", endpoint="create_estimate")
@operation(body=schemas.EstimateIn, response=Estimate)
def create_estimate():
    """The metal content of a dispersion from absorbance alone (nothing is stored)."""
    from service import estimates

    return jsonify(estimates.as_dict(estimates.estimate(json_body(schemas.EstimateIn))))
