"""The inventory API, on SQLite and on PostgreSQL: create, list with filters, read,
update, retire; element content on every stock and mixture; 4xx with the error shape."""

from __future__ import annotations

import pytest


def test_stock_lifecycle_with_element_content(api):
    lab_id, place_id = api.lab_and_location()
    cdo = api.substance_id("cadmium oxide")
    created = api.call("POST", "/stocks", {"label": "S-1", "substance_id": cdo, "lab_id": lab_id,
                                           "location_id": place_id, "amount": "1.000 g"}, 201)
    # 1.000 g CdO × 112.414/128.413 = 875.410 mg Cd (CIAAW 2021 atomic weights).
    cd = next(e for e in created["elements"] if e["element"] == "Cd")
    assert cd == {"element": "Cd", "mass_ug": 875_410, "mass_mg": 875.41}
    assert created["quantity"] == {"value": 1000.0, "unit": "mg", "kind": "mass"}

    read = api.call("GET", f"/stocks/{created['id']}")
    assert read["elements"] == created["elements"]

    updated = api.call("PATCH", f"/stocks/{created['id']}", {"amount": "500 mg", "purity_percent": 50})
    assert next(e for e in updated["elements"] if e["element"] == "Cd")["mass_ug"] == 218_852  # 0.25 g × 0.8754098 = 218.852 mg

    retired = api.call("POST", f"/stocks/{created['id']}/retire")
    assert retired["retired_at"] is not None
    assert api.call("GET", "/stocks")["total"] == 0
    assert api.call("GET", "/stocks?include_retired=true")["total"] == 1
    api.call("POST", f"/stocks/{created['id']}/retire", expect=409)


def test_filters_by_lab_location_and_element(api):
    lab_id, place_id = api.lab_and_location()
    other_lab = api.call("POST", "/labs", {"code": "B-102", "name": "Other group"}, 201)["id"]
    other_place = api.call("POST", "/locations", {"lab_id": other_lab, "building": "B", "room": "B-102",
                                                  "storage": "shelf"}, 201)["id"]
    rows = [("cadmium oxide", lab_id, place_id), ("selenium", lab_id, place_id), ("lead(II) bromide", other_lab, other_place)]
    for i, (name, lab, place) in enumerate(rows):
        api.call("POST", "/stocks", {"label": f"F-{i}", "substance_id": api.substance_id(name), "lab_id": lab,
                                     "location_id": place, "amount": "1 g"}, 201)
    labels = lambda q: sorted(s["label"] for s in api.call("GET", f"/stocks?{q}")["items"])  # noqa: E731
    assert labels(f"lab_id={lab_id}") == ["F-0", "F-1"]
    assert labels(f"location_id={other_place}") == ["F-2"]
    assert labels("element=Cd") == ["F-0"]
    assert labels("element=Pb") == ["F-2"]
    assert labels("element=Te") == []
    assert "cadmium oxide" in [s["name"] for s in api.call("GET", "/substances?element=Cd&limit=500")["items"]]


def test_substance_filter_parses_formulas(api):
    # "C" must match carbon compounds, not cadmium: CdO has no carbon.
    names = [s["name"] for s in api.call("GET", "/substances?element=C&limit=500")["items"]]
    assert "cadmium oxide" not in names and "oleic acid" in names


def test_mixture_content_worked_example(api):
    lab_id, place_id = api.lab_and_location()
    body = {"label": "M-1", "name": "Cd oleate 0.20 M", "lab_id": lab_id, "location_id": place_id, "volume": "10.0 mL",
            "received_as_solution": True,
            "components": [{"substance_id": api.substance_id("cadmium oxide"), "molarity": "0.20 mol/L"}]}
    mixture = api.call("POST", "/mixtures", body, 201)
    cd = next(e for e in mixture["elements"] if e["element"] == "Cd")
    # 10.0 mL × 0.20 mol/L × 112.414 g/mol = 224.828 mg (worked value)
    assert cd["mass_ug"] == 224_828
    assert cd["mg_per_ml"] == pytest.approx(22.4828)
    halved = api.call("PATCH", f"/mixtures/{mixture['id']}", {"volume": "5.0 mL"})
    assert next(e for e in halved["elements"] if e["element"] == "Cd")["mass_ug"] == 112_414


def test_labs_locations_substances_crud(api):
    lab = api.call("POST", "/labs", {"code": "X-1", "name": "X"}, 201)
    assert api.call("PATCH", f"/labs/{lab['id']}", {"name": "Renamed"})["name"] == "Renamed"
    api.call("POST", "/labs", {"code": "X-1", "name": "dup"}, 409)
    local = api.call("POST", "/substances", {"key": "cadmium-telluride", "name": "cadmium telluride", "formula": "CdTe",
                                             "cas": "1306-25-8", "state": "solid"}, 201)
    assert local["origin"] == "local"
    assert api.call("PATCH", f"/substances/{local['id']}", {"density_g_per_ml": 5.85})["density_g_per_ml"] == 5.85
    assert api.call("POST", f"/labs/{lab['id']}/retire")["retired_at"]


@pytest.mark.parametrize(
    "change, status, field",
    [
        ({"amount": "5"}, 422, "amount"),
        ({"amount": "5 parsecs"}, 422, "amount"),
        ({"amount": "1,5 g"}, 422, "amount"),
        ({"amount": "5 mL", "substance": "argon-free"}, 422, "substance"),  # unknown field
        ({"purity_percent": 140}, 422, "purity_percent"),
        ({"substance_id": 99999}, 422, "substance_id"),
        ({"location_id": 99999}, 422, "location_id"),
        ({"label": ""}, 422, "label"),
        ({"amount": None}, 422, "amount"),
    ],
)
def test_bad_stock_bodies_name_the_field(api, change, status, field):
    lab_id, place_id = api.lab_and_location()
    body = {"label": "B-1", "substance_id": api.substance_id("cadmium oxide"), "lab_id": lab_id,
            "location_id": place_id, "amount": "1 g", **change}
    error = api.call("POST", "/stocks", body, status)["error"]
    assert any(d.get("field") == field for d in error["details"]), error


def test_volume_without_density_is_refused_naming_the_substance(api):
    lab_id, place_id = api.lab_and_location()
    local = api.call("POST", "/substances", {"key": "mystery-oil", "name": "mystery oil", "formula": "C20H42",
                                             "cas": "112-95-8", "state": "liquid"}, 201)
    error = api.call("POST", "/stocks", {"label": "V-1", "substance_id": local["id"], "lab_id": lab_id,
                                         "location_id": place_id, "amount": "5 mL"}, 422)["error"]
    assert "mystery oil" in error["message"] and "density" in error["message"]


@pytest.mark.parametrize(
    "method, path, body, status",
    [
        ("POST", "/stocks", "not json", 400),
        ("POST", "/stocks", [1, 2], 400),
        ("GET", "/stocks/999", None, 404),
        ("PATCH", "/labs/999", {"name": "x"}, 404),
        ("GET", "/stocks?element=Xx", None, 422),
        ("GET", "/stocks?limit=0", None, 422),
        ("GET", "/stocks?lab_id=abc", None, 422),
        ("GET", "/nowhere", None, 404),
        ("DELETE", "/stocks", None, 405),
        ("POST", "/substances", {"key": "bad", "name": "bad", "formula": "Cd$", "cas": "1306-19-0", "state": "solid"}, 422),
        ("POST", "/substances", {"key": "bad", "name": "bad", "formula": "CdO", "cas": "1306-19-1", "state": "solid"}, 422),
    ],
)
def test_errors_are_4xx_with_the_error_shape(api, method, path, body, status):
    if isinstance(body, str):
        response = api.client.open(f"/api/v1{path}", method=method, data=body, content_type="application/json",
                                   headers={"Authorization": f"Bearer {api.token}"})
        assert response.status_code == status
        assert response.get_json()["error"]["code"] == "bad_request"
    else:
        api.call(method, path, body, status)


def test_openapi_document_lists_every_resource(api):
    document = api.call("GET", "/openapi.json")
    for name in ("labs", "locations", "substances", "stocks", "mixtures"):
        assert f"/api/v1/{name}" in document["paths"]
        assert f"/api/v1/{name}/{{ident}}/retire" in document["paths"]
    assert "StockIn" in document["components"]["schemas"]


def test_openapi_document_covers_every_api_route(api, app):
    document = api.call("GET", "/openapi.json")
    operations = {(path, method) for path, item in document["paths"].items() for method in item}
    for rule in app.url_map.iter_rules():
        if rule.rule.startswith("/api/v1/") and rule.endpoint not in ("api.openapi", "api.index"):
            path = rule.rule.replace("<int:", "<").replace("<", "{").replace(">", "}")
            for method in rule.methods - {"HEAD", "OPTIONS"}:
                assert (path, method.lower()) in operations, (path, method)
