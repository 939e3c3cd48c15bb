"""Idempotency-Key on the API's writes: a retried request answers the first result and records nothing.

The behaviour follows the header as drafted at the IETF (draft-ietf-httpapi-idempotency-key-header: a
key the client makes up per request; a reuse with another payload is an error, 422 in the draft's
error section), from memory.
"""

from __future__ import annotations

import pytest

from tests.conftest import Api, make_user

HEADER = "Idempotency-Key"


def open_container(admin: Api, code: str, capacity: str) -> tuple[int, int]:
    """A lab ``code`` with a satellite accumulation area and a solvent waste container there: (lab, container)."""
    lab = admin.call("POST", "/labs", {"code": code, "name": f"Test lab {code}"}, 201)["id"]
    saa = admin.call("POST", "/locations", {"lab_id": lab, "building": "T", "room": code, "storage": "hood SAA",
                                            "kind": "satellite_accumulation_area"}, 201)["id"]
    container = admin.call("POST", "/waste_containers", {"label": f"{code}-C1", "lab_id": lab, "location_id": saa,
                                                         "stream": "non_halogenated_solvent_heavy_metals",
                                                         "capacity": capacity}, 201)["id"]
    return lab, container


@pytest.fixture
def site(app, client):
    admin = Api(client, make_user(app, "admin@test.example", "admin"))
    lab, container = open_container(admin, "I-1", "20 L")
    researcher = make_user(app, "res@test.example", "researcher", lab_ids=[lab])
    return {"client": client, "admin": admin, "researcher": researcher, "lab": lab, "container": container,
            "acetone": admin.substance_id("acetone"), "admin_token": admin.token}


def _entry(site, volume="1 L", cd="2 mg"):
    return {"description": "acetone washes of CdSe precipitations", "volume": volume,
            "components": [{"substance_id": site["acetone"], "volume": volume}],
            "elements": [{"element": "Cd", "mass": cd}]}


def _post(site, body, key=None, token=None):
    headers = {"Authorization": f"Bearer {token or site['researcher']}"}
    if key is not None:
        headers[HEADER] = key
    return site["client"].post(f"/api/v1/waste_containers/{site['container']}/entries", json=body, headers=headers)


def _recorded(site) -> tuple[int, int]:
    """(entries in the container, audit events on waste entries) as the API lists them."""
    entries = site["admin"].call("GET", f"/waste_containers/{site['container']}/entries")["total"]
    events = site["admin"].call("GET", "/audit_events?entity=waste_entries")["total"]
    return entries, events


def test_a_retried_entry_is_recorded_once(site):
    first = _post(site, _entry(site), key="retry-0001")
    assert first.status_code == 201
    again = _post(site, _entry(site), key="retry-0001")
    assert again.status_code == 201 and again.get_json() == first.get_json()
    assert again.headers.get("Idempotent-Replayed") == "true"
    assert _recorded(site) == (1, 1)  # one entry, one audit event for it
    container = site["admin"].call("GET", f"/waste_containers/{site['container']}")
    assert container["entries"] == 1 and container["volume_l"] == 1  # the totals count it once
    # Without a key, a repeat is a new entry (as before).
    assert _post(site, _entry(site)).status_code == 201
    assert _recorded(site) == (2, 2)


def test_the_same_key_with_another_body_is_refused_naming_the_header(site):
    assert _post(site, _entry(site, cd="2 mg"), key="k-1").status_code == 201
    reused = _post(site, _entry(site, cd="3 mg"), key="k-1")
    assert reused.status_code == 422
    error = reused.get_json()["error"]
    assert error["code"] == "idempotency_key_reused" and HEADER in error["message"]
    assert error["details"][0]["field"] == HEADER
    assert _recorded(site) == (1, 1)


def test_keys_are_per_user_and_per_request(site):
    entry = _post(site, _entry(site), key="shared")
    assert entry.status_code == 201
    # Another user's request with the same key is theirs: recorded.
    assert _post(site, _entry(site), key="shared", token=site["admin_token"]).status_code == 201
    assert _recorded(site) == (2, 2)
    # The same key on another path is another request: refused, not answered with the entry.
    headers = {"Authorization": f"Bearer {site['researcher']}", HEADER: "shared"}
    reverse = site["client"].post(f"/api/v1/waste_containers/{site['container']}/entries/{entry.get_json()['id']}"
                                  "/reverse", json={"reason": "entered twice"}, headers=headers)
    assert reverse.status_code == 422 and reverse.get_json()["error"]["code"] == "idempotency_key_reused"
    assert _recorded(site) == (2, 2)


def test_a_failed_request_keeps_no_key(site):
    overfill = _post(site, _entry(site, volume="30 L"), key="k-fail")  # 30 L into a 20 L container
    assert overfill.status_code == 409
    # Nothing was recorded, the key included: the corrected request under the same key runs.
    assert _post(site, _entry(site, volume="3 L"), key="k-fail").status_code == 201
    assert _recorded(site) == (1, 1)


def test_patch_answers_the_first_result(site):
    admin = {"Authorization": f"Bearer {site['admin_token']}", HEADER: "rename-1"}
    first = site["client"].patch(f"/api/v1/labs/{site['lab']}", json={"name": "Renamed once"}, headers=admin)
    assert first.status_code == 200
    site["admin"].call("PATCH", f"/labs/{site['lab']}", {"name": "Renamed twice"})
    replay = site["client"].patch(f"/api/v1/labs/{site['lab']}", json={"name": "Renamed once"}, headers=admin)
    assert replay.status_code == 200 and replay.get_json() == first.get_json()
    assert site["admin"].call("GET", f"/labs/{site['lab']}")["name"] == "Renamed twice"  # not applied again


@pytest.mark.parametrize("key", ["", "x" * 201, "has space", "caf\u00e9"])
def test_a_malformed_key_is_refused(site, key):
    answer = _post(site, _entry(site), key=key)
    assert answer.status_code == 422, answer.get_json()
    assert answer.get_json()["error"]["details"][0]["field"] == HEADER
    assert _recorded(site) == (0, 0)


def test_the_openapi_document_offers_the_header_on_writes(client):
    document = client.get("/api/v1/openapi.json").get_json()
    entry = document["paths"]["/api/v1/waste_containers/{ident}/entries"]
    assert HEADER in [p["name"] for p in entry["post"]["parameters"] if p["in"] == "header"]
    assert "422" in entry["post"]["responses"] and "409" in entry["post"]["responses"]
    assert all(p["in"] != "header" for p in entry["get"]["parameters"])
    patch = document["paths"]["/api/v1/labs/{ident}"]["patch"]
    assert HEADER in [p["name"] for p in patch["parameters"]]
