"""API index and OpenAPI document, built from the resource table and the pydantic bodies."""

from __future__ import annotations

from flask import current_app, jsonify

from service.api import bp

_ERROR = {
    "type": "object",
    "properties": {
        "error": {
            "type": "object",
            "properties": {"code": {"type": "string"}, "message": {"type": "string"}, "details": {}},
            "required": ["code", "message"],
        }
    },
}


def openapi_document() -> dict:
    from service.api.inventory import RESOURCES, ListQuery

    schemas: dict = {"Error": _ERROR}
    paths: dict = {}
    errors = {str(s): {"description": "error", "content": {"application/json": {"schema": {"$ref": "#/components/schemas/Error"}}}}
              for s in (400, 404, 409, 422)}
    query_schema = ListQuery.model_json_schema()["properties"]
    params = [{"name": name, "in": "query", "required": False, "schema": query_schema[name]} for name in query_schema]
    for res in RESOURCES:
        for body in (res.create_body, res.patch_body):
            schema = body.model_json_schema(ref_template="#/components/schemas/{model}")
            schemas.update(schema.pop("$defs", {}))
            schemas[body.__name__] = schema
        ok = {"200": {"description": "the record"}, **errors}
        paths[f"/api/v1/{res.name}"] = {
            "get": {"summary": f"list {res.name}", "parameters": params, "responses": ok},
            "post": {
                "summary": f"create one of {res.name}",
                "requestBody": {"content": {"application/json": {"schema": {"$ref": f"#/components/schemas/{res.create_body.__name__}"}}}},
                "responses": {"201": {"description": "created"}, **errors},
            },
        }
        ident = [{"name": "ident", "in": "path", "required": True, "schema": {"type": "integer"}}]
        paths[f"/api/v1/{res.name}/{{ident}}"] = {
            "get": {"summary": f"read one of {res.name}", "parameters": ident, "responses": ok},
            "patch": {
                "summary": f"update one of {res.name}",
                "parameters": ident,
                "requestBody": {"content": {"application/json": {"schema": {"$ref": f"#/components/schemas/{res.patch_body.__name__}"}}}},
                "responses": ok,
            },
        }
        paths[f"/api/v1/{res.name}/{{ident}}/retire"] = {
            "post": {"summary": f"retire one of {res.name}", "parameters": ident, "responses": ok}
        }
    _add_other_routes(paths, errors)
    return {
        "openapi": "3.1.0",
        "info": {"title": "dotledger API", "version": current_app.config.get("VERSION", "0")},
        "paths": paths,
        "components": {"schemas": schemas},
    }


def _add_other_routes(paths: dict, errors: dict) -> None:
    """Every other /api/v1 route, described from its view's docstring and path parameters."""
    import re

    for rule in current_app.url_map.iter_rules():
        if not rule.rule.startswith("/api/v1/") or rule.endpoint in ("api.openapi", "api.index"):
            continue
        path = re.sub(r"<(?:\w+:)?(\w+)>", r"{\1}", rule.rule)
        view = current_app.view_functions[rule.endpoint]
        summary = (view.__doc__ or rule.endpoint.split(".", 1)[1].replace("_", " ")).strip().splitlines()[0]
        params = [{"name": a, "in": "path", "required": True, "schema": {"type": "integer"}} for a in sorted(rule.arguments)]
        for method in sorted(rule.methods - {"HEAD", "OPTIONS"}):
            paths.setdefault(path, {}).setdefault(method.lower(), {
                "summary": summary, "operationId": rule.endpoint, "parameters": params,
                "responses": {"200": {"description": "success"}, **errors}})


@bp.get("/")
def index():
    from service.api.inventory import RESOURCES

    return jsonify({"resources": [f"{bp.url_prefix}/{r.name}" for r in RESOURCES], "openapi": f"{bp.url_prefix}/openapi.json"})


@bp.get("/openapi.json")
def openapi():
    return jsonify(openapi_document())
