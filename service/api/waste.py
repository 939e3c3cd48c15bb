"""Waste containers: contents, findings, append-only entries, reversals and state moves."""

from __future__ import annotations

from typing import Optional

from flask import jsonify, request
from pydantic import Field

from service import schemas
from service.api import bp
from service.api.inventory import json_body, page_answer
from service.api.responses import WasteContainer as ContainerAnswer, WasteEntry as EntryAnswer
from service.appdata import active_rules
from service.auth import check_lab, current_user, lab_scope
from service.operations import operation
from service.present.runs import balance_elements
from service.present.waste import dump_container, dump_entry
from service.store import inventory, waste
from service.store.db import get_session
from service.store.models import WasteContainer


def _visible(ident: int) -> WasteContainer:
    container = inventory.get(get_session(), WasteContainer, ident)
    check_lab(container.lab_id)
    return container


class ContainerQuery(schemas.PageQuery):
    state: Optional[str] = Field(default=None, max_length=40)


@bp.get("/waste_containers", endpoint="list_waste_containers")
@operation(query=ContainerQuery, response=ContainerAnswer, paged=True)
def list_containers():
    """One page of waste containers with their contents and findings, optionally in one state."""
    query = ContainerQuery.model_validate(request.args.to_dict())
    found = waste.list_containers(get_session(), lab_ids=lab_scope(), state=query.state, limit=query.limit,
                                  offset=query.offset)
    return jsonify(page_answer(found, dump_container))


@bp.post("/waste_containers", endpoint="create_waste_containers")
@operation(body=schemas.ContainerIn, response=ContainerAnswer, status=201, errors=(403, 409))
def create_container():
    """Open a waste container."""
    body = json_body(schemas.ContainerIn)
    check_lab(body.lab_id)
    container = waste.create_container(get_session(), body)
    return jsonify(dump_container(container)), 201


@bp.get("/waste_containers/<int:ident>", endpoint="read_waste_containers")
@operation(response=ContainerAnswer, errors=(403,))
def read_container(ident: int):
    """A waste container with its contents and findings."""
    return jsonify(dump_container(_visible(ident)))


@bp.get("/waste_containers/<int:ident>/entries", endpoint="list_waste_entries")
@operation(query=schemas.PageQuery, response=EntryAnswer, paged=True, errors=(403,))
def list_entries(ident: int):
    """One page of a container's entries in the order they were made."""
    query = schemas.PageQuery.model_validate(request.args.to_dict())
    container = _visible(ident)
    return jsonify(page_answer(waste.entries_of(get_session(), container, limit=query.limit, offset=query.offset),
                               dump_entry))


@bp.post("/waste_containers/<int:ident>/entries", endpoint="add_waste_entry")
@operation(body=schemas.EntryIn, response=EntryAnswer, status=201, errors=(403, 409))
def add_entry(ident: int):
    """Add an entry to a container (refused when it would overfill it, or when an element of its run
    goes beyond what the run's balance leaves unaccounted). An element is given as a mass, an assay
    (concentration × volume) or a share in percent of what the run leaves unaccounted."""
    body = json_body(schemas.EntryIn)
    entry = waste.add_entry(get_session(), ident, body, current_user().id, balance_elements=balance_elements(),
                            rules=active_rules(), check=lambda container: check_lab(container.lab_id))
    return jsonify(dump_entry(entry)), 201


@bp.post("/waste_containers/<int:ident>/entries/<int:entry_id>/reverse", endpoint="reverse_waste_entry")
@operation(body=schemas.ReverseIn, response=EntryAnswer, status=201, errors=(403, 409))
def reverse_entry(ident: int, entry_id: int):
    """Reverse an entry with a new entry of the exact negative."""
    body = json_body(schemas.ReverseIn)
    _visible(ident)
    entry = waste.reverse_entry(get_session(), ident, entry_id, body.reason, current_user().id, rules=active_rules())
    return jsonify(dump_entry(entry)), 201


@bp.post("/waste_containers/<int:ident>/determination", endpoint="determine_waste_container")
@operation(body=schemas.DeterminationIn, response=ContainerAnswer, status=201, errors=(403,))
def determine_container(ident: int):
    """Record the safety officer's determination of the container's waste codes (append-only: the
    latest is the one in force; each is kept and audited). The answer is the container with it."""
    body = json_body(schemas.DeterminationIn)
    container = _visible(ident)
    waste.determine(get_session(), container.id, body, current_user().id)
    return jsonify(dump_container(container)), 201


def _move_view(action: str):
    @operation(summary=f"Waste container: {action.replace('_', ' ')}", response=ContainerAnswer, errors=(403, 409))
    def view(ident: int):
        return jsonify(dump_container(waste.move(get_session(), _visible(ident), action, rules=active_rules())))

    return view


for _action in waste.MOVES:
    bp.add_url_rule(f"/waste_containers/<int:ident>/{_action}", f"{_action}_waste_container", _move_view(_action),
                    methods=["POST"])
