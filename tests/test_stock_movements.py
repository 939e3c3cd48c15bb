"""Stocks leaving the inventory: dispose into a waste container, transfer to another lab, ship out.

Expected element masses are computed here from the formula and the CIAAW 2021 standard atomic
weights (Prohaska et al., Pure Appl. Chem. 94, 2022; abridged/conventional values: Cd 112.414,
Cl 35.45, O 15.999), with Decimal arithmetic rounded once, half to even, to integer µg.
"""

from __future__ import annotations

import datetime as dt
from decimal import ROUND_HALF_EVEN, Decimal

import pytest

from tests.conftest import Api, make_user

# CIAAW 2021 standard atomic weights, abridged (chlorine: the conventional value of its interval).
CD, CL = Decimal("112.414"), Decimal("35.45")
CD_IN_CDCL2 = CD / (CD + 2 * CL)
PURITY = Decimal("0.99")


def cd_ug(grams: str) -> int:
    """µg of Cd in ``grams`` of CdCl2 at 99 % purity."""
    return int((Decimal(grams) * 1_000_000 * PURITY * CD_IN_CDCL2).quantize(Decimal(1), rounding=ROUND_HALF_EVEN))


def cl_ug(grams: str) -> int:
    fraction = 2 * CL / (CD + 2 * CL)
    return int((Decimal(grams) * 1_000_000 * PURITY * fraction).quantize(Decimal(1), rounding=ROUND_HALF_EVEN))


def field_of(error: dict) -> str:
    return error["details"][0]["field"]


def elements(record: dict) -> dict[str, int]:
    return {row["element"]: row["mass_ug"] for row in record["elements"]}


@pytest.fixture
def site(app, client, api):
    lab_a, place_a = api.lab_and_location()
    lab_b = api.call("POST", "/labs", {"code": "C-202", "name": "Partner group", "building": "C"}, 201)["id"]
    place_b = api.call("POST", "/locations", {"lab_id": lab_b, "building": "C", "room": "C-202",
                                              "storage": "cabinet 2"}, 201)["id"]
    stock = api.call("POST", "/stocks", {
        "label": "CDCL2-OLD", "substance_id": api.substance_id("cadmium chloride"), "lab_id": lab_a,
        "location_id": place_a, "amount": "5.000 g", "purity_percent": 99.0,
        "expires_on": (dt.date.today() - dt.timedelta(days=30)).isoformat()}, 201)
    solids = api.call("POST", "/waste_containers", {"label": "W-SOLIDS", "lab_id": lab_a, "location_id": place_a,
                                                    "stream": "contaminated_solids", "capacity": "5 kg"}, 201)
    return {
        "api": api, "lab_a": lab_a, "lab_b": lab_b, "place_a": place_a, "place_b": place_b,
        "stock": stock, "solids": solids,
        "researcher_a": api.as_(make_user(app, "ra@test.example", "researcher", lab_ids=[lab_a])),
        "researcher_b": api.as_(make_user(app, "rb@test.example", "researcher", lab_ids=[lab_b])),
    }


def site_totals(api: Api) -> dict[str, int]:
    """Element µg on hand in every stock (retired too) plus every waste container."""
    out: dict[str, int] = {}
    records = (api.call("GET", "/stocks?include_retired=true&limit=500")["items"]
               + api.call("GET", "/waste_containers?limit=500")["items"])
    for record in records:
        for symbol, ug in elements(record).items():
            out[symbol] = out.get(symbol, 0) + ug
    return out


def inventory_totals(api: Api) -> dict[str, int]:
    out: dict[str, int] = {}
    for record in api.call("GET", "/stocks?include_retired=true&limit=500")["items"]:
        for symbol, ug in elements(record).items():
            out[symbol] = out.get(symbol, 0) + ug
    return out


def snapshot(api: Api) -> tuple:
    """Stock amounts and element rows, container contents and the audit trail's length."""
    stocks = [(s["id"], s["amount"], s["quantity"], elements(s))
              for s in api.call("GET", "/stocks?include_retired=true&limit=500")["items"]]
    containers = [(c["id"], c["mass_kg"], c["volume_l"], c["entries"], elements(c))
                  for c in api.call("GET", "/waste_containers?limit=500")["items"]]
    return stocks, containers, api.call("GET", "/audit_events?limit=1")["total"], \
        api.call("GET", "/stock_movements")["total"]


def test_dispose_transfer_ship_conserve_every_microgram(site):
    api, stock = site["api"], site["stock"]
    sid = stock["id"]
    assert elements(stock) == {"Cd": cd_ug("5.000"), "Cl": cl_ug("5.000")}
    site_before = site_totals(api)

    # Dispose 2.000 g of the expired reagent into the solids container.
    moved = site["researcher_a"].call("POST", f"/stocks/{sid}/dispose", {
        "container_id": site["solids"]["id"], "amount": "2.000 g", "description": "expired CdCl2"}, 201)
    assert moved["kind"] == "dispose" and moved["quantity_micro"] == 2_000_000 and moved["amount"] == "2000 mg"
    assert elements(moved) == {"Cd": cd_ug("2.000"), "Cl": cl_ug("2.000")}
    container = api.call("GET", f"/waste_containers/{site['solids']['id']}")
    assert elements(container)["Cd"] == cd_ug("2.000")  # was empty
    assert container["mass_kg"] == pytest.approx(0.002) and container["entries"] == 1
    entry = api.call("GET", f"/waste_containers/{site['solids']['id']}/entries")["items"][0]
    assert entry["id"] == moved["waste_entry_id"] and entry["mass_g"] == pytest.approx(2.0)
    held = api.call("GET", f"/stocks/{sid}")
    assert elements(held)["Cd"] == cd_ug("5.000") - cd_ug("2.000")  # dropped by exactly the disposed µg
    assert elements(held)["Cl"] == cl_ug("5.000") - cl_ug("2.000")
    assert held["quantity"] == {"value": 3000.0, "unit": "mg", "kind": "mass"}
    assert site_totals(api) == site_before  # inventory + waste unchanged

    # Transfer half of what is left (1.500 g) to the partner lab.
    before = elements(held)
    moved = api.call("POST", f"/stocks/{sid}/transfer", {"lab_id": site["lab_b"], "location_id": site["place_b"],
                                                         "amount": "1.5 g", "label": "CDCL2-C202"}, 201)
    new = api.call("GET", f"/stocks/{moved['to_stock_id']}")
    source = api.call("GET", f"/stocks/{sid}")
    assert new["lab_id"] == site["lab_b"] and new["quantity"]["value"] == 1500.0
    assert elements(new) == elements(moved)  # the rows given, not recomputed
    for symbol in ("Cd", "Cl"):
        assert elements(new)[symbol] + elements(source)[symbol] == before[symbol]
    assert site_totals(api) == site_before

    # Ship 0.5 g to a collaborator: the inventory drops by exactly the shipped µg.
    on_hand = inventory_totals(api)
    moved = api.call("POST", f"/stocks/{sid}/ship", {"destination": "Partner university, optics group",
                                                     "amount": "500 mg", "note": "for ligand tests"}, 201)
    assert elements(moved) == {"Cd": cd_ug("0.500"), "Cl": cl_ug("0.500")}
    after = inventory_totals(api)
    assert {s: on_hand[s] - after[s] for s in on_hand} == elements(moved)
    assert moved["destination"] == "Partner university, optics group"

    # Emptied to zero: the rest leaves (no amount given) and the stock stays, at 0.
    rest = api.call("POST", f"/stocks/{sid}/ship", {"destination": "returned to supplier"}, 201)
    emptied = api.call("GET", f"/stocks/{sid}")
    assert rest["quantity_micro"] == 1_000_000 and emptied["quantity"]["value"] == 0
    assert set(elements(emptied).values()) == {0} and emptied["retired_at"] is None
    error = api.call("POST", f"/stocks/{sid}/ship", {"destination": "anywhere"}, 422)["error"]
    assert field_of(error) == "amount" and "empty" in error["message"]

    # The movements are listed, of the stock and of the site, and each one is in the audit trail.
    of_stock = api.call("GET", f"/stocks/{sid}/movements")
    assert [m["kind"] for m in of_stock["items"]] == ["dispose", "transfer", "ship", "ship"]
    assert [m["kind"] for m in api.call("GET", f"/stocks/{new['id']}/movements")["items"]] == ["transfer"]
    assert api.call("GET", "/stock_movements?kind=ship")["total"] == 2
    assert api.call("GET", f"/stock_movements?lab_id={site['lab_b']}")["total"] == 1
    assert api.call("GET", "/stock_movements?since=2999-01-01")["total"] == 0
    assert api.call("GET", "/stock_movements?until=2999-01-01")["total"] == 4
    assert [m["kind"] for m in site["researcher_b"].call("GET", "/stock_movements")["items"]] == ["transfer"]
    audited = api.call("GET", "/audit_events?entity=stock_movements&limit=50")["items"]
    assert sorted(int(e["entity_id"]) for e in audited) == [m["id"] for m in of_stock["items"]]


def _refused(site, call) -> dict:
    api = site["api"]
    before = snapshot(api)
    error = call()
    assert snapshot(api) == before  # amounts, element rows, containers, audit trail, movements: identical
    return error


def test_refusals_change_nothing(site, app):
    api, sid, container = site["api"], site["stock"]["id"], site["solids"]["id"]
    # Beyond what is held: 422 naming the amount.
    error = _refused(site, lambda: site["researcher_a"].call("POST", f"/stocks/{sid}/dispose", {
        "container_id": container, "amount": "6 g", "description": "too much"}, 422)["error"])
    assert field_of(error) == "amount" and "holds 5000 mg" in error["message"]
    _refused(site, lambda: api.call("POST", f"/stocks/{sid}/ship", {"destination": "x", "amount": "5.001 g"}, 422))
    # Another lab's stock, for a researcher: refused, whichever way out.
    for action, body in (("dispose", {"container_id": container, "description": "not mine"}),
                         ("transfer", {"lab_id": site["lab_b"], "location_id": site["place_b"], "label": "MINE"}),
                         ("ship", {"destination": "elsewhere"})):
        _refused(site, lambda: site["researcher_b"].call("POST", f"/stocks/{sid}/{action}", body, 403))
    # A transfer into a lab the researcher does not belong to, or into the same lab.
    error = _refused(site, lambda: site["researcher_a"].call("POST", f"/stocks/{sid}/transfer", {
        "lab_id": site["lab_b"], "location_id": site["place_b"], "label": "CDCL2-X"}, 422)["error"])
    assert field_of(error) == "lab_id"
    error = _refused(site, lambda: api.call("POST", f"/stocks/{sid}/transfer", {
        "lab_id": site["lab_a"], "location_id": site["place_a"], "label": "CDCL2-Y"}, 422)["error"])
    assert field_of(error) == "lab_id"
    # A location of another lab than the receiving one.
    error = _refused(site, lambda: api.call("POST", f"/stocks/{sid}/transfer", {
        "lab_id": site["lab_b"], "location_id": site["place_a"], "label": "CDCL2-Z"}, 422)["error"])
    assert field_of(error) == "location_id"
    # Overfilling a container: 1 g of capacity, 2 g offered.
    small = api.call("POST", "/waste_containers", {"label": "W-SMALL", "lab_id": site["lab_a"],
                                                   "location_id": site["place_a"], "stream": "contaminated_solids",
                                                   "capacity": "1 g"}, 201)["id"]
    error = _refused(site, lambda: site["researcher_a"].call("POST", f"/stocks/{sid}/dispose", {
        "container_id": small, "amount": "2 g", "description": "overfill"}, 409)["error"])
    assert field_of(error) == "amount" and "overfill" in error["message"]
    # A solid into a liquid container.
    liquid = api.call("POST", "/waste_containers", {"label": "W-AQ", "lab_id": site["lab_a"],
                                                    "location_id": site["place_a"], "stream": "aqueous_heavy_metals",
                                                    "capacity": "10 L"}, 201)["id"]
    error = _refused(site, lambda: api.call("POST", f"/stocks/{sid}/dispose", {
        "container_id": liquid, "description": "wrong container"}, 422)["error"])
    assert field_of(error) == "container_id"
    # The other lab's container.
    foreign = api.call("POST", "/waste_containers", {"label": "W-B", "lab_id": site["lab_b"],
                                                     "location_id": site["place_b"], "stream": "contaminated_solids",
                                                     "capacity": "5 kg"}, 201)["id"]
    error = _refused(site, lambda: api.call("POST", f"/stocks/{sid}/dispose", {
        "container_id": foreign, "description": "wrong lab"}, 422)["error"])
    assert field_of(error) == "container_id"


def test_a_liquid_goes_into_a_liquid_container_by_volume(site):
    api = site["api"]
    toluene = api.call("POST", "/stocks", {"label": "TOL-1", "substance_id": api.substance_id("toluene"),
                                           "lab_id": site["lab_a"], "location_id": site["place_a"],
                                           "amount": "250 mL"}, 201)
    drum = api.call("POST", "/waste_containers", {"label": "W-NONHAL", "lab_id": site["lab_a"],
                                                  "location_id": site["place_a"],
                                                  "stream": "non_halogenated_solvent_heavy_metals",
                                                  "capacity": "20 L"}, 201)
    moved = api.call("POST", f"/stocks/{toluene['id']}/dispose", {"container_id": drum["id"], "amount": "100 mL",
                                                                  "description": "old toluene"}, 201)
    assert moved["quantity_micro"] == 100_000  # µL
    after = api.call("GET", f"/waste_containers/{drum['id']}")
    assert after["volume_l"] == pytest.approx(0.1)
    assert [c["key"] for c in after["solvent_composition"]] == ["toluene"]
    held = api.call("GET", f"/stocks/{toluene['id']}")
    assert held["quantity"]["value"] == 150.0
    for symbol, ug in elements(toluene).items():
        assert elements(held)[symbol] + elements(moved)[symbol] == ug
        assert elements(after)[symbol] == elements(moved)[symbol]
    # A liquid into the solids container is refused.
    error = api.call("POST", f"/stocks/{toluene['id']}/dispose", {"container_id": site["solids"]["id"],
                                                                  "description": "x"}, 422)["error"]
    assert field_of(error) == "container_id"


def test_disposals_and_entries_into_one_container_at_once_all_land(site, app):
    """4 threads disposing 10 mg of the stock into the solids container and 4 adding 10 mg entries to it,
    10 times each, over HTTP at once. A disposal changes the stock before its entry, and each transaction
    queues at the container and then at the audit chain's head in that order, so none waits on the other
    in a cycle (PostgreSQL would abort one as a deadlock): all 80 answer 201 and every milligram is there."""
    from service.store.audit import verify_chain
    from service.store.db import session_scope
    from tests.conftest import http_post, threads_against_server

    token, container, stock = site["researcher_a"].token, site["solids"]["id"], site["stock"]["id"]
    answers = []

    def worker(port: int, n: int) -> None:
        for i in range(10):
            if n % 2:
                answers.append(http_post(port, f"/stocks/{stock}/dispose", {
                    "container_id": container, "amount": "10 mg", "description": f"thread {n} old reagent {i}"}, token))
            else:
                answers.append(http_post(port, f"/waste_containers/{container}/entries", {
                    "description": f"thread {n} wipes {i}", "mass": "10 mg"}, token))

    threads_against_server(app, worker, 8)
    assert answers == [201] * 80
    read = site["api"].call("GET", f"/waste_containers/{container}")
    assert read["entries"] == 80 and read["mass_kg"] == pytest.approx(80 * 10e-6)
    assert elements(read)["Cd"] == 40 * cd_ug("0.010")
    assert site["api"].call("GET", f"/stocks/{stock}")["quantity"]["value"] == 5000 - 40 * 10
    with session_scope(app.extensions["dotledger.sessions"], write=False) as session:
        assert verify_chain(session).ok
