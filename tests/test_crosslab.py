"""References across labs: a researcher of lab B referring to lab A's records.

Every reference in a body (a run, location, stock, mixture, procedure) is checked for the
caller's labs, and for the lab of the record that refers to it. The answer to another lab's
record is the answer to an id that does not exist (same status, same message but for the id),
so it tells nothing of which ids exist; and nothing is written (the audit trail, which records
every create and update, is as long after the refused request as before).

Amounts are round figures chosen for the test; nothing here depends on a published value.
"""

from __future__ import annotations

import json

import pytest

from tests.conftest import Api, make_user

MISSING = 987_654_321  # no record has this id in a fresh database


def _lab(admin: Api, code: str) -> dict:
    lab = admin.call("POST", "/labs", {"code": code, "name": f"group {code}"}, 201)["id"]
    place = admin.call("POST", "/locations", {"lab_id": lab, "building": code, "room": "1", "storage": "shelf"},
                       201)["id"]
    saa = admin.call("POST", "/locations", {"lab_id": lab, "building": code, "room": "1", "storage": "hood SAA",
                                            "kind": "satellite_accumulation_area"}, 201)["id"]
    stock = admin.call("POST", "/stocks", {"label": f"{code}-CdO", "substance_id": admin.substance_id("cadmium oxide"),
                                           "lab_id": lab, "location_id": place, "amount": "1 g"}, 201)["id"]
    mixture = admin.call("POST", "/mixtures", {
        "label": f"{code}-M", "name": "Cd oleate 0.20 M", "lab_id": lab, "location_id": place, "volume": "10 mL",
        "received_as_solution": True,
        "components": [{"substance_id": admin.substance_id("cadmium oxide"), "molarity": "0.20 mol/L"}]}, 201)["id"]
    container = admin.call("POST", "/waste_containers", {"label": f"{code}-W", "lab_id": lab, "location_id": saa,
                                                         "stream": "non_halogenated_solvent_heavy_metals",
                                                         "capacity": "10 L"}, 201)["id"]
    return {"lab": lab, "place": place, "saa": saa, "stock": stock, "mixture": mixture, "container": container}


@pytest.fixture
def site(app, client):
    admin = Api(client, make_user(app, "admin@test.example", "admin"))
    officer = Api(client, make_user(app, "so@test.example", "safety_officer"))
    a, b = _lab(admin, "LA"), _lab(admin, "LB")
    res_a = Api(client, make_user(app, "a@test.example", "researcher", lab_ids=[a["lab"]]))
    res_b = Api(client, make_user(app, "b@test.example", "researcher", lab_ids=[b["lab"]]))
    for lab, researcher in ((a, res_a), (b, res_b)):
        proc = researcher.call("POST", "/procedures", {
            "lab_id": lab["lab"], "title": "CdO draw", "steps": [{"operation": "charge"}],
            "draws": [{"stock_id": lab["stock"], "amount": "10 mg"}]}, 201)["id"]
        researcher.call("POST", f"/procedures/{proc}/submit")
        officer.call("POST", f"/procedures/{proc}/approve", {"comment": "test"})
        lab["proc"] = proc
    a["run"] = res_a.call("POST", "/runs", {"procedure_id": a["proc"]}, 201)["id"]
    b["draft"] = res_b.call("POST", "/procedures", {
        "lab_id": b["lab"], "title": "CdO draft", "steps": [{"operation": "charge"}],
        "draws": [{"stock_id": b["stock"], "amount": "10 mg"}]}, 201)["id"]
    return {"admin": admin, "a": a, "b": b, "res_b": res_b}


def _audit_total(site) -> int:
    return site["admin"].call("GET", "/audit_events?limit=1")["total"]


def _same_as_missing(site, caller: Api, method: str, path: str, body_for, a_id: int) -> dict:
    """Send the body with lab A's id and with a missing id; both refused alike, nothing written."""
    before = _audit_total(site)
    theirs = caller.client.open(f"/api/v1{path}", method=method, json=body_for(a_id),
                                headers={"Authorization": f"Bearer {caller.token}"})
    missing = caller.client.open(f"/api/v1{path}", method=method, json=body_for(MISSING),
                                 headers={"Authorization": f"Bearer {caller.token}"})
    assert _audit_total(site) == before, "a refused reference wrote something"
    assert theirs.status_code == missing.status_code == 422, (theirs.get_json(), missing.get_json())
    as_missing = missing.get_data(as_text=True).replace(str(MISSING), str(a_id))
    assert theirs.get_json() == json.loads(as_missing)
    return theirs.get_json()["error"]


def test_waste_entry_with_another_labs_run(site):
    a, b = site["a"], site["b"]
    error = _same_as_missing(site, site["res_b"], "POST", f"/waste_containers/{b['container']}/entries",
                             lambda run: {"description": "supernatant", "run_id": run, "volume": "10 mL"}, a["run"])
    assert error["details"][0]["field"] == "run_id"
    assert site["admin"].call("GET", f"/waste_containers/{b['container']}/entries")["total"] == 0


def test_waste_entry_run_must_be_of_the_containers_lab_even_for_the_site(site):
    a, b = site["a"], site["b"]
    _same_as_missing(site, site["admin"], "POST", f"/waste_containers/{b['container']}/entries",
                     lambda run: {"description": "supernatant", "run_id": run, "volume": "10 mL"}, a["run"])


@pytest.mark.parametrize("kind", ["stocks", "mixtures"])
def test_create_in_another_labs_location(site, kind):
    a, b = site["a"], site["b"]
    admin = site["admin"]
    cdo = admin.substance_id("cadmium oxide")
    if kind == "stocks":
        def body(place):
            return {"label": "B-new", "substance_id": cdo, "lab_id": b["lab"], "location_id": place, "amount": "1 g"}
    else:
        def body(place):
            return {"label": "B-new", "name": "Cd oleate", "lab_id": b["lab"], "location_id": place, "volume": "5 mL",
                    "received_as_solution": True, "components": [{"substance_id": cdo, "molarity": "0.1 mol/L"}]}
    error = _same_as_missing(site, site["res_b"], "POST", f"/{kind}", body, a["place"])
    assert error["details"][0]["field"] == "location_id"
    _same_as_missing(site, admin, "POST", f"/{kind}", body, a["place"])  # the record's lab, whoever asks
    shared = admin.call("POST", "/locations", {"building": "S", "room": "store", "storage": "shared shelf"}, 201)["id"]
    site["res_b"].call("POST", f"/{kind}", body(shared), 201)  # a location without a lab serves every lab


@pytest.mark.parametrize("kind", ["stocks", "mixtures"])
def test_move_to_another_labs_location(site, kind):
    a, b = site["a"], site["b"]
    record = b["stock" if kind == "stocks" else "mixture"]
    error = _same_as_missing(site, site["res_b"], "PATCH", f"/{kind}/{record}", lambda place: {"location_id": place},
                             a["place"])
    assert error["details"][0]["field"] == "location_id"
    assert site["admin"].call("GET", f"/{kind}/{record}")["location_id"] == b["place"]


def test_container_in_another_labs_location(site):
    a, b = site["a"], site["b"]
    _same_as_missing(site, site["admin"], "POST", "/waste_containers",
                     lambda place: {"label": "B-W2", "lab_id": b["lab"], "location_id": place,
                                    "stream": "non_halogenated_solvent_heavy_metals", "capacity": "5 L"}, a["saa"])


def test_run_of_another_labs_procedure(site):
    error = _same_as_missing(site, site["res_b"], "POST", "/runs", lambda proc: {"procedure_id": proc},
                             site["a"]["proc"])
    assert error["details"][0]["field"] == "procedure_id"


@pytest.mark.parametrize("source", ["stock_id", "mixture_id"])
def test_draws_of_another_labs_stock_or_mixture(site, source):
    a, b = site["a"], site["b"]
    theirs = a["stock" if source == "stock_id" else "mixture"]
    amount = "10 mg" if source == "stock_id" else "1 mL"

    def draws(ident):
        return [{source: ident, "amount": amount}]

    res_b = site["res_b"]
    error = _same_as_missing(site, res_b, "POST", "/procedures", lambda i: {
        "lab_id": b["lab"], "title": "borrowed", "steps": [{"operation": "charge"}], "draws": draws(i)}, theirs)
    assert error["details"][0]["field"] == f"draws[0].{source}"
    _same_as_missing(site, res_b, "PATCH", f"/procedures/{b['draft']}", lambda i: {"draws": draws(i)}, theirs)
    _same_as_missing(site, res_b, "POST", "/runs", lambda i: {"procedure_id": b["proc"], "draws": draws(i)}, theirs)
    _same_as_missing(site, site["admin"], "POST", "/runs", lambda i: {"procedure_id": b["proc"], "draws": draws(i)},
                     theirs)


def test_import_refuses_rows_placed_in_another_labs_location(database_url, rules_dir, catalogue):
    import pandas as pd
    from sqlalchemy import func, select

    from service.store.db import session_scope
    from service.store.importer import import_inventory
    from service.store.models import Lab, Location, Stock
    from tests.conftest import make_app

    app = make_app(database_url, rules_dir)
    sessions = app.extensions["dotledger.sessions"]
    with session_scope(sessions) as session:
        session.add_all([Lab(code="IA", name="group IA"), Lab(code="IB", name="group IB")])
        session.flush()
        session.add(Location(lab_id=session.scalar(select(Lab.id).where(Lab.code == "IA")), building="I", room="1",
                             storage="shelf", kind="storage"))
    row = {"substance": "cadmium oxide", "amount": "1 g", "building": "I", "room": "1"}
    frame = pd.DataFrame([{**row, "label": "IA-1", "lab": "IA", "storage": "shelf"},     # A's own shelf
                          {**row, "label": "IB-1", "lab": "IB", "storage": "shelf"},     # A's shelf: refused
                          {**row, "label": "IB-2", "lab": "IB", "storage": "cupboard"},  # a new place, B's
                          {**row, "label": "IA-2", "lab": "IA", "storage": "cupboard"}])  # now B's: refused
    with session_scope(sessions) as session:
        report = import_inventory(session, frame, catalogue_lookup=lambda t: catalogue.find(t).key, only_valid=True)
    assert report.imported == 2 and [r.line for r in report.rejected] == [3, 5]
    assert all("location of another lab" in r.reason for r in report.rejected)
    with session_scope(sessions) as session:
        placed = session.execute(select(Stock.label, Stock.lab_id, Location.lab_id).join(Location)).all()
        assert all(stock_lab == place_lab for _, stock_lab, place_lab in placed) and len(placed) == 2
        assert session.scalar(select(func.count()).select_from(Stock)) == 2
    app.extensions["dotledger.engine"].dispose()
