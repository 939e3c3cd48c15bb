"""Waste container pages (read-only), rendered from the same views as the JSON API (service.present)."""

from __future__ import annotations

import datetime as dt

from flask import render_template, request

from service.auth import check_lab, lab_scope
from service.schemas import PageQuery
from service.present.waste import dump_container, dump_entry
from service.store import inventory, waste
from service.store.db import get_session
from service.store.models import WasteContainer
from service.web import bp

# The elements the waste list shows a column for, in this order.
WASTE_ELEMENTS = ("Cd", "Se", "Pb")


@bp.get("/waste", endpoint="waste")
def container_list():
    query = PageQuery.model_validate(request.args.to_dict())
    found = waste.list_containers(get_session(), lab_ids=lab_scope(), limit=query.limit, offset=query.offset)
    return render_template("pages/waste.html", containers=[dump_container(c) for c in found],
                           elements=WASTE_ELEMENTS, page=found)


@bp.get("/waste/<int:ident>", endpoint="container")
def container_page(ident: int):
    query = PageQuery.model_validate(request.args.to_dict())
    session = get_session()
    container = inventory.get(session, WasteContainer, ident)
    check_lab(container.lab_id)
    entries = waste.entries_of(session, container, limit=query.limit, offset=query.offset)
    return render_template("pages/container.html", container=dump_container(container),
                           entries=[dump_entry(e) for e in entries], page=entries)


@bp.app_template_filter("days_since")
def days_since(iso: str | None) -> str:
    """Whole days from an ISO timestamp to now (UTC), or "—" when there is none.

    >>> days_since(None)
    '—'
    """
    if not iso:
        return "—"
    then = dt.datetime.fromisoformat(iso)
    if then.tzinfo is None:  # SQLite hands back naive UTC
        then = then.replace(tzinfo=dt.timezone.utc)
    return str((dt.datetime.now(dt.timezone.utc) - then).days)


@bp.app_template_filter("day")
def day(iso: str | None) -> str:
    """The date part of an ISO timestamp (YYYY-MM-DD), or "—".

    >>> day("2026-12-02T02:36:28+00:00")
    '2026-12-02'
    """
    return iso[:10] if iso else "—"
