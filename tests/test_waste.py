"""Waste containers through the API: contents, findings, overfill, reversals, concurrency.

Regulatory values: 40 CFR 261.24 Table 1 (D006 cadmium 1.0 mg/L, seen), 261.21(a)(1)
(ignitable below 60 °C, seen), 261.31 F003 (spent acetone, seen); acetone flash point −20 °C
(NAS, Chemical Laboratory Safety and Security, 2016, App. D).
"""

from __future__ import annotations

import json
import threading
import urllib.error
import urllib.request

import pytest
from waitress.server import create_server

from tests.conftest import Api, make_user


@pytest.fixture
def site(app, client):
    admin = Api(client, make_user(app, "admin@test.example", "admin"))
    lab = admin.call("POST", "/labs", {"code": "W-1", "name": "Waste test lab"}, 201)["id"]
    saa = admin.call("POST", "/locations", {"lab_id": lab, "building": "W", "room": "W-1", "storage": "hood SAA",
                                            "kind": "satellite_accumulation_area"}, 201)["id"]
    researcher = Api(client, make_user(app, "res@test.example", "researcher", lab_ids=[lab]))
    return {"admin": admin, "researcher": researcher, "lab": lab, "saa": saa,
            "acetone": admin.substance_id("acetone"), "toluene": admin.substance_id("toluene")}


def _container(site, label="W-C1", capacity="25 L", stream="non_halogenated_solvent_heavy_metals"):
    return site["admin"].call("POST", "/waste_containers", {"label": label, "lab_id": site["lab"],
                                                            "location_id": site["saa"], "stream": stream,
                                                            "capacity": capacity}, 201)


def _acetone_wash(site, container_id, volume="20 L", cd="25 mg"):
    return site["researcher"].call("POST", f"/waste_containers/{container_id}/entries", {
        "description": "acetone washes of CdSe precipitations", "volume": volume,
        "components": [{"substance_id": site["acetone"], "volume": volume}],
        "elements": [{"element": "Cd", "mass": cd}]}, 201)


def _codes(container):
    return {f["suggested_code"]["code"] for f in container["findings"] if f.get("suggested_code")}


def test_twenty_litres_of_acetone_with_25_mg_cd(site):
    container = _container(site)
    _acetone_wash(site, container["id"])
    read = site["researcher"].call("GET", f"/waste_containers/{container['id']}")
    assert read["volume_l"] == 20 and read["fill_percent"] == 80.0
    cd = next(e for e in read["elements"] if e["element"] == "Cd")
    assert cd["concentration_mg_per_l"] == pytest.approx(1.25)  # 25 mg / 20 L
    assert read["solvent_composition"] == [{"substance": "acetone", "key": "acetone", "volume_percent": 100.0}]
    assert {"D006", "D001", "F003"} <= _codes(read)
    assert all(f["disclaimer"] for f in read["findings"]) and read["caution"]


def test_fifteen_mg_cd_does_not_suggest_d006(site):
    container = _container(site)
    _acetone_wash(site, container["id"], cd="15 mg")  # 0.75 mg/L < 1.0 mg/L
    read = site["researcher"].call("GET", f"/waste_containers/{container['id']}")
    assert "D006" not in _codes(read) and {"D001", "F003"} <= _codes(read)


def test_overfill_is_refused_and_nothing_changes(site):
    container = _container(site, capacity="20 L")
    _acetone_wash(site, container["id"], volume="19.5 L")
    error = site["researcher"].call("POST", f"/waste_containers/{container['id']}/entries", {
        "description": "one more wash", "volume": "1 L", "elements": []}, 409)["error"]
    assert "would overfill" in error["message"] and "19.5 L of 20 L" in error["message"]
    assert site["researcher"].call("GET", f"/waste_containers/{container['id']}")["volume_l"] == 19.5


def test_a_correction_is_a_reversing_entry(site):
    container = _container(site)
    entry = _acetone_wash(site, container["id"], volume="2 L", cd="3 mg")
    reversal = site["researcher"].call("POST", f"/waste_containers/{container['id']}/entries/{entry['id']}/reverse",
                                       {"reason": "entered in the wrong container"}, 201)
    assert reversal["volume_ml"] == -2000 and reversal["elements"][0]["mass_ug"] == -3000
    read = site["researcher"].call("GET", f"/waste_containers/{container['id']}")
    assert read["volume_l"] == 0 and read["elements"] == [] and read["entries"] == 2
    site["researcher"].call("POST", f"/waste_containers/{container['id']}/entries/{entry['id']}/reverse",
                            {"reason": "again"}, 409)
    site["researcher"].call("POST", f"/waste_containers/{container['id']}/entries/{reversal['id']}/reverse",
                            {"reason": "undo"}, 409)
    assert len(site["researcher"].call("GET", f"/waste_containers/{container['id']}/entries")["items"]) == 2


def test_states_and_entries(site):
    container = _container(site)
    _acetone_wash(site, container["id"], volume="1 L", cd="1 mg")
    site["admin"].call("POST", f"/waste_containers/{container['id']}/collect", expect=409)
    assert site["researcher"].call("POST", f"/waste_containers/{container['id']}/mark_full")["state"] == "full"
    error = site["researcher"].call("POST", f"/waste_containers/{container['id']}/entries", {
        "description": "late", "volume": "1 L"}, 409)["error"]
    assert "entries go to open containers" in error["message"]
    site["researcher"].call("POST", f"/waste_containers/{container['id']}/request_pickup", expect=403)
    assert site["admin"].call("POST", f"/waste_containers/{container['id']}/request_pickup")["state"] == "pickup_requested"
    assert site["admin"].call("POST", f"/waste_containers/{container['id']}/collect")["collected_at"]


@pytest.mark.parametrize(
    "body, field",
    [
        ({"description": "x", "mass": "1 kg"}, "volume"),  # a liquid container takes volumes
        ({"description": "x", "volume": "1 L", "elements": [{"element": "Qq", "mass": "1 mg"}]}, "elements.0.element"),
        ({"description": "x", "volume": "1 L", "elements": [{"element": "Cd", "mass": "1 mL"}]}, "elements[0].mass"),
        ({"description": "x", "volume": "1 L", "components": [{"substance_id": 1, "volume": "2 L"}]}, "components"),
        ({"description": "x", "volume": "0 L"}, "volume"),
    ],
)
def test_bad_entries(site, body, field):
    container = _container(site)
    error = site["researcher"].call("POST", f"/waste_containers/{container['id']}/entries", body, 422)["error"]
    assert any(d.get("field") == field for d in error["details"]), error


def test_concurrent_additions_over_http_are_never_lost(app, site):
    """16 threads × 50 entries of 10 mL into a 5 L container, through a real HTTP server."""
    container = _container(site, capacity="5 L")
    token = site["researcher"].token
    server = create_server(app, host="127.0.0.1", port=0, threads=8)
    port = server.effective_port
    thread = threading.Thread(target=server.run, daemon=True)
    thread.start()
    acknowledged, refused, other = [], [], []

    def worker(n: int) -> None:
        for i in range(50):
            body = json.dumps({"description": f"thread {n} wash {i}", "volume": "10 mL",
                               "elements": [{"element": "Cd", "mass": "0.1 mg"}]}).encode()
            request = urllib.request.Request(f"http://127.0.0.1:{port}/api/v1/waste_containers/{container['id']}/entries",
                                             data=body, method="POST", headers={"Content-Type": "application/json",
                                                                               "Authorization": f"Bearer {token}"})
            try:
                with urllib.request.urlopen(request, timeout=60) as response:
                    acknowledged.append(json.loads(response.read())["id"])
            except urllib.error.HTTPError as exc:
                (refused if exc.code == 409 else other).append(exc.code)

    try:
        workers = [threading.Thread(target=worker, args=(n,)) for n in range(16)]
        for w in workers:
            w.start()
        for w in workers:
            w.join(timeout=300)
    finally:
        server.close()
    assert other == []
    assert len(acknowledged) + len(refused) == 800
    assert len(acknowledged) == 500  # exactly the capacity: 5 L / 10 mL
    read = site["researcher"].call("GET", f"/waste_containers/{container['id']}")
    assert read["volume_l"] == pytest.approx(len(acknowledged) * 0.010)
    assert read["elements"][0]["mass_ug"] == 100 * len(acknowledged)
    assert read["entries"] == len(acknowledged)
