"""The OpenAPI 3.1 document of /api/v1, generated from what each view declares with ``@operation``.

The decorator lives in ``service.operations`` (below every blueprint that serves under /api/v1:
``api`` and ``documents``); the document covers every route under the prefix, whichever blueprint.

A view names the pydantic models it validates its body and query string with, its success status
and the shape of its answer, and the 4xx answers particular to it (a conflict, a lab check). The
answers every route shares follow from the route and the permission matrix: 401 unless the route is
public, 403 where the matrix leaves a role out, 404 for a record named in the path, 400, 413 and 422
for a JSON body, 422 for query parameters. A view without ``@operation`` is missing from the document,
and tests/test_openapi.py fails.
"""

from __future__ import annotations

import re
from http import HTTPStatus
from typing import Callable, Optional

from pydantic import BaseModel

from service.api.idempotency import HEADER as IDEMPOTENCY_HEADER, KEY_MAX_CHARS, METHODS as IDEMPOTENT_METHODS
from service.api.responses import Error
from service.operations import JSON, Operation, declared
from service.schemas import ID_MAX

__all__ = ["build_document"]

REF = "#/components/schemas/{model}"


class _Components:
    """Component schemas collected from pydantic models (their nested models become components too)."""

    def __init__(self) -> None:
        self.schemas: dict[str, dict] = {}

    def ref(self, model: type[BaseModel], mode: str = "validation") -> dict:
        name = model.__name__
        if name not in self.schemas:
            schema = model.model_json_schema(ref_template=REF, mode=mode)
            self.schemas.update(schema.pop("$defs", {}))
            self.schemas[name] = schema
        return {"$ref": REF.format(model=name)}

    def page(self, item: Optional[type[BaseModel]]) -> dict:
        name = f"{item.__name__}Page" if item else "Page"
        if name not in self.schemas:
            count = {"type": "integer", "minimum": 0}
            self.schemas[name] = {
                "type": "object",
                "title": name,
                "description": "one page of a listing and the number of records that match in all",
                "required": ["items", "total", "limit", "offset"],
                "properties": {
                    "items": {"type": "array", "items": self.ref(item, "serialization") if item else {"type": "object"}},
                    "total": {**count, "description": "records matching the filters, on every page"},
                    "limit": {**count, "description": "the page size asked for"},
                    "offset": {**count, "description": "records skipped before this page"},
                },
            }
        return {"$ref": REF.format(model=name)}


_PATH_ARG = re.compile(r"<(?:(\w+):)?(\w+)>")


def _parameters(rule: str, op: Operation, components: _Components) -> list[dict]:
    params = [{"name": name, "in": "path", "required": True,
               "schema": {"type": "integer", "minimum": 1, "maximum": ID_MAX} if converter == "int" else {"type": "string"}}
              for converter, name in _PATH_ARG.findall(rule)]
    if op.query is not None:
        schema = op.query.model_json_schema(ref_template=REF)
        components.schemas.update(schema.pop("$defs", {}))
        required = set(schema.get("required", ()))
        for name, prop in schema["properties"].items():
            param = {"name": name, "in": "query", "required": name in required, "schema": prop}
            if prop.get("type") == "array":  # sent as one comma-separated value: by=element,month
                param.update(style="form", explode=False)
            if "description" in prop:
                param["description"] = prop["description"]
            params.append(param)
    return params


def _errors(codes: set[int]) -> dict:
    return {str(code): {"description": HTTPStatus(code).phrase,
                        "content": {JSON: {"schema": {"$ref": REF.format(model="Error")}}}}
            for code in sorted(codes)}


_IDEMPOTENCY_PARAMETER = {
    "name": IDEMPOTENCY_HEADER, "in": "header", "required": False,
    "schema": {"type": "string", "minLength": 1, "maxLength": KEY_MAX_CHARS, "pattern": "^[!-~]+$"},
    "description": "a key the client makes up for this write: a repeat with the same key, method, path and body "
                   "answers the first success again and records nothing (the header Idempotent-Replayed: true "
                   "marks it); the same key with another request answers 422; 409 while a request with the key "
                   "is still being recorded",
}


def _idempotent(endpoint: str, method: str, public: frozenset) -> bool:
    """Whether the operation takes an Idempotency-Key (the api blueprint's writes by a signed-in user)."""
    return method in IDEMPOTENT_METHODS and endpoint.startswith("api.") and endpoint not in public


def _operation(endpoint: str, method: str, rule: str, view: Callable, op: Operation, components: _Components,
               public: frozenset, allowed_roles: frozenset, all_roles: frozenset) -> dict:
    codes = set(op.errors)
    idempotent = _idempotent(endpoint, method, public)
    if idempotent:
        codes |= {409, 422}
    if endpoint not in public:
        codes.add(401)
        if allowed_roles != all_roles:
            codes.add(403)
    if _PATH_ARG.search(rule):
        codes.add(404)
    if op.body is not None or op.upload is not None:
        codes |= {400, 413, 422}  # not JSON or nested too deep; above MAX_CONTENT_LENGTH; does not validate
    if op.query is not None:
        codes.add(422)
    if op.paged:
        schema = components.page(op.response)
    else:
        schema = components.ref(op.response, "serialization") if op.response else None
    content = {media: ({"schema": schema} if schema and media == JSON else {}) for media in op.media}
    statuses = op.status if isinstance(op.status, tuple) else (op.status,)
    responses = {str(s): {"description": HTTPStatus(s).phrase, "content": content} for s in statuses}
    doc = (view.__doc__ or "").strip().splitlines()
    out = {
        "operationId": endpoint.split(".", 1)[-1],
        "summary": op.summary or (doc[0] if doc else endpoint.split(".", 1)[-1].replace("_", " ")),
        "tags": [rule.split("/")[3] or "api"],
        "parameters": _parameters(rule, op, components) + ([dict(_IDEMPOTENCY_PARAMETER)] if idempotent else []),
        "responses": {**responses, **_errors(codes)},
    }
    if op.body is not None:
        out["requestBody"] = {"required": op.body_required, "content": {JSON: {"schema": components.ref(op.body)}}}
    elif op.upload is not None:
        out["requestBody"] = {"required": True, "content": {"multipart/form-data": {"schema": {
            "type": "object", "required": [op.upload],
            "properties": {op.upload: {"type": "string", "format": "binary"}}}}}}
    if endpoint in public:
        out["security"] = []
    return out


def build_document(app, prefix: str, *, public: frozenset, matrix: dict, roles: tuple, version: str) -> dict:
    """The document for every route under ``prefix`` whose view declares an ``@operation``."""
    components = _Components()
    components.ref(Error, "serialization")
    paths: dict[str, dict] = {}
    for rule in sorted(app.url_map.iter_rules(), key=lambda r: r.rule):
        if not rule.rule.startswith(prefix + "/"):
            continue
        view = app.view_functions[rule.endpoint]
        op = declared(view)
        if op is None:
            continue
        path = _PATH_ARG.sub(r"{\2}", rule.rule)
        for method in sorted(rule.methods - {"HEAD", "OPTIONS"}):
            paths.setdefault(path, {})[method.lower()] = _operation(
                rule.endpoint, method, rule.rule, view, op, components, public, matrix.get(rule.endpoint, frozenset()),
                frozenset(roles))
    return {
        "openapi": "3.1.0",
        "info": {"title": "dotledger API", "version": version,
                 "description": "Suggestions only: classifications and approvals rest with the site safety "
                                "officer and local regulations."},
        "servers": [{"url": "/"}],
        "paths": paths,
        "components": {
            "schemas": dict(sorted(components.schemas.items())),
            "securitySchemes": {"bearer": {"type": "http", "scheme": "bearer",
                                           "description": "a personal token (dlt_…) from POST /api/v1/auth/tokens"}},
        },
        "security": [{"bearer": []}],
    }
