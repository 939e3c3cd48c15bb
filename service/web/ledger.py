"""The ledger page: the site element ledger per month with the records behind each figure, metal into
waste per month by stream, on hand per lab, the generator category per month, and downloads.

Validated with the API's query models (``ElementLedgerQuery``, ``LedgerFigureQuery``) and computed by
the store functions the API's report routes call; the downloads write the same frames with the same
``ledger.download``. Site-wide: not for lab-scoped roles (service/permissions.py).
"""

from __future__ import annotations

from decimal import Decimal

from flask import Response, render_template, request

from service import vocab
from service.appdata import active_rules
from service.balance.site import FIGURES, months_between
from service.present.areas import dump_generator
from service.present.charts import bar_chart
from service.present.element_ledger import (
    CAUTION,
    dump_figure,
    ledger_frame,
    ledger_tables,
    on_hand_by_lab,
    waste_by_stream,
)
from service.present.runs import balance_tolerance
from service.schemas import (
    GENERATOR_MONTHS_MAX,
    ElementLedgerQuery,
    GeneratorQuery,
    LedgerDownloadQuery,
    LedgerFigureQuery,
)
from service.store import element_ledger, generator, ledger
from service.store.db import end_session, get_session
from service.web import bp

# What each figure of the ledger is, as the column headers and the drill-down page name them.
FIGURE_TITLES = {
    "opening": "opening", "received": "received", "into_products": "into products", "into_waste": "into waste",
    "shipped_out": "shipped out", "declared_losses": "declared losses", "corrections": "corrections",
    "closing": "closing", "unaccounted": "unaccounted",
}
CHART_MONTHS = 36  # three years of bars per element stay legible


def _query() -> ElementLedgerQuery:
    """The months and element from the address (an empty field is left out)."""
    return ElementLedgerQuery.model_validate({k: v.strip() for k, v in request.args.items() if v.strip()})


def _exact_mg(value) -> str:
    """A chart's mg as the ledger's tables write them: exact to the µg.

    >>> _exact_mg(Decimal("6298") / 1000)
    '6.298'
    """
    return f"{Decimal(value):,.3f}"


def _months_back(until: str, count: int) -> str:
    """The month ``count - 1`` months before ``until`` ('YYYY-MM').

    >>> _months_back("2026-03", 12)
    '2025-04'
    """
    year, month = map(int, until.split("-"))
    back = year * 12 + month - 1 - (count - 1)
    return f"{back // 12:04d}-{back % 12 + 1:02d}"


@bp.get("/ledger", endpoint="ledger")
def ledger_page():
    query = _query()
    session = get_session()
    since, until = element_ledger.month_range(session, query.since, query.until)
    lines = element_ledger.ledger_lines(session, since=since, until=until, element=query.element,
                                        tolerance=balance_tolerance())
    # The chart's months: the ledger's, at most the latest CHART_MONTHS (the tables hold every month).
    months = months_between(since, until)[-CHART_MONTHS:]
    start, _ = element_ledger.month_bounds(months[0])
    _, end = element_ledger.month_bounds(until)
    waste = waste_by_stream(ledger.waste_by(session, ("element", "stream", "month"), since=start, until=end,
                                            element=query.element), months)
    charts = [bar_chart(f"{panel['element']} into waste per month by stream", panel["months"], panel["series"], "mg",
                        stacked=True, number=_exact_mg) for panel in waste]
    on_hand = on_hand_by_lab(ledger.inventory_on_hand(session, ("element", "lab"), element=query.element),
                             (query.element,) if query.element else vocab.TRACKED_ELEMENTS)
    # The generator category per month over the same months, at most its report's span (the latest months).
    gen_query = GeneratorQuery.model_validate({"since": max(since, _months_back(until, GENERATOR_MONTHS_MAX)),
                                               "until": until})
    rules = active_rules()
    category = dump_generator(generator.generator_months(session, rules, gen_query.since, gen_query.until), rules,
                              gen_query.since, gen_query.until)
    end_session()
    return render_template("pages/ledger.html", tables=ledger_tables(lines), figures=FIGURES,
                           titles=FIGURE_TITLES, since=since, until=until, element=query.element,
                           elements=vocab.TRACKED_ELEMENTS, waste=waste, charts=charts, on_hand=on_hand,
                           category=category, caution=CAUTION, chart_months=months,
                           filters={k: request.args.get(k, "") for k in ("since", "until", "element")})


@bp.get("/ledger/figure", endpoint="ledger_figure")
def ledger_figure():
    """The records behind one figure, their sum, and the figure as the ledger states it."""
    query = LedgerFigureQuery.model_validate(request.args.to_dict())
    session = get_session()
    parts = element_ledger.contributions(session, query.element, query.month, query.figure)
    lines = element_ledger.ledger_lines(session, since=query.month, until=query.month, element=query.element,
                                        tolerance=balance_tolerance())
    stated = lines[0].to_dict()[f"{query.figure}_ug"] if lines else 0
    view = dump_figure(query.element, query.month, query.figure, parts)
    end_session()
    return render_template("pages/ledger_figure.html", view=view, stated_ug=stated, title=FIGURE_TITLES[query.figure])


@bp.get("/ledger/download", endpoint="ledger_download")
def ledger_download():
    """The ledger (``elements``), metal into waste by element, stream and month (``waste``) or on hand by
    element and lab (``inventory``) over the page's months, as CSV or XLSX."""
    query = LedgerDownloadQuery.model_validate({k: v.strip() for k, v in request.args.items() if v.strip()})
    session = get_session()
    since, until = element_ledger.month_range(session, query.since, query.until)
    if query.report == "elements":
        frame = ledger_frame(element_ledger.ledger_lines(session, since=since, until=until, element=query.element,
                                                         tolerance=balance_tolerance()))
    elif query.report == "waste":
        start, _ = element_ledger.month_bounds(since)
        _, end = element_ledger.month_bounds(until)
        frame = ledger.waste_by(session, ("element", "stream", "month"), since=start, until=end, element=query.element)
    else:
        frame = ledger.inventory_on_hand(session, ("element", "lab"), element=query.element)
    end_session()  # the frame is plain data: write it with no transaction open
    body, mimetype, filename = ledger.download(frame, query.report, query.format)
    return Response(body, content_type=mimetype, headers={"Content-Disposition": f'attachment; filename="{filename}"'})
