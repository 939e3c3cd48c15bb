"""service/api/errors.py: what a client can send answers a 4xx in the error shape, never a 500.

The bounds come from outside the project: the id columns are PostgreSQL ``integer``, -2147483648 to
+2147483647 (postgresql.org, "Numeric Types", table 8.2), and SQLite stores an INTEGER in at most 8
bytes, so 2^63 and above overflow the driver itself (sqlite.org, "Datatypes In SQLite"); RFC 9110 section 15.5.6 says a
405 answer must carry an ``Allow`` header listing the methods the resource takes; RFC 9110 section 15.5.14
gives 413 for content larger than the server is willing to process.
"""

from __future__ import annotations

import logging

import pytest

from service.store import inventory

BIGGEST_ID = 2147483647  # postgresql.org, "Numeric Types": the upper end of integer


def _error(response, status: int) -> dict:
    assert response.status_code == status, (response.status_code, response.get_data(as_text=True)[:300])
    body = response.get_json()
    assert set(body) == {"error"} and set(body["error"]) == {"code", "message", "details"}, body
    return body["error"]


def _auth(api) -> dict:
    return {"Authorization": f"Bearer {api.token}"}


@pytest.mark.parametrize("ident", [BIGGEST_ID + 1, 2**63, 10**30, 0])
@pytest.mark.parametrize("method, path", [("GET", "/labs/{}"), ("PATCH", "/labs/{}"), ("POST", "/labs/{}/retire"),
                                          ("GET", "/runs/{}/balance"),
                                          ("POST", "/waste_containers/{}/entries/1/reverse")])
def test_a_path_id_outside_the_column_range_is_not_found(api, client, method, path, ident):
    response = client.open(f"/api/v1{path.format(ident)}", method=method, json={}, headers=_auth(api))
    assert _error(response, 404)["code"] == "not_found"


def test_the_largest_id_is_looked_up_and_not_found(api):
    assert api.call("GET", f"/labs/{BIGGEST_ID}", expect=404)["error"]["details"]["id"] == BIGGEST_ID


@pytest.mark.parametrize("path, field", [("/stocks?lab_id={}", "lab_id"), ("/mixtures?location_id={}", "location_id"),
                                         ("/substances?substance_id={}", "substance_id"),
                                         ("/runs?procedure_id={}", "procedure_id"),
                                         ("/procedures?lab_id={}", "lab_id")])
@pytest.mark.parametrize("ident", [BIGGEST_ID + 1, 2**63, 0])
def test_a_query_id_outside_the_column_range_is_refused_naming_it(api, client, path, field, ident):
    error = _error(client.get(f"/api/v1{path.format(ident)}", headers=_auth(api)), 422)
    assert [d["field"] for d in error["details"]] == [field]


def _location(lab_id: int, **change) -> dict:
    return {"lab_id": lab_id, "building": "B", "room": "B-101", "storage": "cabinet 1", **change}


def test_a_duplicate_location_is_a_conflict_naming_the_field(api):
    lab_id, _ = api.lab_and_location()  # B / B-101 / cabinet 1
    error = api.call("POST", "/locations", _location(lab_id), expect=409)["error"]
    assert error["code"] == "conflict" and error["details"][0]["field"] == "storage"
    other = api.call("POST", "/locations", _location(lab_id, storage="cabinet 2"), 201)
    error = api.call("PATCH", f"/locations/{other['id']}", {"storage": "cabinet 1"}, expect=409)["error"]
    assert error["details"][0]["field"] == "storage"
    assert api.call("PATCH", f"/locations/{other['id']}", {"storage": "cabinet 3"})["storage"] == "cabinet 3"


def test_a_conflict_only_the_database_sees_is_409_with_its_columns(api, monkeypatch):
    # As if two clients raced past the check: the unique constraint itself answers, on either database.
    lab_id, _ = api.lab_and_location()
    monkeypatch.setattr(inventory, "_check_unique", lambda *args, **kwargs: None)
    error = api.call("POST", "/locations", _location(lab_id), expect=409)["error"]
    assert error["code"] == "conflict"
    assert [d["field"] for d in error["details"]] == ["building", "room", "storage"]


def test_a_null_the_database_refuses_is_422_naming_the_column(api):
    # A patch may send null for a field whose column is NOT NULL; until the schema refuses it, the
    # constraint answers (on either database) and names the column.
    user = api.call("POST", "/users", {"email": "n@test.example", "display_name": "N", "role": "researcher",
                                       "password": "correct horse battery"}, 201)
    error = api.call("PATCH", f"/users/{user['id']}", {"display_name": None}, expect=422)["error"]
    assert error["details"] == [{"field": "display_name", "message": "must not be null"}]


@pytest.mark.parametrize("depth", [33, 100_000])
def test_deeply_nested_json_is_refused_before_parsing(api, client, depth):
    text = '{"name": ' + "[" * depth + "]" * depth + "}"
    response = client.post("/api/v1/labs", data=text, content_type="application/json", headers=_auth(api))
    assert "nests deeper than 32" in _error(response, 400)["message"]


def test_nesting_inside_strings_does_not_count(api, client):
    text = '{"code": "X-1", "name": "' + "[" * 200 + '"}'
    response = client.post("/api/v1/labs", data=text, content_type="application/json", headers=_auth(api))
    assert response.status_code == 201, response.get_json()


def test_a_body_over_one_megabyte_is_413(api, client):
    text = '{"code": "X-1", "name": "' + "a" * (1024 * 1024) + '"}'
    response = client.post("/api/v1/labs", data=text, content_type="application/json", headers=_auth(api))
    assert _error(response, 413)["code"] == "request_entity_too_large"


def test_405_lists_the_allowed_methods(api, client):
    response = client.delete("/api/v1/labs", headers=_auth(api))
    _error(response, 405)
    assert set(response.headers["Allow"].split(", ")) >= {"GET", "POST"}
    response = client.put("/api/v1/labs/1", headers=_auth(api))
    _error(response, 405)
    assert set(response.headers["Allow"].split(", ")) >= {"GET", "PATCH"}


def test_an_unexpected_error_answers_the_error_shape_and_is_logged(app, api, client, caplog):
    def broken():
        raise RuntimeError("a bug")

    app.view_functions["api.me"] = broken
    with caplog.at_level(logging.ERROR, logger="service.api.errors"):
        error = _error(client.get("/api/v1/me", headers=_auth(api)), 500)
    assert error["code"] == "internal_error" and "a bug" not in error["message"]
    assert any("unexpected error on GET /api/v1/me" in r.message and r.exc_info for r in caplog.records)


def test_the_document_lists_413_for_bodies_and_bounds_path_ids(api):
    document = api.call("GET", "/openapi.json")
    for path, methods in document["paths"].items():
        for method, op in methods.items():
            assert ("413" in op["responses"]) == ("requestBody" in op), (method, path)
            for param in op["parameters"]:
                if param["in"] == "path":
                    assert param["schema"]["maximum"] == BIGGEST_ID
