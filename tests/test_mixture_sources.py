"""Mixtures prepared from stocks: the sources lose exactly what the mixture gains.

Worked example: 10 mL of 1.0 mol/L Se in trioctylphosphine needs 10 mL × 1.0 mol/L × 78.971 g/mol = 789.71 mg
of Se (standard atomic weight of Se 78.971, CIAAW 2021; `molmass` gives the same). Drawn from a 5.000 g Se stock
of 100 % purity, the stock keeps 5 000 000 − 789 710 = 4 210 290 µg Se and the mixture holds 789 710 µg.
Preparing moves metal between records; the site total of every element stays what it was.
"""

from __future__ import annotations

import pytest
from molmass import Formula

from tests.conftest import Api, make_user

SE_G_PER_MOL = "78.971"  # CIAAW 2021 standard atomic weight of Se (abridged)
SE_DRAWN_UG = 789_710  # 10 mL × 1.0 mol/L × 78.971 g/mol, by hand


def test_the_worked_value_agrees_with_molmass():
    assert round(Formula("Se").mass * 10 * 1.0) == round(float(SE_G_PER_MOL) * 10 * 1.0) == 790  # mg, to 1 mg
    assert round(float(SE_G_PER_MOL) * 10 * 1.0 * 1000) == SE_DRAWN_UG


def _stock(api: Api, label: str, substance: str, lab: int, place: int, amount: str) -> int:
    return api.call("POST", "/stocks", {"label": label, "substance_id": api.substance_id(substance), "lab_id": lab,
                                        "location_id": place, "amount": amount}, 201)["id"]


@pytest.fixture
def site(api, app, client):
    lab, place = api.lab_and_location()
    other = api.call("POST", "/labs", {"code": "C-9", "name": "Other group"}, 201)["id"]
    other_place = api.call("POST", "/locations", {"lab_id": other, "building": "C", "room": "C-9", "storage": "shelf"},
                           201)["id"]
    return {
        "api": api, "lab": lab, "place": place,
        "se": _stock(api, "SE-1", "selenium", lab, place, "5.000 g"),
        "top": _stock(api, "TOP-1", "trioctylphosphine", lab, place, "50 mL"),
        "other_se": _stock(api, "SE-9", "selenium", other, other_place, "5.000 g"),
        "researcher": Api(client, make_user(app, "r@test.example", "researcher", lab_ids=[lab])),
        "se_id": api.substance_id("selenium"), "top_id": api.substance_id("trioctylphosphine"),
    }


def _top_se(site, label="TOP-Se", *, volume="10 mL", se="789.71 mg", top="9 mL", se_source=None, **extra) -> dict:
    return {"label": label, "name": "Se 1.0 M in trioctylphosphine", "lab_id": site["lab"], "location_id": site["place"],
            "volume": volume, **extra,
            "components": [
                {"substance_id": site["se_id"], "molarity": "1.0 mol/L", "amount": se,
                 **(se_source or {"source_stock_id": site["se"]})},
                {"substance_id": site["top_id"], "volume_fraction": 0.9, "source_stock_id": site["top"], "amount": top}]}


def _ug(record: dict, element: str) -> int:
    return next((e["mass_ug"] for e in record["elements"] if e["element"] == element), 0)


def _site_totals(api: Api) -> dict[str, int]:
    return {r["element"]: r["mass_ug"] for r in api.call("GET", "/reports/inventory?by=element")["rows"]}


def _state(site) -> dict:
    """Everything a refused preparation must leave as it was."""
    api = site["api"]
    return {"stocks": [api.call("GET", f"/stocks/{site[k]}") for k in ("se", "top", "other_se")],
            "mixtures": api.call("GET", "/mixtures?include_retired=true&limit=500"),
            "totals": _site_totals(api), "audit": api.call("GET", "/audit_events?limit=1")["total"]}


def test_preparing_moves_the_drawn_selenium_from_the_stock_into_the_mixture(site):
    api = site["api"]
    before = _site_totals(api)
    assert before["Se"] == 10_000_000  # two 5.000 g stocks of pure Se
    mixture = site["researcher"].call("POST", "/mixtures", _top_se(site), 201)

    stock = api.call("GET", f"/stocks/{site['se']}")
    assert _ug(stock, "Se") == 5_000_000 - SE_DRAWN_UG
    assert stock["amount"] == "4210.29 mg"
    assert _ug(mixture, "Se") == SE_DRAWN_UG
    assert mixture["received_as_solution"] is False
    se_part, top_part = mixture["components"]
    assert se_part["source"] == {"stock_id": site["se"], "mixture_id": None, "amount": "789.71 mg",
                                 "element_mass_ug": {"Se": SE_DRAWN_UG}}
    assert top_part["source"]["stock_id"] == site["top"] and top_part["source"]["amount"] == "9 mL"
    # Every element of the mixture is exactly what its components drew (P, C and H come from the TOP).
    drawn = {}
    for part in mixture["components"]:
        for element, ug in part["source"]["element_mass_ug"].items():
            drawn[element] = drawn.get(element, 0) + ug
    assert {e["element"]: e["mass_ug"] for e in mixture["elements"]} == drawn
    top = api.call("GET", f"/stocks/{site['top']}")
    assert top["amount"] == "41 mL"
    assert _site_totals(api) == before  # nothing made, nothing lost: every element's site total is unchanged


def test_a_draw_beyond_the_stock_is_refused_and_changes_nothing(site):
    before = _state(site)
    error = site["researcher"].call("POST", "/mixtures", _top_se(site, se="5.5 g"), 409)["error"]
    assert error["details"][0]["field"] == "components[0].amount"
    assert error["message"].startswith("SE-1 holds 5000 mg")
    # The first component fits; the second does not: the first draw is undone with the rest.
    error = site["researcher"].call("POST", "/mixtures", _top_se(site, top="60 mL"), 409)["error"]
    assert error["details"][0]["field"] == "components[1].amount"
    assert _state(site) == before


def test_another_labs_stock_is_refused_as_a_missing_one(site):
    before = _state(site)
    for caller in (site["researcher"], site["api"]):  # the caller's labs, and the mixture's own lab for anyone
        error = caller.call("POST", "/mixtures", _top_se(site, se_source={"source_stock_id": site["other_se"]}),
                            422)["error"]
        assert error["details"][0]["field"] == "components[0].source_stock_id"
        assert error["message"] == f"components[0].source_stock_id: no stock with id {site['other_se']}"
    assert _state(site) == before


def test_a_mixture_drawn_from_another_mixture(site):
    api, researcher = site["api"], site["researcher"]
    before = _site_totals(api)
    first = researcher.call("POST", "/mixtures", _top_se(site), 201)
    # 2 mL of the 10 mL carry 2/10 of its Se: 789 710 × 0.2 = 157 942 µg (exact).
    diluted = researcher.call("POST", "/mixtures", _top_se(site, "TOP-Se-dil", volume="4 mL", se="2 mL", top="2 mL",
                                                          se_source={"source_mixture_id": first["id"]}), 201)
    assert _ug(diluted, "Se") == 157_942
    assert diluted["components"][0]["source"]["mixture_id"] == first["id"]
    first = api.call("GET", f"/mixtures/{first['id']}")
    assert _ug(first, "Se") == SE_DRAWN_UG - 157_942 and first["volume"] == "8 mL"
    # The rest of it: everything it holds leaves, to the microgram, and it is left empty.
    rest = researcher.call("POST", "/mixtures", _top_se(site, "TOP-Se-rest", volume="9 mL", se="8 mL", top="1 mL",
                                                       se_source={"source_mixture_id": first["id"]}), 201)
    emptied = api.call("GET", f"/mixtures/{first['id']}")
    assert all(e["mass_ug"] == 0 for e in emptied["elements"])
    assert _ug(rest, "Se") == SE_DRAWN_UG - 157_942
    assert _site_totals(api) == before
    error = researcher.call("POST", "/mixtures", _top_se(site, "TOP-Se-none", se="1 mL",
                                                         se_source={"source_mixture_id": first["id"]}), 409)["error"]
    assert error["details"][0]["field"] == "components[0].amount"


def test_without_sources_a_mixture_must_be_marked_as_received(site):
    api = site["api"]
    received = {"label": "Cd-recv", "name": "Cd oleate 0.20 M", "lab_id": site["lab"], "location_id": site["place"],
                "volume": "10.0 mL", "components": [{"substance_id": api.substance_id("cadmium oxide"),
                                                     "molarity": "0.20 mol/L"}]}
    error = api.call("POST", "/mixtures", received, 422)["error"]
    assert error["details"][0]["field"] == "components[0].source_stock_id"
    assert "received_as_solution" in error["message"]
    mixture = api.call("POST", "/mixtures", {**received, "received_as_solution": True}, 201)
    # 10.0 mL × 0.20 mol/L × 112.414 g/mol Cd (CIAAW 2021) = 224.828 mg
    assert _ug(mixture, "Cd") == 224_828 and mixture["received_as_solution"] is True
    assert mixture["components"][0]["source"] is None
    # A received solution draws nothing.
    error = api.call("POST", "/mixtures", _top_se(site, "TOP-Se-r", received_as_solution=True), 422)["error"]
    assert error["details"][0]["field"] == "components[0].source_stock_id"


@pytest.mark.parametrize("component, field", [
    ({"source_stock_id": 1}, "components.0"),  # a source without an amount
    ({"amount": "1 g"}, "components.0"),  # an amount without a source
    ({"source_stock_id": 1, "source_mixture_id": 1, "amount": "1 g"}, "components.0"),
])
def test_a_source_and_its_amount_come_together(site, component, field):
    body = _top_se(site)
    body["components"][0] = {"substance_id": site["se_id"], **component}
    error = site["api"].call("POST", "/mixtures", body, 422)["error"]
    assert error["details"][0]["field"] == field


def test_the_source_must_hold_the_component(site):
    body = _top_se(site)
    body["components"][0]["source_stock_id"] = site["top"]  # TOP is not selenium
    before = _state(site)
    error = site["api"].call("POST", "/mixtures", body, 422)["error"]
    assert error["details"][0]["field"] == "components[0].substance_id"
    assert _state(site) == before


def test_a_prepared_mixtures_content_stays_when_its_volume_is_corrected(site):
    mixture = site["researcher"].call("POST", "/mixtures", _top_se(site), 201)
    patched = site["researcher"].call("PATCH", f"/mixtures/{mixture['id']}", {"volume": "9.8 mL", "name": "TOP-Se"})
    assert _ug(patched, "Se") == SE_DRAWN_UG


def test_a_run_draw_takes_exactly_what_it_records(site, app):
    """A run drawing from the prepared mixture lowers it by the µg the draw records (the one draw function)."""
    api, researcher = site["api"], site["researcher"]
    mixture = researcher.call("POST", "/mixtures", _top_se(site), 201)
    officer = Api(api.client, make_user(app, "so@test.example", "safety_officer"))
    proc = researcher.call("POST", "/procedures", {"lab_id": site["lab"], "title": "Se injection",
                                                   "steps": [{"operation": "inject", "atmosphere": "argon"}],
                                                   "draws": [{"mixture_id": mixture["id"], "amount": "3 mL"}]}, 201)
    researcher.call("POST", f"/procedures/{proc['id']}/submit")
    officer.call("POST", f"/procedures/{proc['id']}/approve", {"comment": "test"})
    before = _site_totals(api)
    run = researcher.call("POST", "/runs", {"procedure_id": proc["id"]}, 201)
    taken = _ug(run["draws"][0], "Se")
    assert taken == 236_913  # 789 710 × 3/10 = 236 913 µg
    assert _ug(api.call("GET", f"/mixtures/{mixture['id']}"), "Se") == SE_DRAWN_UG - taken
    assert before["Se"] - _site_totals(api)["Se"] == taken  # what left the inventory is what the run holds
