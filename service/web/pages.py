"""Inventory pages: overview and stock list with element content."""

from __future__ import annotations

from flask import render_template, request

from service.auth import lab_scope
from service.schemas import ListQuery
from service.store import inventory
from service.store.db import get_session
from service.store.models import Lab, Location, Mixture, Stock
from service.web import bp

# Elements a nanocrystal group tracks on the overview, in this order.
TRACKED = ("Cd", "Se", "Te", "Pb", "Zn", "S", "In", "Cs")


@bp.get("/")
def overview():
    session = get_session()
    scope = lab_scope()
    stocks = inventory.list_records(session, Stock, limit=1000, lab_ids=scope)
    mixtures = inventory.list_records(session, Mixture, limit=1000, lab_ids=scope)
    totals = inventory.element_totals(session, lab_ids=scope)
    return render_template(
        "pages/overview.html",
        labs=inventory.list_records(session, Lab, lab_ids=scope),
        n_stocks=len(stocks),
        n_mixtures=len(mixtures),
        totals=[(symbol, totals.get(symbol, 0)) for symbol in TRACKED if totals.get(symbol)],
    )


@bp.get("/stocks")
def stocks():
    query = ListQuery.model_validate(request.args.to_dict())
    session = get_session()
    records = inventory.list_records(session, Stock, **query.model_dump(), lab_ids=lab_scope())
    locations = {loc.id: loc for loc in inventory.list_records(session, Location, include_retired=True, limit=1000)}
    return render_template(
        "pages/stocks.html",
        stocks=records,
        locations=locations,
        tracked=_present(records),
        element=query.element,
    )


@bp.get("/mixtures")
def mixtures():
    session = get_session()
    records = inventory.list_records(session, Mixture, limit=1000, lab_ids=lab_scope())
    return render_template(
        "pages/mixtures.html",
        mixtures=records,
        tracked=_present(records),
    )


def _present(records) -> list[str]:
    """The tracked elements that occur in ``records`` (columns worth showing)."""
    held = {e.element for r in records for e in r.elements if e.mass_ug}
    return [symbol for symbol in TRACKED if symbol in held]


@bp.app_template_filter("element_map")
def element_map(elements) -> dict[str, int]:
    """Element rows as {symbol: mass_ug} for table cells."""
    return {e.element: e.mass_ug for e in elements}
