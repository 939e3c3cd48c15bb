"""Waste containers: contents, findings, append-only entries, reversals and state moves."""

from __future__ import annotations

from flask import jsonify, request

from service import schemas
from service.api import bp
from service.api.inventory import json_body
from service.auth import check_lab, current_user, lab_scope
from service.present.waste import dump_container, dump_entry
from service.store import inventory, waste
from service.store.db import get_session
from service.store.models import WasteContainer


def _visible(ident: int) -> WasteContainer:
    container = inventory.get(get_session(), WasteContainer, ident)
    check_lab(container.lab_id)
    return container


@bp.get("/waste_containers", endpoint="list_waste_containers")
def list_containers():
    found = waste.list_containers(get_session(), lab_ids=lab_scope(), state=request.args.get("state"))
    return jsonify({"items": [dump_container(c) for c in found]})


@bp.post("/waste_containers", endpoint="create_waste_containers")
def create_container():
    body = json_body(schemas.ContainerIn)
    check_lab(body.lab_id)
    container = waste.create_container(get_session(), body)
    return jsonify(dump_container(container)), 201


@bp.get("/waste_containers/<int:ident>", endpoint="read_waste_containers")
def read_container(ident: int):
    return jsonify(dump_container(_visible(ident)))


@bp.get("/waste_containers/<int:ident>/entries", endpoint="list_waste_entries")
def list_entries(ident: int):
    container = _visible(ident)
    return jsonify({"items": [dump_entry(e) for e in waste.entries_of(get_session(), container)]})


@bp.post("/waste_containers/<int:ident>/entries", endpoint="add_waste_entry")
def add_entry(ident: int):
    body = json_body(schemas.EntryIn)
    _visible(ident)
    entry = waste.add_entry(get_session(), ident, body, current_user().id)
    return jsonify(dump_entry(entry)), 201


@bp.post("/waste_containers/<int:ident>/entries/<int:entry_id>/reverse", endpoint="reverse_waste_entry")
def reverse_entry(ident: int, entry_id: int):
    body = json_body(schemas.ReverseIn)
    _visible(ident)
    entry = waste.reverse_entry(get_session(), ident, entry_id, body.reason, current_user().id)
    return jsonify(dump_entry(entry)), 201


def _move_view(action: str):
    def view(ident: int):
        return jsonify(dump_container(waste.move(get_session(), _visible(ident), action)))

    return view


for _action in waste.MOVES:
    bp.add_url_rule(f"/waste_containers/<int:ident>/{_action}", f"{_action}_waste_container", _move_view(_action),
                    methods=["POST"])
