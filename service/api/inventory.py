"""Inventory resources: labs, locations, substances, stocks, mixtures.

Each view parses (pydantic), calls one service function and serialises.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

from flask import jsonify, request
from pydantic import BaseModel

from service import schemas
from service.api import bp, responses
from service.api.errors import ApiError
from service.auth import check_lab, lab_scope
from service.operations import operation
from service.present.serialize import dump
from service.schemas import ListQuery
from service.store import inventory
from service.store.db import get_session
from service.store.models import Lab, Location, Mixture, Stock, Substance


def page_answer(page, dump_item: Callable) -> dict:
    """A listing's JSON: the page's items beside the total that match, the limit and the offset."""
    return {"items": [dump_item(r) for r in page], "total": page.total, "limit": page.limit, "offset": page.offset}


def json_body(model: type[BaseModel]) -> BaseModel:
    """The request's JSON object validated as ``model`` (400 if it is not a JSON object)."""
    body = request.get_json(silent=True)
    if not isinstance(body, dict):
        raise ApiError(400, "bad_request", "the request body must be a JSON object")
    return model.model_validate(body)


@dataclass(frozen=True)
class Resource:
    name: str  # plural, as in the URL
    model: type
    answer: type[BaseModel]  # the shape of one record in the OpenAPI document
    create_body: type[BaseModel]
    patch_body: type[BaseModel]
    create: Callable
    update: Callable


RESOURCES = (
    Resource("labs", Lab, responses.Lab, schemas.LabIn, schemas.LabPatch,
             lambda s, b: inventory.create_record(s, Lab, b), inventory.update_record),
    Resource("locations", Location, responses.Location, schemas.LocationIn, schemas.LocationPatch,
             lambda s, b: inventory.create_record(s, Location, b), inventory.update_record),
    Resource("substances", Substance, responses.Substance, schemas.SubstanceIn, schemas.SubstancePatch,
             lambda s, b: inventory.create_record(s, Substance, b), inventory.update_record),
    Resource("stocks", Stock, responses.Stock, schemas.StockIn, schemas.StockPatch, inventory.create_stock, inventory.update_stock),
    Resource("mixtures", Mixture, responses.Mixture, schemas.MixtureIn, schemas.MixturePatch,
             inventory.create_mixture, inventory.update_mixture),
)


def _register(resource: Resource) -> None:
    name, model, answer = resource.name, resource.model, resource.answer
    lab_check = (403,) if model is not Substance else ()

    @operation(summary=f"List {name} (one page)", query=ListQuery, response=answer, paged=True)
    def list_view():
        query = ListQuery.model_validate(request.args.to_dict())
        page = inventory.list_records(get_session(), model, **query.model_dump(), lab_ids=lab_scope())
        return jsonify(page_answer(page, dump))

    @operation(summary=f"Create one of {name}", body=resource.create_body, response=answer, status=201,
               errors=(*lab_check, 409))
    def create_view():
        body = json_body(resource.create_body)
        if hasattr(body, "lab_id"):
            check_lab(body.lab_id)
        record = resource.create(get_session(), body)
        return jsonify(dump(record)), 201, {"Location": f"{bp.url_prefix}/{name}/{record.id}"}

    def visible(ident: int):
        record = inventory.get(get_session(), model, ident)
        if model is Lab:
            check_lab(record.id)
        elif getattr(record, "lab_id", None) is not None:  # a location without a lab is shared
            check_lab(record.lab_id)
        return record

    @operation(summary=f"Read one of {name}", response=answer, errors=lab_check)
    def read_view(ident: int):
        return jsonify(dump(visible(ident)))

    @operation(summary=f"Update one of {name}", body=resource.patch_body, response=answer, errors=(*lab_check, 409))
    def update_view(ident: int):
        body = json_body(resource.patch_body)
        return jsonify(dump(resource.update(get_session(), visible(ident), body)))

    @operation(summary=f"Retire one of {name} (kept for the ledger)", response=answer, errors=(*lab_check, 409))
    def retire_view(ident: int):
        return jsonify(dump(inventory.retire(get_session(), visible(ident))))

    bp.add_url_rule(f"/{name}", f"list_{name}", list_view, methods=["GET"])
    bp.add_url_rule(f"/{name}", f"create_{name}", create_view, methods=["POST"])
    bp.add_url_rule(f"/{name}/<int:ident>", f"read_{name}", read_view, methods=["GET"])
    bp.add_url_rule(f"/{name}/<int:ident>", f"update_{name}", update_view, methods=["PATCH"])
    bp.add_url_rule(f"/{name}/<int:ident>/retire", f"retire_{name}", retire_view, methods=["POST"])


for _resource in RESOURCES:
    _register(_resource)
