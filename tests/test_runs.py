"""Runs and their mass balance, worked by hand from CIAAW 2021 standard atomic weights.

0.2 mmol CdO = 0.2 × 128.413 = 25.6826 mg, holding 0.2 × 112.414 = 22.4828 mg Cd (22 483 µg);
0.2 mmol Se = 0.2 × 78.971 = 15.7942 mg Se (15 794 µg).
"""

from __future__ import annotations

import pytest

from tests.conftest import Api, make_user

CD_IN, SE_IN = 22_483, 15_794


@pytest.fixture
def approved(app, client):
    admin = Api(client, make_user(app, "admin@test.example", "admin"))
    lab = admin.call("POST", "/labs", {"code": "R-1", "name": "Run lab"}, 201)["id"]
    place = admin.call("POST", "/locations", {"lab_id": lab, "building": "R", "room": "R-1", "storage": "shelf"}, 201)["id"]
    saa = admin.call("POST", "/locations", {"lab_id": lab, "building": "R", "room": "R-1", "storage": "hood SAA",
                                            "kind": "satellite_accumulation_area"}, 201)["id"]
    stocks = {}
    for label, name, amount in [("CdO", "cadmium oxide", "1 g"), ("Se", "selenium", "1 g"),
                                ("TOP", "trioctylphosphine", "100 mL"), ("ODE", "1-octadecene", "1 L")]:
        stocks[label] = admin.call("POST", "/stocks", {"label": label, "substance_id": admin.substance_id(name),
                                                       "lab_id": lab, "location_id": place, "amount": amount}, 201)["id"]
    researcher = Api(client, make_user(app, "res@test.example", "researcher", lab_ids=[lab]))
    officer = Api(client, make_user(app, "so@test.example", "safety_officer"))
    steps = [{"operation": "degas", "temperature_c": 120, "atmosphere": "vacuum"},
             {"operation": "heat", "temperature_c": 300, "atmosphere": "argon"},
             {"operation": "inject", "temperature_c": 270, "atmosphere": "argon"},
             {"operation": "precipitate"}, {"operation": "centrifuge"}]
    draws = [{"stock_id": stocks["CdO"], "amount": "25.6826 mg"}, {"stock_id": stocks["Se"], "amount": "15.7942 mg"},
             {"stock_id": stocks["TOP"], "amount": "1 mL"}, {"stock_id": stocks["ODE"], "amount": "10 mL"}]
    proc = researcher.call("POST", "/procedures", {"lab_id": lab, "title": "CdSe worked run", "steps": steps,
                                                  "draws": draws}, 201)
    researcher.call("POST", f"/procedures/{proc['id']}/submit")
    officer.call("POST", f"/procedures/{proc['id']}/approve", {"comment": "worked example"})
    liquid = admin.call("POST", "/waste_containers", {"label": "R-L", "lab_id": lab, "location_id": saa,
                                                      "stream": "non_halogenated_solvent_heavy_metals",
                                                      "capacity": "10 L"}, 201)["id"]
    solid = admin.call("POST", "/waste_containers", {"label": "R-S", "lab_id": lab, "location_id": saa,
                                                     "stream": "contaminated_solids", "capacity": "5 kg"}, 201)["id"]
    return {"proc": proc, "stocks": stocks, "researcher": researcher, "admin": admin, "liquid": liquid, "solid": solid}


def _row(balance, element):
    return next(r for r in balance["elements"] if r["element"] == element)


def _worked_run(ctx):
    r = ctx["researcher"]
    run = r.call("POST", "/runs", {"procedure_id": ctx["proc"]["id"]}, 201)
    cd_draw = next(d for d in run["draws"] if d["stock_id"] == ctx["stocks"]["CdO"])
    assert next(e["mass_ug"] for e in cd_draw["elements"] if e["element"] == "Cd") == CD_IN
    # product: ICP-OES of a digest, 3750 mg/L Cd and 2750 mg/L Se in 4.0 mL -> 15 000 / 11 000 µg
    r.call("POST", f"/runs/{run['id']}/outputs", {"label": "CdSe cores in hexane", "method": "measured", "assays": [
        {"element": "Cd", "concentration": "3750 mg/L", "volume": "4.0 mL"},
        {"element": "Se", "concentration": "2750 mg/L", "volume": "4.0 mL"}]}, 201)
    entries = []
    for description, volume, cd, se in [("first supernatant", "15 mL", "5 mg", "3 mg"),
                                        ("second supernatant", "15 mL", "2 mg", "1.7 mg")]:
        entries.append(r.call("POST", f"/waste_containers/{ctx['liquid']}/entries", {
            "run_id": run["id"], "description": description, "volume": volume,
            "elements": [{"element": "Cd", "mass": cd}, {"element": "Se", "mass": se}]}, 201))
    r.call("POST", f"/waste_containers/{ctx['solid']}/entries", {
        "run_id": run["id"], "description": "gloves, tips, filter paper", "mass": "12 g",
        "elements": [{"element": "Cd", "mass": "483 ug"}, {"element": "Se", "mass": "94 ug"}]}, 201)
    return run, entries


def test_worked_run_closes_to_the_microgram(approved):
    run, _ = _worked_run(approved)
    balance = approved["researcher"].call("GET", f"/runs/{run['id']}/balance")
    for element, total in (("Cd", CD_IN), ("Se", SE_IN)):
        row = _row(balance, element)
        assert row["input_ug"] == total and row["unaccounted_ug"] == 0
    assert balance["closes"] is True
    closed = approved["researcher"].call("POST", f"/runs/{run['id']}/close")
    assert closed["state"] == "closed"


def test_removing_one_entry_reports_exactly_its_mass(approved):
    run, entries = _worked_run(approved)
    approved["researcher"].call("POST", f"/waste_containers/{approved['liquid']}/entries/{entries[1]['id']}/reverse",
                                {"reason": "never poured into this container"}, 201)
    balance = approved["researcher"].call("GET", f"/runs/{run['id']}/balance")
    assert _row(balance, "Cd")["unaccounted_ug"] == 2000 and _row(balance, "Se")["unaccounted_ug"] == 1700
    assert balance["closes"] is False  # 2 mg of 22.5 mg is 8.9 %, above the 5 % tolerance
    error = approved["researcher"].call("POST", f"/runs/{run['id']}/close", expect=409)["error"]
    assert error["code"] == "unbalanced" and _row(error["details"], "Cd")["hints"]


def test_draws_decrement_the_inventory(approved):
    approved["researcher"].call("POST", "/runs", {"procedure_id": approved["proc"]["id"]}, 201)
    stock = approved["researcher"].call("GET", f"/stocks/{approved['stocks']['CdO']}")
    assert stock["quantity"]["value"] == pytest.approx(1000 - 25.6826, abs=0.001)  # mg left
    cd = next(e["mass_ug"] for e in stock["elements"] if e["element"] == "Cd")
    assert cd == pytest.approx((1000 - 25.6826) * 1000 * 112.414 / 128.413, abs=1)


def test_a_draw_larger_than_the_stock_is_refused(approved):
    body = {"procedure_id": approved["proc"]["id"], "draws": [{"stock_id": approved["stocks"]["CdO"], "amount": "2 g"}]}
    error = approved["researcher"].call("POST", "/runs", body, 409)["error"]
    assert "CdO holds 1000 mg; the draw asks for 2000 mg" in error["message"]
    stock = approved["researcher"].call("GET", f"/stocks/{approved['stocks']['CdO']}")
    assert stock["quantity"]["value"] == 1000  # nothing taken


def test_beyond_the_approved_scale_is_refused_with_the_finding(approved):
    error = approved["researcher"].call("POST", "/runs", {"procedure_id": approved["proc"]["id"], "scale": 3}, 409)["error"]
    assert error["code"] == "blocked" and "beyond the approved scale" in error["message"]
    assert any(f["measure"] == "scale_factor_over_last_approved" for f in error["details"]["findings"])


def test_only_approved_procedures_run(approved):
    r = approved["researcher"]
    draft = r.call("POST", "/procedures", {**{k: approved["proc"][k] for k in ("lab_id", "title")},
                                           "steps": [{"operation": "heat", "temperature_c": 100, "atmosphere": "argon"}],
                                           "draws": [{"stock_id": approved["stocks"]["Se"], "amount": "1 mg"}]}, 201)
    r.call("POST", "/runs", {"procedure_id": draft["id"]}, 409)


def test_listing_runs_by_procedure(approved, client, app):
    run = approved["researcher"].call("POST", "/runs", {"procedure_id": approved["proc"]["id"]}, 201)
    listed = approved["researcher"].call("GET", f"/runs?procedure_id={approved['proc']['id']}")["items"]
    assert [r["id"] for r in listed] == [run["id"]]
    assert approved["researcher"].call("GET", "/runs?procedure_id=999")["items"] == []
    outsider = Api(client, make_user(app, "out@test.example", "researcher"))  # member of no lab
    assert outsider.call("GET", "/runs")["items"] == []
