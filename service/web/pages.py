"""Inventory pages: overview and stock list with element content."""

from __future__ import annotations

from flask import render_template, request, url_for

from service.auth import lab_scope
from service.schemas import ListQuery, PageQuery
from service.store import inventory
from service.store.db import get_session
from service.store.models import Lab, Mixture, Stock
from service.vocab import TRACKED_ELEMENTS as TRACKED
from service.web import bp


@bp.get("/")
def overview():
    session = get_session()
    scope = lab_scope()
    totals = inventory.element_totals(session, lab_ids=scope)
    return render_template(
        "pages/overview.html",
        labs=inventory.list_records(session, Lab, lab_ids=scope, limit=PageQuery().limit),
        n_stocks=inventory.list_records(session, Stock, limit=1, lab_ids=scope).total,
        n_mixtures=inventory.list_records(session, Mixture, limit=1, lab_ids=scope).total,
        totals=[(symbol, totals.get(symbol, 0)) for symbol in TRACKED if totals.get(symbol)],
    )


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
    records = inventory.list_records(get_session(), Mixture, limit=query.limit, offset=query.offset,
                                     lab_ids=lab_scope())
    return render_template(
        "pages/mixtures.html",
        mixtures=records,
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
