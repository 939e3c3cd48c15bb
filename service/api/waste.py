"""Waste containers: contents, findings, append-only entries, reversals and state moves."""

from __future__ import annotations

from typing import Optional

from flask import current_app, jsonify, request
from pydantic import Field

from service import schemas
from service.api import bp
from service.api.inventory import json_body, page_answer
from service.api.openapi import operation
from service.api.responses import WasteContainer as ContainerAnswer, WasteEntry as EntryAnswer
from service.api.serialize import element_rows_from, finding
from service.auth import check_lab, current_user, lab_scope
from service.rules import evaluate, highest_level
from service.store import inventory, waste
from service.store.db import get_session
from service.store.models import Substance, WasteContainer, WasteEntry

CAUTION = ("Waste codes and transport descriptions are suggestions for review. The waste determination "
           "rests with the site safety officer and local regulations; shipping papers with the licensed shipper.")


def dump_container(container: WasteContainer) -> dict:
    session = get_session()
    contents = waste.contents_of(session, container)
    subject = waste.subject_of(session, container, contents)
    rules = current_app.extensions["dotledger.rules"]
    findings = evaluate(rules, "waste_container", subject)
    liquid = container.form == "liquid"
    volume_l = contents.volume_ul / 1e6
    fill = (contents.volume_ul if liquid else contents.mass_ug) / container.capacity_micro
    return {
        "id": container.id, "label": container.label, "lab_id": container.lab_id, "location_id": container.location_id,
        "stream": container.stream, "form": container.form, "capacity": container.capacity_text,
        "acute_hazardous": container.acute_hazardous, "state": container.state,
        "first_entry_at": _iso(container.first_entry_at), "full_at": _iso(container.full_at),
        "pickup_requested_at": _iso(container.pickup_requested_at), "collected_at": _iso(container.collected_at),
        "entries": contents.entries, "volume_l": volume_l, "mass_kg": contents.mass_ug / 1e9,
        "fill_percent": round(100 * fill, 2),
        "filterable_solids_percent": round(contents.filterable_solids_percent, 3),
        "elements": [{**row, "concentration_mg_per_l": (row["mass_ug"] / 1000 / volume_l) if liquid and volume_l else None}
                     for row in element_rows_from(contents.element_mass_ug)],
        "solvent_composition": [{"substance": c.name, "key": c.key, "volume_percent": round(100 * c.volume_fraction, 3)}
                                for c in subject.components],
        "findings": [finding(f) for f in findings], "highest_level": highest_level(findings),
        "rule_packs": [{"pack": n, "version": v} for n, v in rules.packs], "caution": CAUTION,
    }


def _iso(value):
    return value.isoformat() if value else None


def dump_entry(entry: WasteEntry) -> dict:
    session = get_session()
    return {
        "id": entry.id, "container_id": entry.container_id, "run_id": entry.run_id, "actor_id": entry.actor_id,
        "at": entry.at.isoformat(), "description": entry.description, "volume_ml": entry.volume_ul / 1000,
        "mass_g": entry.mass_ug / 1e6, "filterable_solids_percent": entry.filterable_solids_percent,
        "reverses_entry_id": entry.reverses_entry_id,
        "components": [{"substance_id": c.substance_id, "substance": session.get(Substance, c.substance_id).name,
                        "volume_ml": c.volume_ul / 1000} for c in entry.components],
        "elements": element_rows_from({e.element: e.mass_ug for e in sorted(entry.elements, key=lambda e: e.element)}),
    }


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
    """Add an entry to a container (refused when it would overfill it)."""
    body = json_body(schemas.EntryIn)
    _visible(ident)
    entry = waste.add_entry(get_session(), ident, body, current_user().id)
    return jsonify(dump_entry(entry)), 201


@bp.post("/waste_containers/<int:ident>/entries/<int:entry_id>/reverse", endpoint="reverse_waste_entry")
@operation(body=schemas.ReverseIn, response=EntryAnswer, status=201, errors=(403, 409))
def reverse_entry(ident: int, entry_id: int):
    """Reverse an entry with a new entry of the exact negative."""
    body = json_body(schemas.ReverseIn)
    _visible(ident)
    entry = waste.reverse_entry(get_session(), ident, entry_id, body.reason, current_user().id)
    return jsonify(dump_entry(entry)), 201


def _move_view(action: str):
    @operation(summary=f"Waste container: {action.replace('_', ' ')}", response=ContainerAnswer, errors=(403, 409))
    def view(ident: int):
        return jsonify(dump_container(waste.move(get_session(), _visible(ident), action)))

    return view


for _action in waste.MOVES:
    bp.add_url_rule(f"/waste_containers/<int:ident>/{_action}", f"{_action}_waste_container", _move_view(_action),
                    methods=["POST"])
