"""Ledger reports: waste leaving and inventory on hand, as JSON, CSV or XLSX.

``GET /api/v1/reports/waste?by=element,stream,month&since=2026-01-01&until=2026-03-31&element=Cd&format=csv``
``GET /api/v1/reports/inventory?by=element,location&format=xlsx``
``GET /api/v1/reports/elements?since=2026-01&until=2026-12&element=Cd&format=csv`` (the site element ledger)
``GET /api/v1/reports/elements/contributions?element=Cd&month=2026-03&figure=into_waste`` (the records
behind one of its figures)

Researchers see their own labs' figures of the waste and inventory reports; the site element ledger is
site-wide and read by the other roles.
"""

from __future__ import annotations

import datetime as dt
from typing import ClassVar, Literal, Optional

from flask import Response, jsonify, request
from pydantic import BaseModel, ConfigDict, Field, field_validator, model_validator

from service.api import bp
from service.api.responses import ElementLedger, GeneratorReport, LedgerFigure, Report
from service.appdata import active_rules
from service.auth import lab_scope
from service.operations import operation
from service.present.areas import dump_generator
from service.present.element_ledger import dump_figure, dump_ledger, ledger_frame
from service.present.runs import balance_tolerance
from service.schemas import ElementLedgerQuery, ElementSymbol, GeneratorQuery, LedgerFigureQuery
from service.store import element_ledger, generator, ledger
from service.store.db import end_session, get_session

XLSX = ledger.XLSX


class _ReportQuery(BaseModel):
    model_config = ConfigDict(extra="forbid")
    report: ClassVar[str]
    by: tuple[str, ...] = Field(default=(), validate_default=True)  # "a,b,c" in the query; () = default
    element: Optional[ElementSymbol] = None
    format: Literal["json", "csv", "xlsx"] = "json"

    @field_validator("by", mode="before")
    @classmethod
    def _split(cls, value):
        if isinstance(value, str):
            return tuple(part.strip() for part in value.split(",") if part.strip())
        return value

    @field_validator("by", mode="after")
    @classmethod
    def _keys(cls, value: tuple[str, ...]) -> tuple[str, ...]:
        return ledger.REPORTS[cls.report].check_by(value)  # UnknownGroupKey is a ValueError: 422

    def filters(self) -> dict:
        return {"element": self.element}


class WasteQuery(_ReportQuery):
    report: ClassVar[str] = "waste"
    since: Optional[dt.date] = None
    until: Optional[dt.date] = None

    @model_validator(mode="after")
    def _order(self):
        if self.since and self.until and self.since > self.until:
            raise ValueError(f"since ({self.since}) is after until ({self.until})")
        return self

    def filters(self) -> dict:
        return {**super().filters(), "since": self.since, "until": self.until}


class InventoryQuery(_ReportQuery):
    report: ClassVar[str] = "inventory"


def _parse(model: type[_ReportQuery]) -> _ReportQuery:
    return model.model_validate(request.args.to_dict())


def render(frame, query: _ReportQuery):
    """The frame as the JSON envelope or as a CSV/XLSX attachment."""
    if query.format == "json":
        return jsonify({"report": query.report, "by": list(query.by), "columns": list(frame.columns),
                        "rows": frame.to_dict(orient="records"), "count": len(frame),
                        "units": ledger.UNITS, "caution": ledger.CAUTION})
    body, mimetype, filename = ledger.download(frame, query.report, query.format)
    return Response(body, content_type=mimetype, headers={"Content-Disposition": f'attachment; filename="{filename}"'})


MEDIA = ("application/json", "text/csv", XLSX)


@bp.get("/reports/waste", endpoint="report_waste")
@operation(query=WasteQuery, response=Report, media=MEDIA)
def report_waste():
    """Waste leaving: element masses into waste, grouped as asked."""
    query = _parse(WasteQuery)
    frame = ledger.run_report(get_session(), "waste", query.by, lab_ids=lab_scope(), **query.filters())
    end_session()  # the frame is plain data: serialise it with no transaction open
    return render(frame, query)


@bp.get("/reports/inventory", endpoint="report_inventory")
@operation(query=InventoryQuery, response=Report, media=MEDIA)
def report_inventory():
    """Inventory on hand: element masses in active stocks and mixtures, grouped as asked."""
    query = _parse(InventoryQuery)
    frame = ledger.run_report(get_session(), "inventory", query.by, lab_ids=lab_scope(), **query.filters())
    end_session()  # the frame is plain data: serialise it with no transaction open
    return render(frame, query)


@bp.get("/reports/elements", endpoint="report_elements")
@operation(query=ElementLedgerQuery, response=ElementLedger, media=MEDIA)
def report_elements():
    """The site element ledger per element and month: opening, received, into products, into waste,
    shipped out, declared losses, corrections, closing and the unaccounted remainder (µg)."""
    query = ElementLedgerQuery.model_validate(request.args.to_dict())
    lines = element_ledger.ledger_lines(get_session(), since=query.since, until=query.until, element=query.element,
                                        tolerance=balance_tolerance())
    end_session()
    if query.format == "json":
        return jsonify(dump_ledger(lines))
    return render(ledger_frame(lines), query)


@bp.get("/reports/elements/contributions", endpoint="report_element_figure")
@operation(query=LedgerFigureQuery, response=LedgerFigure)
def report_element_figure():
    """The records behind one figure of the site element ledger, each with its part (µg)."""
    query = LedgerFigureQuery.model_validate(request.args.to_dict())
    parts = element_ledger.contributions(get_session(), query.element, query.month, query.figure)
    return jsonify(dump_figure(query.element, query.month, query.figure, parts))
@bp.get("/reports/generator_category", endpoint="report_generator_category")
@operation(query=GeneratorQuery, response=GeneratorReport)
def report_generator_category():
    """Hazardous waste generated per calendar month (UTC) at the whole site, in kg, and the generator
    category each month gives under the rule packs (40 CFR 262.13), with the months that moved it."""
    query = GeneratorQuery.model_validate(request.args.to_dict())
    rules = active_rules()
    months = generator.generator_months(get_session(), rules, query.since, query.until)
    end_session()
    return jsonify(dump_generator(months, rules, query.since, query.until))
