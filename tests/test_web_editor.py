"""The procedure editor page: the form's body is the API's body, errors sit next to their fields,
a check stores nothing, row buttons work without JavaScript, and lab scoping holds.

Masses are checked against standard atomic weights (CIAAW 2021): Cd 112.414, O 15.999, so CdO 128.413.
"""

from __future__ import annotations

import re

import pytest
from sqlalchemy import func, select

from service.store.audit import AuditEvent
from service.store.db import session_scope
from service.store.models import Procedure
from tests.conftest import Api, make_user
from tests.test_cli import sign_in

PASSWORD = "correct horse battery"  # make_user's default


@pytest.fixture
def lab(app, client):
    """Lab N-1 (stocks, a Cd oleate solution, a researcher) and lab O-2 (a stock, another researcher)."""
    admin = Api(client, make_user(app, "admin@test.example", "admin"))
    ids = {}
    for code in ("N-1", "O-2"):
        lab_id = admin.call("POST", "/labs", {"code": code, "name": f"Group {code}"}, 201)["id"]
        place = admin.call("POST", "/locations", {"lab_id": lab_id, "building": "N", "room": code,
                                                  "storage": "cabinet"}, 201)["id"]
        ids[code] = (lab_id, place)
    lab_id, place = ids["N-1"]
    stocks = {}
    for label, name, amount in [("CdO", "cadmium oxide", "25 g"), ("Se", "selenium", "50 g"),
                                ("ODE", "1-octadecene", "1 L"), ("CdAc", "cadmium acetate", "10 g")]:
        stocks[label] = admin.call("POST", "/stocks", {"label": label, "substance_id": admin.substance_id(name),
                                                       "lab_id": lab_id, "location_id": place, "amount": amount}, 201)["id"]
    mixture = admin.call("POST", "/mixtures", {
        "label": "CdOl", "name": "Cd oleate 0.20 M", "lab_id": lab_id, "location_id": place, "volume": "10.0 mL",
        "received_as_solution": True,
        "components": [{"substance_id": admin.substance_id("cadmium oxide"), "molarity": "0.20 mol/L"}]}, 201)["id"]
    other = admin.call("POST", "/stocks", {"label": "CdO-other", "substance_id": admin.substance_id("cadmium oxide"),
                                           "lab_id": ids["O-2"][0], "location_id": ids["O-2"][1], "amount": "5 g"},
                       201)["id"]
    researcher = Api(client, make_user(app, "res@test.example", "researcher", lab_ids=[lab_id]))
    make_user(app, "other@test.example", "researcher", lab_ids=[ids["O-2"][0]])
    officer = Api(client, make_user(app, "so@test.example", "safety_officer"))
    return {"id": lab_id, "other_lab": ids["O-2"][0], "stocks": stocks, "mixture": mixture, "other_stock": other,
            "admin": admin, "researcher": researcher, "officer": officer}


def _signed_in(app, email: str):
    client = app.test_client()
    sign_in(client, email, PASSWORD)
    return client


def _csrf(client) -> str:
    with client.session_transaction() as cookie:
        return cookie["csrf"]


def _form(lab, **changes) -> dict:
    """A CdSe synthesis with 3 steps and 3 draws (a stock by id, a stock by typed label, the solution)."""
    s = lab["stocks"]
    form = {
        "title": "CdSe cores", "lab_id": str(lab["id"]), "summary": "hot injection", "scale": "1",
        "steps-0-operation": "degas", "steps-0-temperature_c": "120", "steps-0-atmosphere": "vacuum",
        "steps-0-duration_min": "30", "steps-0-note": "",
        "steps-1-operation": "heat", "steps-1-temperature_c": "240", "steps-1-atmosphere": "argon",
        "steps-1-duration_min": "", "steps-1-note": "",
        "steps-2-operation": "inject", "steps-2-temperature_c": "220", "steps-2-atmosphere": "argon",
        "steps-2-duration_min": "", "steps-2-note": "Se precursor",
        "draws-0-source": f"stock:{s['CdO']}", "draws-0-amount": "25.7 mg",
        "draws-1-source": "se", "draws-1-amount": "15.8 mg",  # typed label, any case
        "draws-2-source": "cd oleate 0.20 m", "draws-2-amount": "1 mL",  # typed solution name, one such record
        "waste-0-stream": "non halogenated solvent heavy metals", "waste-0-contents": "supernatants",
        "waste-0-expected_amount": "30 mL",
        "waste-1-stream": "", "waste-1-contents": "", "waste-1-expected_amount": "",  # a blank row: left out
    }
    form.update(changes)
    return form


def _body(lab) -> dict:
    """The same procedure as a JSON body for the API."""
    s = lab["stocks"]
    return {"lab_id": lab["id"], "title": "CdSe cores", "summary": "hot injection", "scale": 1.0,
            "steps": [{"operation": "degas", "temperature_c": 120.0, "atmosphere": "vacuum", "duration_min": 30.0},
                      {"operation": "heat", "temperature_c": 240.0, "atmosphere": "argon"},
                      {"operation": "inject", "temperature_c": 220.0, "atmosphere": "argon", "note": "Se precursor"}],
            "draws": [{"stock_id": s["CdO"], "amount": "25.7 mg"}, {"stock_id": s["Se"], "amount": "15.8 mg"},
                      {"mixture_id": lab["mixture"], "amount": "1 mL"}],
            "waste_plan": [{"stream": "non halogenated solvent heavy metals", "contents": "supernatants",
                            "expected_amount": "30 mL"}]}


def _counts(app) -> tuple[int, int]:
    with session_scope(app.extensions["dotledger.sessions"], write=False) as session:
        return (session.scalar(select(func.count()).select_from(Procedure)),
                session.scalar(select(func.count()).select_from(AuditEvent)))


_COMPARED = ("title", "summary", "scale", "state", "lab_id", "revision", "steps", "waste_plan",
             "element_masses_per_batch", "highest_level")


def test_create_stores_what_the_api_stores(app, lab):
    client = _signed_in(app, "res@test.example")
    page = client.get("/procedures/new").get_data(as_text=True)
    assert f'<option value="stock:{lab["stocks"]["CdO"]}" label="CdO · cadmium oxide · 25 g">' in page
    assert f'stock:{lab["other_stock"]}' not in page  # another lab's stock is not offered
    response = client.post("/procedures/new", data={**_form(lab), "action": "save", "csrf_token": _csrf(client)})
    assert response.status_code == 303, response.get_data(as_text=True)
    ident = int(re.search(r"/procedures/(\d+)\?done=created", response.headers["Location"])[1])
    researcher = lab["researcher"]
    web = researcher.call("GET", f"/procedures/{ident}")
    api = researcher.call("POST", "/procedures", _body(lab), 201)
    assert {k: web[k] for k in _COMPARED} == {k: api[k] for k in _COMPARED}
    assert [(d["stock_id"], d["mixture_id"], d["amount"]) for d in web["draws"]] == [
        (d.get("stock_id"), d.get("mixture_id"), d["amount"]) for d in _body(lab)["draws"]]
    assert [f["rule_id"] for f in web["findings"]] == [f["rule_id"] for f in api["findings"]]
    assert web["state"] == "draft" and len(web["steps"]) == 3 and len(web["waste_plan"]) == 1


def test_errors_sit_next_to_their_fields_and_nothing_is_stored(app, lab):
    client = _signed_in(app, "res@test.example")
    before = _counts(app)
    response = client.post("/procedures/new", data={
        **_form(lab, **{"steps-1-temperature_c": "5000", "draws-2-amount": "abc", "title": "x"}),
        "action": "save", "csrf_token": _csrf(client)})
    page = response.get_data(as_text=True)
    assert response.status_code == 422
    assert _counts(app) == before
    assert re.search(r'<div class="error-summary" role="alert" tabindex="-1" id="error-summary"', page)
    for field in ("title", "steps-1-temperature_c", "draws-2-amount"):
        assert f'href="#{field}"' in page, field  # the summary links to the field
        tag = re.search(rf'<input id="{field}" [^>]*>', page)[0]
        assert 'aria-invalid="true"' in tag and f'{field}-error' in tag, tag
        assert f'<p class="field-error" id="{field}-error">' in page
    assert "Step 2 temperature (°C): At most 1200." in page and "Title: At least 3 characters." in page
    assert 'value="abc"' in page and 'value="5000"' in page  # what was typed stays


def test_store_errors_name_the_row(app, lab):
    """A reference the store refuses is shown on the row's field (its position among the filled rows)."""
    client = _signed_in(app, "res@test.example")
    before = _counts(app)
    response = client.post("/procedures/new", data={
        **_form(lab, **{"draws-0-source": "", "draws-0-amount": "",  # a blank first row is left out
                        "draws-2-source": f"stock:{lab['other_stock']}"}),
        "action": "save", "csrf_token": _csrf(client)})
    page = response.get_data(as_text=True)
    assert response.status_code == 422 and _counts(app) == before
    other = lab["other_stock"]
    assert f'<p class="field-error" id="draws-2-source-error">No stock with id {other} in this procedure&#39;s lab</p>' in page
    # A volume of a solid whose density the catalogue does not give: the store names the draw's amount.
    volume = client.post("/procedures/new", data={**_form(lab, **{"draws-1-source": "CdAc", "draws-1-amount": "4 mL"}),
                                                  "action": "save", "csrf_token": _csrf(client)})
    assert volume.status_code == 422 and re.search(r'id="draws-1-amount-error">CdAc is kept by mass; give the draw as a mass',
                                                   volume.get_data(as_text=True))
    body = _body(lab)
    body["draws"][1] = {"stock_id": lab["stocks"]["CdAc"], "amount": "4 mL"}
    api = lab["researcher"].call("POST", "/procedures", body, 422)
    assert api["error"]["details"][0]["field"] == "draws[1].amount"  # the same field through the API
    assert _counts(app)[0] == before[0]
    typed = client.post("/procedures/new", data={**_form(lab, **{"draws-1-source": "CdO-other"}), "action": "save",
                                                 "csrf_token": _csrf(client)})
    assert typed.status_code == 422
    assert 'id="draws-1-source-error">Choose a stock or mixture from the list' in typed.get_data(as_text=True)


def test_check_computes_and_stores_nothing(app, lab):
    client = _signed_in(app, "res@test.example")
    before = _counts(app)
    response = client.post("/procedures/new", data={**_form(lab), "action": "check", "csrf_token": _csrf(client)})
    page = response.get_data(as_text=True)
    assert response.status_code == 200, page
    assert _counts(app) == before
    # Cd: 25.7 mg CdO × 112.414/128.413 = 22.498 mg, plus 1 mL of 0.20 mol/L × 112.414 g/mol = 22.483 mg.
    assert '<th scope="row">Cd</th><td class="num">44.981</td>' in page
    # × 10 scales the amounts, then rounds once: 257 mg CdO → 224.980 mg Cd, 10 mL of the oleate → 224.828 mg.
    assert "<caption>Scale-up preview" in page and "× 10" in page and "449.808" in page
    assert "site safety officer" in page and 'class="findings"' in page
    fragment = client.post("/procedures/check", data={**_form(lab), "csrf_token": _csrf(client)})
    text = fragment.get_data(as_text=True)
    assert fragment.status_code == 200 and "<html" not in text and "44.981" in text and "site safety officer" in text
    bad = client.post("/procedures/check", data={**_form(lab, **{"steps-0-duration_min": "soon"}),
                                                 "csrf_token": _csrf(client)})
    assert bad.status_code == 422 and 'href="#steps-0-duration_min">Step 1 duration (min): Enter a number.' in \
        bad.get_data(as_text=True)
    assert _counts(app) == before


def _rows(page: str, name: str, part: str) -> list[str]:
    return re.findall(rf'id="{name}-\d+-{part}" name="{name}-\d+-{part}"[^>]*value="([^"]*)"', page)


def test_row_buttons_work_without_javascript(app, lab):
    client = _signed_in(app, "res@test.example")
    before = _counts(app)
    form = {**_form(lab), "csrf_token": _csrf(client)}
    added = client.post("/procedures/new", data={**form, "action": "add-step"}).get_data(as_text=True)
    assert 'id="steps-3-operation" name="steps-3-operation" autofocus' in added
    removed = client.post("/procedures/new", data={**form, "action": "remove-draw-0"}).get_data(as_text=True)
    assert _rows(removed, "draws", "amount") == ["15.8 mg", "1 mL"]  # renumbered from 0
    moved = client.post("/procedures/new", data={**form, "action": "up-step-2"}).get_data(as_text=True)
    assert _rows(moved, "steps", "temperature_c") == ["120", "220", "240"]
    assert 'id="up-step-1" class="icon" autofocus' in moved  # the pressed button keeps the focus
    down = client.post("/procedures/new", data={**form, "action": "down-step-2"}).get_data(as_text=True)
    assert _rows(down, "steps", "temperature_c") == ["120", "240", "220"]  # the last row stays last
    assert _counts(app) == before
    assert client.post("/procedures/new", data={**form, "action": "explode"}).status_code == 400


def test_editing_an_approved_procedure_makes_a_new_revision(app, lab):
    researcher, officer = lab["researcher"], lab["officer"]
    proc = researcher.call("POST", "/procedures", _body(lab), 201)
    researcher.call("POST", f"/procedures/{proc['id']}/submit", {}, 200)
    officer.call("POST", f"/procedures/{proc['id']}/approve", {"comment": "controls as described"}, 200)
    client = _signed_in(app, "res@test.example")
    page = client.get(f"/procedures/{proc['id']}/edit").get_data(as_text=True)
    assert "Saving makes revision 2 as a draft" in page and 'value="25.7 mg"' in page
    form = {**_form(lab, title="CdSe cores, larger"), "scale": "2", "action": "save", "csrf_token": _csrf(client)}
    response = client.post(f"/procedures/{proc['id']}/edit", data=form)
    assert response.status_code == 303, response.get_data(as_text=True)
    new_id = int(re.search(r"/procedures/(\d+)\?done=revision", response.headers["Location"])[1])
    new, old = researcher.call("GET", f"/procedures/{new_id}"), researcher.call("GET", f"/procedures/{proc['id']}")
    assert (new["revision"], new["state"], new["title"], new["scale"]) == (2, "draft", "CdSe cores, larger", 2.0)
    assert (old["state"], old["title"]) == ("approved", "CdSe cores")
    # A second edit of the approved revision would open another revision: refused, the typed form kept.
    again = client.post(f"/procedures/{proc['id']}/edit", data=form)
    assert again.status_code == 409 and "already has an open revision" in again.get_data(as_text=True)
    assert 'value="CdSe cores, larger"' in again.get_data(as_text=True)
    # The draft is edited in place; a submitted one is not editable at all.
    in_place = client.post(f"/procedures/{new_id}/edit", data={**form, "title": "CdSe cores, 2x"})
    assert in_place.headers["Location"].endswith(f"/procedures/{new_id}?done=saved")
    assert researcher.call("GET", f"/procedures/{new_id}")["title"] == "CdSe cores, 2x"
    researcher.call("POST", f"/procedures/{new_id}/submit", {}, 200)
    assert client.get(f"/procedures/{new_id}/edit").status_code == 409


def test_lab_scoping_and_roles(app, lab):
    proc = lab["researcher"].call("POST", "/procedures", _body(lab), 201)
    other = _signed_in(app, "other@test.example")
    csrf = _csrf(other)
    assert other.get(f"/procedures/{proc['id']}/edit").status_code == 403
    assert other.post(f"/procedures/{proc['id']}/edit", data={**_form(lab), "action": "save",
                                                              "csrf_token": csrf}).status_code == 403
    assert other.post("/procedures/check", data={**_form(lab), "procedure_id": str(proc["id"]),
                                                 "csrf_token": csrf}).status_code == 403
    by_id = _form(lab, **{"draws-1-source": f"stock:{lab['stocks']['Se']}",  # valid, but of lab N-1
                          "draws-2-source": f"mixture:{lab['mixture']}"})
    assert other.post("/procedures/new", data={**by_id, "action": "save", "csrf_token": csrf}).status_code == 403
    assert other.post("/procedures/new", data={**by_id, "action": "check", "csrf_token": csrf}).status_code == 403
    assert 'href="/procedures/new"' in other.get("/procedures").get_data(as_text=True)
    officer = _signed_in(app, "so@test.example")
    assert officer.get("/procedures/new").status_code == 403
    assert 'href="/procedures/new"' not in officer.get("/procedures").get_data(as_text=True)


def test_a_form_without_its_token_is_refused(app, lab):
    client = _signed_in(app, "res@test.example")
    assert client.post("/procedures/new", data={**_form(lab), "action": "save"}).status_code == 400


def test_a_label_two_records_share_resolves_to_neither():
    """Typing a label a stock and a mixture share (or that differs only in case) never picks one silently."""
    from service.web.editor import _source_index

    index = _source_index([("stock:1", "NG-1 · cadmium oxide · 25 g"), ("mixture:2", "ng-1 · TOP-Se 1.0 M · 10 mL"),
                           ("stock:3", "NG-3 · selenium · 5 g")])
    assert index["ng-1"] == ""  # shared label: the person chooses from the list
    assert index["ng-3"] == "stock:3" and index["cadmium oxide"] == "stock:1"  # unique ones still resolve
    assert index["ng-1 · top-se 1.0 m · 10 ml"] == "mixture:2"  # the whole option text is unique


def test_a_check_drops_blank_rows_above_filled_ones_so_step_numbers_agree(app, lab):
    """The findings count filled steps; after a check the page numbers the same rows (no blank row above)."""
    client = _signed_in(app, "res@test.example")
    shifted = {}
    for key, value in _form(lab).items():
        if key.startswith("steps-"):
            _, row, field = key.split("-", 2)
            shifted[f"steps-{int(row) + 1}-{field}"] = value
    blank = {f"steps-0-{f}": "" for f in ("operation", "temperature_c", "atmosphere", "duration_min", "note")}
    form = {**{k: v for k, v in _form(lab).items() if not k.startswith("steps-")}, **blank, **shifted}
    page = client.post("/procedures/new", data={**form, "action": "check", "csrf_token": _csrf(client)})
    text = page.get_data(as_text=True)
    assert page.status_code == 200, text
    first = re.search(r'<select\s+id="steps-0-operation".*?</select>', text, re.S).group(0)
    assert re.search(r'<option value="degas"[^>]*selected', first), first
    assert 'id="steps-3-operation"' not in text  # three filled rows, numbered 1 to 3


def test_the_step_a_draw_is_added_at_round_trips_counted_from_one(app, lab):
    """The form counts steps from 1 as the page shows them; the body and the API from 0 (the steps' position)."""
    client = _signed_in(app, "res@test.example")
    form = _form(lab, **{"draws-1-step": "3"})  # Se at the injection, shown as step 3
    response = client.post("/procedures/new", data={**form, "action": "save", "csrf_token": _csrf(client)})
    assert response.status_code == 303, response.get_data(as_text=True)
    ident = int(re.search(r"/procedures/(\d+)\?done=created", response.headers["Location"])[1])
    assert [d["step"] for d in lab["researcher"].call("GET", f"/procedures/{ident}")["draws"]] == [None, 2, None]
    page = client.get(f"/procedures/{ident}/edit").get_data(as_text=True)
    assert re.search(r'<input id="draws-1-step" [^>]*value="3"', page)
    # saving the page again keeps the step (it is not dropped by the round trip)
    client.post(f"/procedures/{ident}/edit", data={**form, "title": "CdSe cores, again", "action": "save",
                                                   "csrf_token": _csrf(client)})
    assert lab["researcher"].call("GET", f"/procedures/{ident}")["draws"][1]["step"] == 2
    for typed, message in (("0", "Give the number of a step"), ("4", "No step at position 3: the procedure has 3 steps")):
        bad = client.post("/procedures/new", data={**_form(lab, **{"draws-1-step": typed}), "action": "save",
                                                   "csrf_token": _csrf(client)})
        assert bad.status_code == 422 and re.search(rf'id="draws-1-step-error">{message}', bad.get_data(as_text=True))
