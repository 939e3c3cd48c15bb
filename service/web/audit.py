"""The audit trail page: events with filters and paging, and the hash chain verified on request.

The listing calls the store function the API's audit endpoint calls, validated with the
same query schema; "verify now" runs the check ``dotledger audit-verify`` runs.
"""

from __future__ import annotations

import datetime as dt
import re

from flask import render_template, request

from service.present.identity import dump_event
from service.schemas import AuditQuery
from service.store import audit
from service.store.db import get_session
from service.web import bp

_DATE_ONLY = re.compile(r"^\d{4}-\d{2}-\d{2}$")
# The actions the filter offers; "state_change" matches every state change.
ACTIONS = ("create", "update", "retire", "delete", "state_change")


def _query() -> AuditQuery:
    """The filters from the address; a bare date in ``until`` includes that whole day."""
    args = {k: v.strip() for k, v in request.args.items() if v.strip()}
    query = AuditQuery.model_validate(args)
    if query.until is not None and _DATE_ONLY.match(args.get("until", "")) and query.until.date() < dt.date.max:
        query = query.model_copy(update={"until": query.until + dt.timedelta(days=1)})
    return query


def _page(report: audit.ChainReport | None = None, status: int = 200):
    query = _query()
    session = get_session()
    events = audit.list_events(session, **query.model_dump())
    head = session.get(audit.AuditHead, 1)
    return render_template("pages/audit.html", events=[{**dump_event(e), "changes": changes(e)} for e in events],
                           page=events,
                           filters={k: request.args.get(k, "") for k in ("entity", "entity_id", "actor", "action",
                                                                         "since", "until")},
                           actions=ACTIONS, report=report, head=head), status


def changes(event) -> list[tuple[str, object, object]]:
    """(field, before, after) for each field the event changed, in field order; every field of a create or delete."""
    before, after = event.before or {}, event.after or {}
    return [(k, before.get(k), after.get(k)) for k in sorted(before.keys() | after.keys())
            if before.get(k) != after.get(k) or not (event.before and event.after)]


@bp.get("/audit", endpoint="audit")
def audit_page():
    return _page()


@bp.post("/audit/verify", endpoint="audit_verify")
def audit_verify():
    """Recompute the hash chain now and show the answer above the listing (a broken chain is not an HTTP error)."""
    return _page(audit.verify_chain(get_session()))
