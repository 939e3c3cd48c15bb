"""Waste container pages, rendered from the same views as the JSON API (service.present).

The list has a column pair for every tracked element some container holds (none fixed); the
container page shows its contents, the metal in it over time, and the buttons the signed-in role
may use (service/web/containers.py and service/web/entries.py take them).
"""

from __future__ import annotations

import datetime as dt
from typing import Optional

from flask import render_template, request

from service.auth import check_lab, current_user, lab_scope
from service.permissions import allowed
from service.schemas import PageQuery
from service.present.waste import dump_container, dump_entry, history_charts
from service.store import inventory, waste
from service.store.db import get_session
from service.store.models import WasteContainer
from service.vocab import TRACKED_ELEMENTS
from service.web import bp

# The one-line notice after an action taken from the container page (never the query's own text).
DONE = {"entry": "Entry saved.", "reversed": "Entry reversed.", "mark_full": "Marked full.",
        "request_pickup": "Pickup requested.", "collect": "Collection recorded.",
        "determined": "Determination recorded."}
MOVE_LABELS = {"mark_full": "Mark full", "request_pickup": "Request pickup", "collect": "Record collection"}


def moves_for(container: WasteContainer, role: str) -> list[tuple[str, str]]:
    """The state moves this role may take on the container now: (action, button text); the server checks again."""
    return [(action, MOVE_LABELS[action]) for action, (starts, _, _) in waste.MOVES.items()
            if container.state in starts and allowed(f"api.{action}_waste_container", role)]


@bp.get("/waste", endpoint="waste")
def container_list():
    query = PageQuery.model_validate(request.args.to_dict())
    session = get_session()
    found = waste.list_containers(session, lab_ids=lab_scope(), limit=query.limit, offset=query.offset)
    held = waste.elements_held(session, lab_ids=lab_scope())
    return render_template("pages/waste.html", containers=[dump_container(c) for c in found],
                           elements=[s for s in TRACKED_ELEMENTS if s in held], page=found)


@bp.get("/waste/<int:ident>", endpoint="container")
def container_page(ident: int, *, refusal: Optional[dict] = None, problem: Optional[str] = None, status: int = 200):
    """The container page; ``refusal`` (a refused reversal) or ``problem`` (a refused move) shown on it."""
    query = PageQuery.model_validate({k: v for k, v in request.args.items() if k in ("limit", "offset")})
    session = get_session()
    container = inventory.get(session, WasteContainer, ident)
    check_lab(container.lab_id)
    role = current_user().role
    entries = waste.entries_of(session, container, limit=query.limit, offset=query.offset)
    view = dump_container(container)
    buttons = {
        "entry": container.state == "open" and allowed("web.waste_entry", role),
        "moves": moves_for(container, role),
        "determine": allowed("web.container_determination", role),
        "reverse": container.state != "collected" and allowed("web.waste_entry_reverse", role),
    }
    return render_template("pages/container.html", container=view, entries=[dump_entry(e) for e in entries],
                           page=entries, buttons=buttons, charts=history_charts(container),
                           notice=DONE.get(request.args.get("done", "")), refusal=refusal, problem=problem), status


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
