"""Printed documents over HTTP: risk-assessment sheets and waste manifests as PDF or HTML preview.

A blueprint of its own under the API's prefix (``/api/v1``), registered by ``service.app``; being
under the prefix, its requests take bearer tokens and answer JSON errors like the API's
(``service.operations.is_api_path``), and its views appear in the OpenAPI document.

Lab-scoped like the JSON reads. The data is gathered in the request's session, which then
ends; the HTML and the PDF are made after it (no transaction open while WeasyPrint works).
Every answer carries ``X-Document-SHA256``, the hash of the document's data that is also
printed in its footer.
"""

from __future__ import annotations

from flask import Blueprint, Response

from service.auth import check_lab
from service.documents.render import Draft
from service.documents.sources import assessment_for, manifest_for
from service.operations import API_PREFIX, operation
from service.store import inventory
from service.store.db import end_session, get_session
from service.store.models import Procedure, WasteContainer

__all__ = ["bp"]

bp = Blueprint("documents", __name__, url_prefix=API_PREFIX)


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


@bp.get("/procedures/<int:ident>/assessment.pdf", endpoint="procedure_assessment_pdf")
@operation(media=("application/pdf",), errors=(403,))
def assessment_pdf(ident: int):
    """The procedure's risk-assessment sheet as PDF."""
    return _answer(assessment_for(_visible(Procedure, ident)), "pdf")


@bp.get("/procedures/<int:ident>/assessment.html", endpoint="procedure_assessment_html")
@operation(media=("text/html",), errors=(403,))
def assessment_html(ident: int):
    """The procedure's risk-assessment sheet as HTML (preview)."""
    return _answer(assessment_for(_visible(Procedure, ident)), "html")


@bp.get("/waste_containers/<int:ident>/manifest.pdf", endpoint="waste_container_manifest_pdf")
@operation(media=("application/pdf",), errors=(403,))
def manifest_pdf(ident: int):
    """The container's waste manifest as PDF."""
    return _answer(manifest_for(_visible(WasteContainer, ident)), "pdf")


@bp.get("/waste_containers/<int:ident>/manifest.html", endpoint="waste_container_manifest_html")
@operation(media=("text/html",), errors=(403,))
def manifest_html(ident: int):
    """The container's waste manifest as HTML (preview)."""
    return _answer(manifest_for(_visible(WasteContainer, ident)), "html")
