"""Inventory pages: the role home (overview) and the stock and mixture lists with element content."""

from __future__ import annotations

from flask import render_template, request, url_for

from service.appdata import active_rules
from service.auth import current_user, lab_scope
from service.present.procedures import dump_procedure
from service.present.runs import dump_run
from service.present.waste import dump_container
from service.schemas import ListQuery, PageQuery
from service.store import inventory, ledger, procedures, runs, waste
from service.store.db import get_session
from service.store.models import Lab, Mixture, Procedure, Stock
from service.vocab import TRACKED_ELEMENTS as TRACKED
from service.web import bp

HOME_ROWS = 20  # rows per list on a role home; the full lists are a link away
NEAR_FULL_PERCENT = 80  # a container this full is "near its limit" on the safety officer's home
NEAR_LIMIT_LEVELS = ("review", "block")  # … as is one with findings at these levels
# Which sections each role's home shows (keys of _SECTIONS), in order.
HOME_SECTIONS = {
    "researcher": ("my_drafts", "my_submitted", "my_approved", "my_open_runs"),
    "safety_officer": ("review_queue", "containers_near_limit", "pickups_requested"),
    "lab_manager": ("inventory_by_element", "waste_ledger"),
    "auditor": ("audit",),
    "admin": ("review_queue", "pickups_requested", "waste_ledger", "audit"),
}


@bp.get("/")
def overview():
    session = get_session()
    scope = lab_scope()
    totals = inventory.element_totals(session, lab_ids=scope)
    user = current_user()
    sections = {name: _SECTIONS[name](session, user, scope) for name in HOME_SECTIONS.get(user.role, ())}
    return render_template(
        "pages/overview.html",
        labs=inventory.list_records(session, Lab, lab_ids=scope, limit=PageQuery().limit),
        n_stocks=inventory.list_records(session, Stock, limit=1, lab_ids=scope).total,
        n_mixtures=inventory.list_records(session, Mixture, limit=1, lab_ids=scope).total,
        totals=[(symbol, totals.get(symbol, 0)) for symbol in TRACKED if totals.get(symbol)],
        sections=sections,
        near_full=NEAR_FULL_PERCENT,
    )


def _mine(*states: str):
    """The signed-in researcher's own procedures in ``states``, as the procedure pages show them."""
    def section(session, user, scope):
        found = procedures.list_procedures(session, researcher_id=user.id, states=states, lab_ids=scope,
                                           limit=HOME_ROWS)
        return {"total": found.total, "rows": [dump_procedure(p, with_findings=False) for p in found]}
    return section


def _my_open_runs(session, user, scope):
    found = runs.list_runs(session, researcher_id=user.id, state="open", lab_ids=scope, limit=HOME_ROWS)
    return {"total": found.total,
            "rows": [{**dump_run(r, with_balance=False), "procedure_title": session.get(Procedure, r.procedure_id).title}
                     for r in found]}


def _review_queue(session, user, scope):
    found = procedures.review_queue(session, active_rules(), limit=HOME_ROWS)
    return {"total": found.total,
            "rows": [{**dump_procedure(p, with_findings=False), "highest_level": level} for p, level in found]}


def _containers_near_limit(session, user, scope):
    """Containers still filling or full whose fill is at least NEAR_FULL_PERCENT or that have review/block findings."""
    rows = []
    for state in ("open", "full"):
        for container in waste.list_containers(session, lab_ids=scope, state=state):
            shown = dump_container(container)
            if shown["fill_percent"] >= NEAR_FULL_PERCENT or shown["highest_level"] in NEAR_LIMIT_LEVELS:
                rows.append(shown)
    rows.sort(key=lambda c: -c["fill_percent"])
    return {"total": len(rows), "rows": rows[:HOME_ROWS]}


def _pickups_requested(session, user, scope):
    found = waste.list_containers(session, lab_ids=scope, state="pickup_requested", limit=HOME_ROWS)
    return {"total": found.total, "rows": [dump_container(c) for c in found]}


def _inventory_by_element(session, user, scope):
    """Each tracked element on hand (inventory.element_totals) beside what went into waste (the API's waste report)."""
    totals = inventory.element_totals(session, lab_ids=scope)
    wasted = {row["element"]: row["mass_ug"]
              for row in ledger.run_report(session, "waste", ("element",), lab_ids=scope).to_dict("records")}
    rows = [{"element": symbol, "mass_ug": totals.get(symbol, 0), "waste_ug": wasted.get(symbol, 0)}
            for symbol in TRACKED if totals.get(symbol) or wasted.get(symbol)]
    return {"total": len(rows), "rows": rows}


def _waste_ledger(session, user, scope):
    """Net element mass put into waste, by element and stream: the waste report of the API (ledger.run_report)."""
    frame = ledger.run_report(session, "waste", ("element", "stream"), lab_ids=scope)
    rows = frame.to_dict("records")
    return {"total": len(rows), "rows": rows}


def _audit(session, user, scope):
    return {"total": 0, "rows": []}  # a link only; the trail has its own page


_SECTIONS = {
    "my_drafts": _mine("draft", "changes_requested"),
    "my_submitted": _mine("submitted"),
    "my_approved": _mine("approved"),
    "my_open_runs": _my_open_runs,
    "review_queue": _review_queue,
    "containers_near_limit": _containers_near_limit,
    "pickups_requested": _pickups_requested,
    "inventory_by_element": _inventory_by_element,
    "waste_ledger": _waste_ledger,
    "audit": _audit,
}


@bp.get("/stocks")
def stocks():
    query = ListQuery.model_validate(request.args.to_dict())
    session = get_session()
    records = inventory.list_records(session, Stock, **query.model_dump(), lab_ids=lab_scope())
    return render_template(
        "pages/stocks.html",
        stocks=records,
        locations=inventory.locations_by_id(session, (s.location_id for s in records)),
        tracked=_present(records),
        element=query.element,
    )


@bp.get("/mixtures")
def mixtures():
    query = PageQuery.model_validate(request.args.to_dict())
    session = get_session()
    records = inventory.list_records(session, Mixture, limit=query.limit, offset=query.offset, lab_ids=lab_scope())
    return render_template(
        "pages/mixtures.html",
        mixtures=records,
        sources=inventory.source_labels(session, records),
        tracked=_present(records),
    )


def _present(records) -> list[str]:
    """The tracked elements that occur in ``records`` (columns worth showing)."""
    held = {e.element for r in records for e in r.elements if e.mass_ug}
    return [symbol for symbol in TRACKED if symbol in held]


@bp.app_template_global("page_url")
def page_url(page, offset: int) -> str:
    """This page's address with the same filters and page size, starting at ``offset``."""
    args = {**request.args.to_dict(), "offset": max(offset, 0), "limit": page.limit}
    return url_for(request.endpoint, **request.view_args, **args)


@bp.app_template_filter("element_map")
def element_map(elements) -> dict[str, int]:
    """Element rows as {symbol: mass_ug} for table cells."""
    return {e.element: e.mass_ug for e in elements}
