"""Accumulation areas: the sums of their containers not yet collected, against their limits, and the findings."""

from __future__ import annotations

from flask import jsonify, request

from service import schemas
from service.api import bp
from service.api.inventory import page_answer
from service.api.responses import AccumulationArea as AreaAnswer
from service.auth import check_lab, lab_scope
from service.operations import operation
from service.present.areas import dump_area
from service.store import areas
from service.store.db import get_session


@bp.get("/accumulation_areas", endpoint="list_accumulation_areas")
@operation(query=schemas.PageQuery, response=AreaAnswer, paged=True)
def list_areas():
    """One page of accumulation areas (satellite and central) with their totals, limits and findings."""
    query = schemas.PageQuery.model_validate(request.args.to_dict())
    page = areas.list_areas(get_session(), lab_ids=lab_scope(), limit=query.limit, offset=query.offset)
    return jsonify(page_answer(page, dump_area))


@bp.get("/accumulation_areas/<int:ident>", endpoint="read_accumulation_areas")
@operation(response=AreaAnswer, errors=(403,))
def read_area(ident: int):
    """An accumulation area: its containers not yet collected, their totals against the area's limits, the findings."""
    location = areas.get_area(get_session(), ident)
    if location.lab_id is not None:
        check_lab(location.lab_id)
    return jsonify(dump_area(location))
