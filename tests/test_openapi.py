"""The OpenAPI document: valid by an independent spec validator, complete over the routes, and
describing what the API really answers (real answers checked against it with jsonschema)."""

from __future__ import annotations

import inspect
import re

import jsonschema
import pytest
from openapi_spec_validator import validate as validate_spec
from openapi_spec_validator.validation import OpenAPIV31SpecValidator

from service.permissions import PUBLIC

PREFIX = "/api/v1"
METHODS = ("get", "post", "patch", "put", "delete")


@pytest.fixture
def document(api):
    return api.call("GET", "/openapi.json")


def _routes(app):
    """(path as OpenAPI writes it, method, endpoint, view) for every route under /api/v1."""
    for rule in app.url_map.iter_rules():
        if rule.rule.startswith(PREFIX + "/"):
            path = re.sub(r"<(?:\w+:)?(\w+)>", r"{\1}", rule.rule)
            for method in sorted(rule.methods - {"HEAD", "OPTIONS"}):
                yield path, method.lower(), rule.endpoint, app.view_functions[rule.endpoint]


def _operations(document):
    for path, item in document["paths"].items():
        for method, op in item.items():
            if method in METHODS:
                yield path, method, op


def test_document_passes_the_openapi_3_1_spec_validator(document):
    # openapi-spec-validator checks the document against the OpenAPI 3.1 schema (an outside package).
    assert document["openapi"] == "3.1.0"
    validate_spec(document, cls=OpenAPIV31SpecValidator)


def test_every_api_route_has_an_operation(app, document):
    routes = list(_routes(app))
    assert len(routes) > 60  # the walk found the API (5 inventory resources alone give 25)
    missing = [(p, m) for p, m, _, _ in routes if m not in document["paths"].get(p, {})]
    assert not missing, f"routes without an @operation: {missing}"


def test_every_view_that_reads_a_body_declares_it(app, document):
    # Independent of the declarations: a view reads a JSON body when its code calls json_body().
    for path, method, endpoint, view in _routes(app):
        source = inspect.getsource(view)
        reads_body = "json_body(" in source
        reads_upload = "request.files" in source  # a multipart/form-data upload
        op = document["paths"][path][method]
        assert ("requestBody" in op) == (reads_body or reads_upload), (endpoint, reads_body, reads_upload)
        if reads_upload:
            assert list(op["requestBody"]["content"]) == ["multipart/form-data"], endpoint
            assert "413" in op["responses"] and "422" in op["responses"], endpoint
        if reads_body:
            assert method in ("post", "patch")
            ref = op["requestBody"]["content"]["application/json"]["schema"]["$ref"]
            assert ref.split("/")[-1] in document["components"]["schemas"]


def test_every_operation_lists_its_4xx_answers_with_the_error_shape(document):
    for path, method, op in _operations(document):
        fourxx = [code for code in op["responses"] if code.startswith("4")]
        takes_input = op["parameters"] or "requestBody" in op
        if op.get("security") == [] and not takes_input:
            continue  # the index and this document: public and without input, no 4xx to answer
        assert fourxx, (path, method)
        for code in fourxx:
            schema = op["responses"][code]["content"]["application/json"]["schema"]
            assert schema == {"$ref": "#/components/schemas/Error"}, (path, method, code)
        if op.get("security") != []:
            assert "401" in fourxx, (path, method)
        if "{" in path:
            assert "404" in fourxx, (path, method)
        if "requestBody" in op:
            assert {"400", "422"} <= set(fourxx), (path, method)
    error = document["components"]["schemas"]["Error"]
    detail = document["components"]["schemas"][error["properties"]["error"]["$ref"].split("/")[-1]]
    assert set(detail["required"]) == {"code", "message", "details"}


def test_bearer_scheme_and_public_operations(app, document):
    assert document["components"]["securitySchemes"]["bearer"] == {
        "type": "http", "scheme": "bearer", "description": document["components"]["securitySchemes"]["bearer"]["description"]}
    assert document["security"] == [{"bearer": []}]
    for path, method, endpoint, _ in _routes(app):
        op = document["paths"][path][method]
        assert (op.get("security") == []) == (endpoint in PUBLIC), endpoint


def test_path_parameters_are_integers_and_lists_are_capped(document):
    for path, method, op in _operations(document):
        for param in op["parameters"]:
            if param["in"] == "path":
                assert param["schema"]["type"] == "integer", (path, param)
        names = {p["name"]: p for p in op["parameters"] if p["in"] == "query"}
        ok = op["responses"].get("200", {}).get("content", {}).get("application/json", {}).get("schema", {})
        if ok.get("$ref", "").endswith("Page"):
            assert names["limit"]["schema"]["maximum"] == 500 and names["limit"]["schema"]["minimum"] == 1
            assert names["limit"]["schema"]["default"] == 50 and names["offset"]["schema"]["minimum"] == 0


def _schema_for(document, path, method, status):
    schema = document["paths"][path][method]["responses"][str(status)]["content"]["application/json"]["schema"]
    # JSON Schema 2020-12 resolves "#/components/..." against this root.
    return {**schema, "components": document["components"]}


def _check(document, path, method, status, body):
    jsonschema.Draft202012Validator(_schema_for(document, path, method, status)).validate(body)


def test_real_answers_match_the_documented_shapes(api, document):
    lab = api.call("POST", "/labs", {"code": "D-1", "name": "Doc lab"}, 201)  # creates answer 201
    _check(document, "/api/v1/labs", "post", 201, lab)
    place = api.call("POST", "/locations", {"lab_id": lab["id"], "building": "D", "room": "D-1", "storage": "s"}, 201)
    _check(document, "/api/v1/locations", "post", 201, place)
    stock = api.call("POST", "/stocks", {"label": "DOC-1", "substance_id": api.substance_id("cadmium oxide"),
                                         "lab_id": lab["id"], "location_id": place["id"], "amount": "1 g"}, 201)
    _check(document, "/api/v1/stocks", "post", 201, stock)
    for resource in ("labs", "locations", "substances", "stocks", "mixtures"):
        _check(document, f"/api/v1/{resource}", "get", 200, api.call("GET", f"/{resource}"))
    _check(document, "/api/v1/stocks/{ident}", "get", 200, api.call("GET", f"/stocks/{stock['id']}"))
    for path in ("/me", "/tokens", "/users", "/audit_events", "/procedures", "/runs", "/waste_containers",
                 "/review_queue"):
        _check(document, f"/api/v1{path}", "get", 200, api.call("GET", path))
    bad = api.call("GET", "/stocks?limit=501", expect=422)
    _check(document, "/api/v1/stocks", "get", 422, bad)
    missing = api.call("GET", "/stocks/999999", expect=404)
    _check(document, "/api/v1/stocks/{ident}", "get", 404, missing)
    with pytest.raises(jsonschema.ValidationError):  # the check can fail: a record is not a page
        _check(document, "/api/v1/stocks", "get", 200, stock)
