"""Printed documents over HTTP: risk-assessment sheets and waste manifests as PDF or HTML preview.

A blueprint of its own under the API's prefix (``/api/v1``), registered by ``service.app``; being
under the prefix, its requests take bearer tokens and answer JSON errors like the API's
(``service.operations.is_api_path``), and its views appear in the OpenAPI document.

Lab-scoped like the JSON reads. The data is gathered in the request's session, which then
ends; the HTML and the PDF are made after it (no transaction open while WeasyPrint works).
The PDFs are also served to the pages by a second blueprint without the prefix (``pages``,
``/procedures/<id>/assessment.pdf``, ``/waste/<id>/manifest.pdf`` and ``/waste/<id>/label.pdf``), where the sign-in
cookie authorises them. Every answer carries ``X-Document-SHA256``, the hash of the document's data that is also
printed in its footer.
"""

from __future__ import annotations

from flask import Blueprint, Response, request

from service.auth import check_lab
from service.documents.render import Draft
from service.documents.sources import assessment_for, label_for, manifest_for
from service.operations import API_PREFIX, operation
from service.schemas import LabelQuery, ManifestQuery
from service.store import inventory
from service.store.db import end_session, get_session
from service.store.models import Procedure, WasteContainer

__all__ = ["bp", "pages"]

bp = Blueprint("documents", __name__, url_prefix=API_PREFIX)
# The same PDFs for the pages, outside the prefix: the sign-in cookie authorises them, errors are
# pages, and they stay out of the OpenAPI document (which describes the routes under the prefix).
pages = Blueprint("documents_pages", __name__)


def _visible(model, ident: int):
    record = inventory.get(get_session(), model, ident)
    check_lab(record.lab_id)
    return record


def _answer(draft: Draft, fmt: str) -> Response:
    end_session()
    doc = draft.render()
    headers = {"X-Document-SHA256": doc.sha256, "X-Document-Id": doc.document_id}
    if fmt == "pdf":
        headers["Content-Disposition"] = f'inline; filename="{doc.filename}.pdf"'
        return Response(doc.pdf(), mimetype="application/pdf", headers=headers)
    return Response(doc.html, mimetype="text/html", headers=headers)


def _view(model, gather, fmt: str, summary: str, query=None):
    @operation(media=(_MEDIA[fmt],), errors=(403,), query=query)
    def view(ident: int):
        options = (query.model_validate(request.args.to_dict()),) if query is not None else ()
        return _answer(gather(_visible(model, ident), *options), fmt)

    view.__doc__ = summary
    return view


_MEDIA = {"pdf": "application/pdf", "html": "text/html"}
_SHIPMENT = (" The query names the transporter, the receiving facility, the container count and type; what it "
             "leaves out prints as a line to fill by hand.")
# (API path, page path or None, endpoint, model, gatherer, format, summary, query model or None)
_ROUTES = (
    ("/procedures/<int:ident>/assessment.pdf", "/procedures/<int:ident>/assessment.pdf", "procedure_assessment_pdf",
     Procedure, assessment_for, "pdf", "The procedure's risk-assessment sheet as PDF.", None),
    ("/procedures/<int:ident>/assessment.html", None, "procedure_assessment_html",
     Procedure, assessment_for, "html", "The procedure's risk-assessment sheet as HTML (preview).", None),
    ("/waste_containers/<int:ident>/manifest.pdf", "/waste/<int:ident>/manifest.pdf", "waste_container_manifest_pdf",
     WasteContainer, manifest_for, "pdf", "The container's waste manifest as PDF." + _SHIPMENT, ManifestQuery),
    ("/waste_containers/<int:ident>/manifest.html", None, "waste_container_manifest_html",
     WasteContainer, manifest_for, "html", "The container's waste manifest as HTML (preview)." + _SHIPMENT,
     ManifestQuery),
    ("/waste_containers/<int:ident>/label.pdf", "/waste/<int:ident>/label.pdf", "waste_container_label_pdf",
     WasteContainer, label_for, "pdf", "The container's label as PDF: \"Hazardous Waste\", the hazards of its contents, "
     "the stream, the accumulation start date, the container's id and a QR code of its entry page. `size` chooses one "
     "100 mm × 150 mm label or a sheet of labels (A4 2 × 4, US Letter 2 × 3).", LabelQuery),
)
for _api_path, _page_path, _endpoint, _model, _gather, _fmt, _summary, _query in _ROUTES:
    _document_view = _view(_model, _gather, _fmt, _summary, _query)
    bp.add_url_rule(_api_path, _endpoint, _document_view, methods=["GET"])
    if _page_path is not None:
        pages.add_url_rule(_page_path, _endpoint, _document_view, methods=["GET"])
