"""Accumulation areas: the satellite limits summed over an area's containers, the clock, subpart K.

Sources: 40 CFR 262.15(a) — "as much as 55 gallons of non-acute hazardous waste and/or either one
quart of liquid acute hazardous waste … or 1 kg (2.2 lbs) of solid acute hazardous waste" per
satellite area (values 2nd: state verbatim adoptions, EPA RCRA Online 14703; wording and paragraph
from memory — verify); 262.15(a)(6) — excess removed within 3 consecutive calendar days (2nd,
paragraph from memory); 262.208(a) removal at least every 12 months (seen), 262.208(d) within 10
calendar days once over 55 gal (seen). Unit relations: 1 US gallon = 231 in³ = 3.785411784 L and
1 US quart = 0.946352946 L exactly (NIST Handbook 44, Appendix C). "As much as" allows the amount
itself, so the limit is exceeded only above it.
"""

from __future__ import annotations

import datetime as dt
import json
import urllib.request
from decimal import Decimal
from pathlib import Path

import pytest
import yaml

from service.rules import load_packs
from service.rules.evaluate import evaluate
from service.rules.subjects import AreaContainer, AreaSubject
from service.store.db import session_scope
from service.store.models import Location
from tests.conftest import Api, make_user, threads_against_server

RULES = Path(__file__).resolve().parents[1] / "rules"
GALLON_L = Decimal("3.785411784")  # NIST HB 44 App. C
QUART_L = GALLON_L / 4  # 0.946352946 L
LIMIT_L = 55 * GALLON_L  # 208.19764812 L
SAA, CAA = "satellite_accumulation_area", "central_accumulation_area"


@pytest.fixture(scope="module")
def packs():
    return load_packs(RULES, ["us-federal", "eu", "site-example"])


def liquid(label, litres, acute=False, days=None):
    return AreaContainer(label, "liquid", float(litres), 0.0, acute, days)


def solid(label, kg, acute=False):
    return AreaContainer(label, "solid", 0.0, float(kg), acute)


def fired(packs, *containers, kind=SAA, days_over=None):
    return {f.rule_id: f for f in evaluate(packs, "accumulation_area", AreaSubject("hood H2", kind, containers, days_over))}


def test_fifty_five_gallons_is_exact():
    assert LIMIT_L == Decimal("208.19764812")


@pytest.mark.parametrize("litres, over", [
    (LIMIT_L, False),                         # exactly 55 gal: "as much as" — allowed (262.15(a))
    (LIMIT_L + Decimal("0.00000001"), True),  # 10 nL above
    (Decimal("208"), False),                  # the old 208 L approximation is under 55 gal
])
def test_fifty_five_gallons_per_area(packs, litres, over):
    half = litres / 2
    found = fired(packs, liquid("W1", half), liquid("W2", half))  # the sum counts, not each container
    assert ("us.saa-volume-limit" in found) is over
    assert "us.saa-volume-limit" not in fired(packs, liquid("W1", half))
    if over:
        assert found["us.saa-volume-limit"].level == "block"


def test_each_container_under_but_the_area_over(packs):
    """Two 110 L containers: each well under 55 gal, together 220 L = 58.12 gal, over 262.15(a)."""
    found = fired(packs, liquid("W1", 110), liquid("W2", 110))
    assert "us.saa-volume-limit" in found
    assert "58.117" in found["us.saa-volume-limit"].detail  # 220 / 3.785411784 = 58.1178… gal


@pytest.mark.parametrize("litres, caution", [(Decimal("49.5") * GALLON_L, True),
                                             (Decimal("49.5") * GALLON_L - Decimal("0.001"), False)])
def test_near_limit_from_ninety_percent(packs, litres, caution):
    """The 90 % warning (49.5 gal = 187.377883308 L) is our choice, not a regulatory value."""
    assert ("us.saa-volume-near-limit" in fired(packs, liquid("W1", litres))) is caution


@pytest.mark.parametrize("litres, over", [(QUART_L, False), (QUART_L + Decimal("0.000001"), True)])
def test_one_quart_of_acute_liquid(packs, litres, over):
    """262.15(a): one quart of liquid acute hazardous waste per area (0.946352946 L, NIST HB 44)."""
    found = fired(packs, liquid("A1", litres / 2, acute=True), liquid("A2", litres / 2, acute=True),
                  liquid("W1", 5))
    assert ("us.saa-acute-liquid-limit" in found) is over


@pytest.mark.parametrize("kg, over", [(Decimal("1"), False), (Decimal("1.000001"), True)])
def test_one_kilogram_of_acute_solid(packs, kg, over):
    """262.15(a): 1 kg (2.2 lbs) of solid acute hazardous waste per area."""
    assert ("us.saa-acute-solid-limit" in fired(packs, solid("S1", kg, acute=True))) is over
    assert "us.saa-acute-solid-limit" not in fired(packs, solid("S1", kg * 10))  # non-acute solid: no kg limit


def test_solids_are_not_counted_in_the_volume_and_say_so(packs):
    found = fired(packs, liquid("W1", 200), solid("S1", 40))
    assert "us.saa-volume-limit" not in found  # 200 L < 208.19764812 L; the solids have no recorded volume
    assert "S1" in found["us.saa-volume-near-limit"].detail


def test_a_central_area_has_no_quantity_limit(packs):
    assert not fired(packs, liquid("W1", 1000), liquid("A1", 5, acute=True), kind=CAA)


@pytest.mark.parametrize("days, fires", [(3, False), (4, True)])
def test_three_calendar_days_once_over(packs, days, fires):
    """262.15(a)(6): the excess is moved within 3 consecutive calendar days of exceeding the limit."""
    assert ("us.saa-excess-three-days" in fired(packs, liquid("W1", 210), days_over=days)) is fires


def test_subpart_k_applies_only_when_the_site_opts_in(packs, tmp_path):
    assert not {"us.subpart-k-ten-days", "us.subpart-k-twelve-months"} & set(fired(packs, liquid("W1", 210, days=400),
                                                                                     days_over=20))
    site = yaml.safe_load((RULES / "site-example.yaml").read_text(encoding="utf-8"))
    site["opt_ins"] = ["academic_laboratories"]
    for name in ("us-federal", "eu"):
        (tmp_path / f"{name}.yaml").write_text((RULES / f"{name}.yaml").read_text(encoding="utf-8"), encoding="utf-8")
    (tmp_path / "site-example.yaml").write_text(yaml.safe_dump(site), encoding="utf-8")
    opted = load_packs(tmp_path, ["us-federal", "eu", "site-example"])
    assert opted.opt_ins == ("academic_laboratories",)
    # 262.208(d): 10 calendar days once over 55 gal; the 3-day rule of 262.15 gives way
    assert "us.saa-excess-three-days" not in fired(opted, liquid("W1", 210), days_over=20)
    assert "us.subpart-k-ten-days" not in fired(opted, liquid("W1", 210), days_over=10)
    assert "us.subpart-k-ten-days" in fired(opted, liquid("W1", 210), days_over=11)
    # 262.208(a): at least every 12 months (read as 365 days — our reading)
    assert "us.subpart-k-twelve-months" not in fired(opted, liquid("W1", 5, days=364.9))
    assert "us.subpart-k-twelve-months" in fired(opted, liquid("W1", 5, days=365.0))


# ------------------------------------------------------------------------------ through the API ----

@pytest.fixture
def area(app, client):
    admin = Api(client, make_user(app, "admin@test.example", "admin"))
    lab = admin.call("POST", "/labs", {"code": "A-1", "name": "Area test lab"}, 201)["id"]
    saa = admin.call("POST", "/locations", {"lab_id": lab, "building": "A", "room": "A-1", "storage": "hood SAA",
                                            "kind": SAA}, 201)["id"]
    ids = [admin.call("POST", "/waste_containers", {"label": label, "lab_id": lab, "location_id": saa, "capacity": "200 L",
                                                    "stream": "aqueous_heavy_metals"}, 201)["id"]
           for label in ("A-W1", "A-W2")]
    return {"admin": admin, "saa": saa, "containers": ids, "app": app, "lab": lab}


def _add(area, container_id, volume):
    return area["admin"].call("POST", f"/waste_containers/{container_id}/entries",
                              {"description": "rinse water", "volume": volume}, 201)


def _since(area):
    with session_scope(area["app"].extensions["dotledger.sessions"], write=False) as session:
        return session.get(Location, area["saa"]).over_limit_since


def test_the_entry_that_crosses_starts_the_clock_and_a_reversal_stops_it(area):
    one, two = area["containers"]
    _add(area, one, "150 L")
    assert _since(area) is None
    crossing = _add(area, two, "60 L")  # 210 L > 208.19764812 L (55 gal)
    assert _since(area) is not None
    read = area["admin"].call("GET", f"/accumulation_areas/{area['saa']}")
    assert read["totals"]["non_acute_volume_l"] == 210
    assert read["totals"]["non_acute_volume_gal"] == pytest.approx(210 / 3.785411784, abs=1e-6)
    assert {f["rule_id"] for f in read["findings"]} >= {"us.saa-volume-limit"}
    assert any(row["rule_id"] == "us.saa-volume-limit" and row["exceeded"] for row in read["limits"])
    # each container's findings include the area's
    for ident in (one, two):
        container = area["admin"].call("GET", f"/waste_containers/{ident}")
        assert "us.saa-volume-limit" in {f["rule_id"] for f in container["findings"]}
        assert container["accumulation_area"]["id"] == area["saa"]
    area["admin"].call("POST", f"/waste_containers/{two}/entries/{crossing['id']}/reverse", {"reason": "wrong container"}, 201)
    assert _since(area) is None


def test_collection_takes_a_container_out_of_the_area(area):
    one, two = area["containers"]
    _add(area, one, "150 L")
    _add(area, two, "60 L")
    area["admin"].call("POST", f"/waste_containers/{two}/request_pickup")
    assert _since(area) is not None  # pickup requested: still in the area
    area["admin"].call("POST", f"/waste_containers/{two}/collect")
    assert _since(area) is None
    read = area["admin"].call("GET", f"/accumulation_areas/{area['saa']}")
    assert read["totals"]["non_acute_volume_l"] == 150 and read["totals"]["containers"] == 1
    collected = area["admin"].call("GET", f"/waste_containers/{two}")
    assert "us.saa-volume-limit" not in {f["rule_id"] for f in collected["findings"]}


def test_three_days_after_the_day_it_crossed(area):
    one, two = area["containers"]
    _add(area, one, "150 L")
    _add(area, two, "60 L")
    with session_scope(area["app"].extensions["dotledger.sessions"]) as session:
        session.get(Location, area["saa"]).over_limit_since = dt.datetime.now(dt.timezone.utc) - dt.timedelta(days=4)
    read = area["admin"].call("GET", f"/accumulation_areas/{area['saa']}")
    assert read["days_over_limit"] == 4
    assert "us.saa-excess-three-days" in {f["rule_id"] for f in read["findings"]}


def test_only_accumulation_areas_are_listed(area):
    admin = area["admin"]
    listed = admin.call("GET", "/accumulation_areas")
    assert [a["id"] for a in listed["items"]] == [area["saa"]] and listed["total"] == 1
    storage = admin.call("GET", "/locations")["items"]
    other = next((loc["id"] for loc in storage if loc["kind"] == "storage"), None)
    if other is not None:
        admin.call("GET", f"/accumulation_areas/{other}", expect=404)
    admin.call("GET", "/accumulation_areas/999999", expect=404)


def _post(port: int, path: str, body: dict, token: str) -> dict:
    request = urllib.request.Request(f"http://127.0.0.1:{port}/api/v1{path}", data=json.dumps(body).encode(),
                                     method="POST", headers={"Content-Type": "application/json",
                                                             "Authorization": f"Bearer {token}"})
    with urllib.request.urlopen(request, timeout=60) as response:
        return json.loads(response.read())


def test_concurrent_crossings_leave_the_clock_as_the_area_stands(area):
    """8 threads over HTTP, each 6 times: 60 L into a second container of an area holding 150 L (over the
    55 gallons = 208.2 L of 40 CFR 262.15(a)), then that entry reversed (under again unless another thread's
    entry still stands). Changes to one area are judged one after the other, so after each step the clock
    is as the area stood at that step's commit: at the end, everything reversed, it is cleared; one more
    crossing entry starts it."""
    admin, app = area["admin"], area["app"]
    body = {"lab_id": area["lab"], "location_id": area["saa"], "capacity": "1000 L", "stream": "aqueous_heavy_metals"}
    base, other = (admin.call("POST", "/waste_containers", {**body, "label": label}, 201)["id"]
                   for label in ("A-C1", "A-C2"))
    _add(area, base, "150 L")
    failures = []

    def worker(port: int, n: int) -> None:
        for i in range(6):
            try:
                added = _post(port, f"/waste_containers/{other}/entries",
                              {"description": f"thread {n} rinse {i}", "volume": "60 L"}, admin.token)
                _post(port, f"/waste_containers/{other}/entries/{added['id']}/reverse", {"reason": "wrong container"},
                      admin.token)
            except Exception as exc:  # noqa: BLE001 - collected and asserted below
                failures.append(repr(exc))

    threads_against_server(app, worker, 8)
    assert failures == []
    assert _since(area) is None
    _add(area, other, "60 L")
    assert _since(area) is not None
