"""API index and OpenAPI document (built by service.api.openapi from each view's declaration)."""

from __future__ import annotations

from flask import current_app, jsonify

from service import permissions
from service.api import bp
from service.api.openapi import build_document
from service.api.responses import Index
from service.operations import operation


def openapi_document() -> dict:
    return build_document(current_app, bp.url_prefix, public=permissions.PUBLIC, matrix=permissions.MATRIX,
                          roles=permissions.ROLES, version=current_app.config.get("VERSION", "0"))


@bp.get("/")
@operation(response=Index)
def index():
    """Where the resources and this document are."""
    from service.api.inventory import RESOURCES

    return jsonify({"resources": [f"{bp.url_prefix}/{r.name}" for r in RESOURCES], "openapi": f"{bp.url_prefix}/openapi.json"})


@bp.get("/openapi.json")
@operation(summary="This OpenAPI document")
def openapi():
    """This OpenAPI document."""
    return jsonify(openapi_document())
