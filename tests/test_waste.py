"""Waste containers through the API: contents, findings, overfill, reversals, concurrency.

Regulatory values: 40 CFR 261.24 Table 1 (D006 cadmium 1.0 mg/L, seen), 261.21(a)(1)
(ignitable below 60 °C, seen), 261.31 F003 (spent acetone, seen); acetone flash point −20 °C
(NAS, Chemical Laboratory Safety and Security, 2016, App. D).
"""

from __future__ import annotations

import json
import urllib.error
import urllib.request
from decimal import Decimal

import pytest
from sqlalchemy import insert, select, text

from service.store.audit import AuditEvent, verify_chain
from service.store.db import make_engine, session_scope, upgrade
from service.store.models import Lab, Location, Substance, WasteContainer, WasteEntry, WasteEntryComponent, WasteEntryElement
from tests.conftest import Api, make_user, threads_against_server


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
        ({"description": "x", "volume": "1 L", "elements": [{"element": "Cd", "mass": "1 mL"}]}, "elements.0.mass"),
        ({"description": "x", "volume": "1 L", "components": [{"substance_id": 1, "volume": "2 L"}]}, "components"),
        ({"description": "x", "volume": "0 L"}, "volume"),
        ({"description": "x", "volume": "1 L", "components": [{"substance_id": 1, "volume": "2 mL"},
                                                              {"substance_id": 1, "volume": "3 mL"}]},
         "components[1].substance_id"),  # one substance given twice: refused naming the second, not a 409
    ],
)
def test_bad_entries(site, body, field):
    container = _container(site)
    error = site["researcher"].call("POST", f"/waste_containers/{container['id']}/entries", body, 422)["error"]
    assert any(d.get("field") == field for d in error["details"]), error


def test_concurrent_additions_over_http_are_never_lost(app, site):
    """16 threads × 50 entries of 10 mL into a 5 L container, through a real HTTP server."""
    concurrent_additions_are_never_lost(app, site, lambda worker, count: threads_against_server(app, worker, count))


def concurrent_additions_are_never_lost(app, site, run_threads) -> None:
    """16 threads × 50 entries of 10 mL into a 5 L container over HTTP; ``run_threads(worker, 16)`` runs
    ``worker(port, n)`` for n < 16 at once against a server of ``app``'s database.

    Exactly 5 L / 10 mL = 500 additions are acknowledged and the other 300 refused as overfill (409);
    the container, its running totals, a fresh SUM over its entries and the audit trail (one create
    event per acknowledged entry, the chain intact) all agree.
    """
    container = _container(site, capacity="5 L")
    token = site["researcher"].token
    acknowledged, refused, other = [], [], []

    def worker(port: int, n: int) -> None:
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

    run_threads(worker, 16)
    assert other == []
    assert len(acknowledged) + len(refused) == 800
    assert len(acknowledged) == 500  # exactly the capacity: 5 L / 10 mL
    read = site["researcher"].call("GET", f"/waste_containers/{container['id']}")
    assert read["volume_l"] == pytest.approx(len(acknowledged) * 0.010)
    assert read["elements"][0]["mass_ug"] == 100 * len(acknowledged)
    assert read["entries"] == len(acknowledged)
    stored, summed = _stored_and_summed(app.extensions["dotledger.engine"], container["id"])
    assert stored == summed and summed["totals"] == [(len(acknowledged), 10_000 * len(acknowledged), 0)]
    with session_scope(app.extensions["dotledger.sessions"], write=False) as session:
        created = set(session.scalars(select(AuditEvent.entity_id).where(
            AuditEvent.entity == "waste_entries", AuditEvent.action == "create")))
        assert len(set(acknowledged)) == 500 and created == {str(i) for i in acknowledged}
        report = verify_chain(session)
    assert report.ok, report


# The running totals against a fresh SUM over the entries, in plain SQL (what the totals replace).
_STORED = {
    "totals": "SELECT entries, volume_ul, mass_ug FROM waste_container_totals WHERE container_id = :c",
    "elements": "SELECT element, mass_ug FROM waste_container_elements WHERE container_id = :c AND mass_ug <> 0 "
                "ORDER BY element",
    "components": "SELECT substance_id, volume_ul FROM waste_container_components "
                  "WHERE container_id = :c AND volume_ul <> 0 ORDER BY substance_id",
}
_SUMMED = {
    "totals": "SELECT COUNT(*), COALESCE(SUM(volume_ul), 0), COALESCE(SUM(mass_ug), 0) FROM waste_entries "
              "WHERE container_id = :c",
    "elements": "SELECT x.element, SUM(x.mass_ug) FROM waste_entry_elements x JOIN waste_entries e ON e.id = x.entry_id "
                "WHERE e.container_id = :c GROUP BY x.element HAVING SUM(x.mass_ug) <> 0 ORDER BY x.element",
    "components": "SELECT x.substance_id, SUM(x.volume_ul) FROM waste_entry_components x "
                  "JOIN waste_entries e ON e.id = x.entry_id WHERE e.container_id = :c "
                  "GROUP BY x.substance_id HAVING SUM(x.volume_ul) <> 0 ORDER BY x.substance_id",
}


def _stored_and_summed(engine, container_id: int) -> tuple[dict, dict]:
    def rows(sql: str) -> list[tuple]:  # PostgreSQL sums BIGINT as NUMERIC (Decimal)
        return [tuple(int(v) if isinstance(v, Decimal) else v for v in row)
                for row in connection.execute(text(sql), {"c": container_id})]

    with engine.connect() as connection:
        return {k: rows(q) for k, q in _STORED.items()}, {k: rows(q) for k, q in _SUMMED.items()}


def test_running_totals_equal_the_sum_of_entries_and_reversals(app, site):
    """40 entries of varying volume, Cd/Se mass, components and solids; every third one reversed."""
    container = _container(site, capacity="200 L")
    path = f"/waste_containers/{container['id']}/entries"
    entries = []
    for n in range(40):
        volume_ml = 100 + 37 * n
        body = {"description": f"wash {n}", "volume": f"{volume_ml} mL", "filterable_solids_percent": (n % 4) * 0.15,
                "components": [{"substance_id": site["acetone" if n % 2 else "toluene"], "volume": f"{volume_ml // 2} mL"}],
                "elements": [{"element": "Cd", "mass": f"{0.125 * n} mg"}] + (
                    [{"element": "Se", "mass": f"{3 * n} ug"}] if n % 5 == 0 else [])}
        entries.append(site["researcher"].call("POST", path, body, 201))
    for entry in entries[::3]:
        site["researcher"].call("POST", f"{path}/{entry['id']}/reverse", {"reason": "wrong container"}, 201)
    stored, summed = _stored_and_summed(app.extensions["dotledger.engine"], container["id"])
    assert stored == summed
    # Independently of the code: the kept entries are n = 1, 2, 4, 5, 7, … (n % 3 != 0).
    kept = [n for n in range(40) if n % 3]
    assert summed["totals"] == [(40 + 14, sum(1000 * (100 + 37 * n) for n in kept), 0)]
    assert dict(summed["elements"]) == {"Cd": sum(125 * n for n in kept), "Se": sum(3 * n for n in kept if n % 5 == 0)}
    read = site["researcher"].call("GET", f"/waste_containers/{container['id']}")
    volume_ul = sum(1000 * (100 + 37 * n) for n in kept)
    assert read["volume_l"] == volume_ul / 1e6 and read["entries"] == 54
    # filterable solids: the volume-weighted mean of the kept entries' percentages
    weighted = sum(1000 * (100 + 37 * n) * (n % 4) * 0.15 for n in kept) / volume_ul
    assert read["filterable_solids_percent"] == pytest.approx(weighted, abs=1e-3)


def test_the_migration_fills_the_totals_from_existing_entries(database_url):
    """Entries written before the totals existed are summed once by revision 0008."""
    upgrade(database_url, "0006_site")
    engine = make_engine(database_url)
    try:
        with engine.begin() as conn:
            lab = conn.execute(insert(Lab).values(code="M-1", name="Migration lab")).inserted_primary_key[0]
            place = conn.execute(insert(Location).values(lab_id=lab, building="M", room="1", storage="SAA",
                                                         kind="satellite_accumulation_area")).inserted_primary_key[0]
            acetone = conn.execute(insert(Substance).values(key="acetone", name="acetone", formula="C3H6O", cas="67-64-1",
                                                            state="liquid", source="test")).inserted_primary_key[0]
            full, empty = (conn.execute(insert(WasteContainer).values(
                label=label, lab_id=lab, location_id=place, stream="non_halogenated_solvent_heavy_metals", form="liquid",
                capacity_text="20 L", capacity_micro=20_000_000, state="open")).inserted_primary_key[0]
                for label in ("M-C1", "M-C2"))
            # (id, volume µL, solids %, reverses, {element: µg}, acetone µL)
            for ident, volume, solids, reverses, elements, acetone_ul in (
                    (1, 2_000_000, 1.0, None, {"Cd": 5000}, 2_000_000),
                    (2, 3_000_000, None, None, {"Cd": 2000, "Se": 3000}, 1_000_000),
                    (3, -3_000_000, None, 2, {"Cd": -2000, "Se": -3000}, -1_000_000)):
                conn.execute(insert(WasteEntry).values(id=ident, container_id=full, description="before 0008",
                                                       volume_ul=volume, mass_ug=0, filterable_solids_percent=solids,
                                                       reverses_entry_id=reverses))
                conn.execute(insert(WasteEntryComponent).values(entry_id=ident, substance_id=acetone, volume_ul=acetone_ul))
                for element, mass in elements.items():
                    conn.execute(insert(WasteEntryElement).values(entry_id=ident, element=element, mass_ug=mass))
        upgrade(database_url)
        stored, _ = _stored_and_summed(engine, full)
        # 2 L + 3 L − 3 L; Cd 5 mg + 2 mg − 2 mg; Se cancels; acetone 2 L + 1 L − 1 L (worked by hand)
        assert stored == {"totals": [(3, 2_000_000, 0)], "elements": [("Cd", 5000)], "components": [(acetone, 2_000_000)]}
        assert _stored_and_summed(engine, empty)[0] == {"totals": [(0, 0, 0)], "elements": [], "components": []}
        with engine.connect() as conn:  # 2 000 000 µL × 1.0 % × 10⁶
            assert conn.scalar(text("SELECT solids_percent_ul_e6 FROM waste_container_totals WHERE container_id = :c"),
                               {"c": full}) == 2_000_000 * 1_000_000
    finally:
        engine.dispose()


# --- the safety officer's determination --------------------------------------------------------
# Code forms: RCRA characteristic D001-D043 (40 CFR 261.21-261.24; D006 cadmium, 261.24 Table 1, seen),
# F001-F039 (261.31), P and U lists (261.33; U044 chloroform from memory); EU List of Waste codes are
# six digits in three pairs with "*" for hazardous entries (Decision 2000/532/EC as amended by
# 2014/955/EU: 16 05 06* laboratory chemicals, 15 02 02* contaminated absorbents; 2nd).
D006_AND_LOW = {"codes": [{"system": "RCRA", "code": "D006", "description": "toxicity characteristic, cadmium"},
                          {"system": "RCRA", "code": "F003"}, {"system": "EU-LoW", "code": "07 07 04*"}],
                "comment": "Confirmed from the entries; acetone washes."}


def _officer(app, client, site):
    return Api(client, make_user(app, "officer@test.example", "safety_officer"))


def test_the_safety_officer_confirms_codes_and_the_latest_is_in_force(app, client, site):
    container = _container(site)
    _acetone_wash(site, container["id"])
    assert site["researcher"].call("GET", f"/waste_containers/{container['id']}")["determination"] is None
    officer = _officer(app, client, site)
    first = officer.call("POST", f"/waste_containers/{container['id']}/determination", D006_AND_LOW, 201)
    determination = first["determination"]
    assert [(c["system"], c["code"]) for c in determination["codes"]] == [("RCRA", "D006"), ("RCRA", "F003"),
                                                                          ("EU-LoW", "07 07 04*")]
    assert determination["by"]["name"] and determination["comment"] == D006_AND_LOW["comment"]
    assert {"D006", "F003"} <= _codes(first)  # the suggestions stay beside it
    edited = officer.call("POST", f"/waste_containers/{container['id']}/determination",
                          {"codes": [{"system": "RCRA", "code": "D006"}, {"system": "RCRA", "code": "D001"}]}, 201)
    assert [c["code"] for c in edited["determination"]["codes"]] == ["D006", "D001"]
    assert edited["determination"]["id"] > determination["id"] and edited["determination"]["comment"] is None
    read = site["researcher"].call("GET", f"/waste_containers/{container['id']}")
    assert read["determination"] == edited["determination"]
    # Both are kept, append-only, each in the audit trail with who and which codes.
    events = site["admin"].call("GET", "/audit_events?entity=waste_determinations")["items"]
    assert [e["action"] for e in events] == ["create", "create"]
    assert [[c["code"] for c in e["after"]["codes"]] for e in events] == [["D006", "F003", "07 07 04*"], ["D006", "D001"]]
    assert {e["actor_label"] for e in events} == {"officer@test.example"}


def test_a_researcher_may_not_determine(site):
    container = _container(site)
    site["researcher"].call("POST", f"/waste_containers/{container['id']}/determination", D006_AND_LOW, 403)


@pytest.mark.parametrize("code, ok", [
    ({"system": "RCRA", "code": "D001"}, True), ({"system": "RCRA", "code": "D043"}, True),  # 261.21 / 261.24 ends
    ({"system": "RCRA", "code": "D044"}, False), ({"system": "RCRA", "code": "D000"}, False),  # beside them
    ({"system": "RCRA", "code": "F039"}, True), ({"system": "RCRA", "code": "F040"}, False),  # 261.31
    ({"system": "RCRA", "code": "U044"}, True), ({"system": "RCRA", "code": "P000"}, False),  # 261.33
    ({"system": "RCRA", "code": "d006"}, False), ({"system": "RCRA", "code": "16 05 06*"}, False),
    ({"system": "EU-LoW", "code": "16 05 06*"}, True), ({"system": "EU-LoW", "code": "15 02 02*"}, True),
    ({"system": "EU-LoW", "code": "20 01 01"}, True), ({"system": "EU-LoW", "code": "21 01 01"}, False),  # 20 chapters
    ({"system": "EU-LoW", "code": "160506*"}, False), ({"system": "EU-LoW", "code": "D006"}, False),
    ({"system": "EPA", "code": "D006"}, False),
])
def test_codes_are_checked_against_the_form_of_their_system(app, client, site, code, ok):
    container = _container(site)
    answer = _officer(app, client, site).call("POST", f"/waste_containers/{container['id']}/determination",
                                              {"codes": [code]}, 201 if ok else 422)
    if not ok:
        assert answer["error"]["details"][0]["field"] in ("codes.0.code", "codes.0.system"), answer


@pytest.mark.parametrize("body, field", [
    ({"codes": []}, "codes"),
    ({"codes": [{"system": "RCRA", "code": "D006"}] * 2}, "codes"),
    ({"codes": [{"system": "RCRA", "code": "D006"}] + [{"system": "RCRA", "code": f"U{i:03d}"} for i in range(1, 21)]},
     "codes"),  # 21 codes: at most 20
    ({"codes": [{"system": "RCRA", "code": "D006"}], "comment": "x" * 2001}, "comment"),
    ({"codes": [{"system": "RCRA", "code": "D006", "description": "y" * 301}]}, "codes.0.description"),
])
def test_a_determination_out_of_bounds_is_refused_naming_the_field(app, client, site, body, field):
    container = _container(site)
    error = _officer(app, client, site).call("POST", f"/waste_containers/{container['id']}/determination", body, 422)
    assert error["error"]["details"][0]["field"] == field, error


def _entry(site, container_id, body, expect=201):
    return site["researcher"].call("POST", f"/waste_containers/{container_id}/entries",
                                   {"description": "test entry", **body}, expect)


def _parts(site, **volumes):
    return [{"substance_id": site["admin"].substance_id(name.replace("_", "-")), "volume": volume}
            for name, volume in volumes.items()]


def test_five_ml_chloroform_in_a_litre_suggests_d022(site):
    # 40 CFR 261.24(b) Table 1, D022 chloroform 6.0 mg/L (seen). 5 mL × 1.498 g/mL (catalogue; NAS 2016, seen)
    # = 7.49 g in 1 L = 7 490 mg/L. 4 µL in 1 L: 5.992 mg/L, below.
    found = {}
    for label, chloroform in (("W-H1", "5 mL"), ("W-H2", "4 uL")):
        container = _container(site, label, "10 L", "halogenated_solvent_heavy_metals")
        _entry(site, container["id"], {"volume": "1 L", "components": _parts(site, chloroform=chloroform, water="995 mL")})
        read = site["researcher"].call("GET", f"/waste_containers/{container['id']}")
        found[label] = {f["rule_id"]: f for f in read["findings"]}
    d022 = found["W-H1"]["us.tc-d022-chloroform"]
    assert d022["value"] == 7490 and d022["suggested_code"]["code"] == "D022" and "safety officer" in d022["disclaimer"]
    assert "us.tc-d022-chloroform" not in found["W-H2"]


def test_gloves_with_cadmium_suggest_15_02_02(site):
    # List of Waste 2000/532/EC as amended by 2014/955/EU: 15 02 02* (2nd), not 16 05 06*.
    container = _container(site, "W-S1", "5 kg", "contaminated_solids")
    _entry(site, container["id"], {"mass": "35 g", "elements": [{"element": "Cd", "mass": "2 mg"}]})
    codes = _codes(site["researcher"].call("GET", f"/waste_containers/{container['id']}"))
    assert "15 02 02*" in codes and "16 05 06*" not in codes


@pytest.mark.parametrize("ethanol, water, d001", [("100 mL", "900 mL", False), ("300 mL", "700 mL", True)])
def test_aqueous_ethanol_below_24_percent_is_not_d001(site, ethanol, water, d001):
    # 40 CFR 261.21(a)(1): aqueous solutions with less than 24 % alcohol by volume are excluded (seen);
    # ethanol flash point 13 °C (NAS 2016, App. D, seen).
    container = _container(site, "W-A1", "10 L", "aqueous_heavy_metals")
    _entry(site, container["id"], {"volume": "1 L", "components": _parts(site, ethanol=ethanol, water=water)})
    assert ("D001" in _codes(site["researcher"].call("GET", f"/waste_containers/{container['id']}"))) is d001


@pytest.mark.parametrize("ph, code", [(2.0, "D002"), (2.1, None), (12.4, None), (12.5, "D002")])
def test_ph_of_an_aqueous_waste_and_d002(site, ph, code):
    # 40 CFR 261.22(a)(1): aqueous with pH <= 2 or >= 12.5 is corrosive, D002 (seen).
    container = _container(site, "W-P1", "10 L", "aqueous_heavy_metals")
    entry = _entry(site, container["id"], {"volume": "1 L", "ph": ph, "components": _parts(site, water="1 L")})
    read = site["researcher"].call("GET", f"/waste_containers/{container['id']}")
    assert entry["ph"] == ph and read["ph"] == ph
    assert ("D002" in _codes(read)) is (code == "D002")


def test_the_container_ph_is_the_last_one_on_an_entry_still_standing(site):
    container = _container(site, "W-P2", "10 L", "aqueous_heavy_metals")
    water = _parts(site, water="1 L")
    _entry(site, container["id"], {"volume": "1 L", "ph": 7.0, "components": water})
    _entry(site, container["id"], {"volume": "1 L", "components": water})  # no pH measured: the last one stands
    acid = _entry(site, container["id"], {"volume": "1 L", "ph": 1.0, "components": water})
    read = site["researcher"].call("GET", f"/waste_containers/{container['id']}")
    assert read["ph"] == 1.0 and "D002" in _codes(read)
    reversal = site["researcher"].call("POST", f"/waste_containers/{container['id']}/entries/{acid['id']}/reverse",
                                       {"reason": "pH read on the wrong sample"}, 201)
    assert reversal["ph"] is None
    read = site["researcher"].call("GET", f"/waste_containers/{container['id']}")
    assert read["ph"] == 7.0 and "D002" not in _codes(read)


@pytest.mark.parametrize("ph", [-0.1, 14.1, "2"])
def test_ph_is_bounded(site, ph):
    container = _container(site, "W-P3", "10 L", "aqueous_heavy_metals")
    error = _entry(site, container["id"], {"volume": "1 L", "ph": ph}, 422)["error"]
    assert any(d.get("field") == "ph" for d in error["details"]), error


def test_a_solids_entry_takes_no_ph(site):
    container = _container(site, "W-S2", "5 kg", "contaminated_solids")
    error = _entry(site, container["id"], {"mass": "35 g", "ph": 7.0}, 422)["error"]
    assert [d["field"] for d in error["details"]] == ["ph"]
