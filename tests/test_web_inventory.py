"""The inventory pages: stock forms, the stock page, disposal / transfer / shipment with their
confirmation, preparing a mixture, and the spreadsheet import (pages and API).

Element masses are checked against standard atomic weights (CIAAW 2021, from memory): Cd 112.414,
O 15.999, so CdO 128.413 g/mol and Cd is 112.414 / 128.413 of its mass. Computed here, not read
from the service.
"""

from __future__ import annotations

import io
import re
from decimal import ROUND_HALF_EVEN, Decimal

import pytest
from sqlalchemy import func, select

from service.store.db import session_scope
from service.store.importer import MAX_UPLOAD_BYTES
from service.store.models import Mixture, Stock, StockMovement
from tests.conftest import Api, make_user
from tests.test_cli import sign_in

PASSWORD = "correct horse battery"  # make_user's default
CD_IN_CDO = Decimal("112.414") / (Decimal("112.414") + Decimal("15.999"))


def cd_ug(grams: str) -> int:
    """µg of Cd in ``grams`` of pure CdO, rounded once half to even."""
    return int((Decimal(grams) * 1_000_000 * CD_IN_CDO).to_integral_value(ROUND_HALF_EVEN))


@pytest.fixture
def lab(app, client):
    """Lab N-1 (a CdO stock, a liquid and a solids container, a researcher, a lab manager), lab O-2."""
    admin = Api(client, make_user(app, "admin@test.example", "admin"))
    ids = {}
    for code in ("N-1", "O-2"):
        lab_id = admin.call("POST", "/labs", {"code": code, "name": f"Group {code}"}, 201)["id"]
        place = admin.call("POST", "/locations", {"lab_id": lab_id, "building": "N", "room": code,
                                                  "storage": "cabinet"}, 201)["id"]
        ids[code] = (lab_id, place)
    lab_id, place = ids["N-1"]
    cdo = admin.call("POST", "/stocks", {"label": "CdO-1", "substance_id": admin.substance_id("cadmium oxide"),
                                         "lab_id": lab_id, "location_id": place, "amount": "25 g"}, 201)["id"]
    containers = {}
    for label, stream, capacity in (("W-LIQ", "aqueous_heavy_metals", "20 L"), ("W-SOL", "contaminated_solids", "5 kg")):
        containers[label] = admin.call("POST", "/waste_containers", {
            "label": label, "lab_id": lab_id, "location_id": place, "stream": stream, "capacity": capacity}, 201)["id"]
    make_user(app, "res@test.example", "researcher", lab_ids=[lab_id])
    make_user(app, "other@test.example", "researcher", lab_ids=[ids["O-2"][0]])
    make_user(app, "manager@test.example", "lab_manager", lab_ids=[lab_id])
    make_user(app, "auditor@test.example", "auditor")
    return {"id": lab_id, "place": place, "other": ids["O-2"], "cdo": cdo, "containers": containers,
            "cdo_substance": admin.substance_id("cadmium oxide"), "admin": admin}


def _client(app, email):
    client = app.test_client()
    sign_in(client, email, PASSWORD)
    with client.session_transaction() as cookie:
        csrf = cookie["csrf"]
    return client, csrf


def _count(app, model) -> int:
    with session_scope(app.extensions["dotledger.sessions"]) as session:
        return session.scalar(select(func.count()).select_from(model))


def _stock(app, ident):
    with session_scope(app.extensions["dotledger.sessions"]) as session:
        stock = session.get(Stock, ident)
        return stock.amount_text, {e.element: e.mass_ug for e in stock.elements}


def _new_stock_form(lab, **changes):
    return {"label": "CdO-2", "substance_id": str(lab["cdo_substance"]), "lab_id": str(lab["id"]),
            "location_id": str(lab["place"]), "amount": "10 g", "purity_percent": "100", "density_g_per_ml": "",
            "opened_on": "", "expires_on": "", **changes}


def test_a_stock_form_with_errors_names_the_fields_and_stores_nothing(app, lab):
    client, csrf = _client(app, "res@test.example")
    before = _count(app, Stock)
    answer = client.post("/stocks/new", data={**_new_stock_form(lab, label="", amount="5 kgg"), "csrf_token": csrf})
    assert answer.status_code == 422
    page = answer.get_data(as_text=True)
    assert 'href="#label"' in page and 'href="#amount"' in page  # the summary links each field
    assert re.search(r'id="amount-error">[^<]*unit', page) or re.search(r'id="amount-error">', page)
    assert 'id="amount" name="amount" value="5 kgg"' in page  # what was typed stays
    assert _count(app, Stock) == before
    # the store's refusal (a label in use, case ignored) on its field, nothing stored
    answer = client.post("/stocks/new", data={**_new_stock_form(lab, label="cdo-1"), "csrf_token": csrf})
    assert answer.status_code == 422 and 'id="label-error"' in answer.get_data(as_text=True)
    assert _count(app, Stock) == before


def test_a_stock_added_by_the_form_shows_its_cadmium_and_provenance(app, lab):
    client, csrf = _client(app, "res@test.example")
    answer = client.post("/stocks/new", data={**_new_stock_form(lab), "csrf_token": csrf})
    assert answer.status_code == 303
    page = client.get(answer.headers["Location"]).get_data(as_text=True)
    assert "Stock added." in page and "received" in page
    assert f"{cd_ug('10') / 1000:,.3f}" in page  # Cd in 10 g CdO, mg
    ident = int(answer.headers["Location"].split("/")[2].split("?")[0])
    assert _stock(app, ident)[1]["Cd"] == cd_ug("10")


def test_an_edit_sends_only_what_changed(app, lab):
    client, csrf = _client(app, "manager@test.example")
    # ship 5 g first, so that the content is what was left (exact), not recomputed
    lab["admin"].call("POST", f"/stocks/{lab['cdo']}/ship", {"destination": "partner lab", "amount": "5 g"}, 201)
    amount, before = _stock(app, lab["cdo"])
    form = {"label": "CdO-1", "location_id": str(lab["place"]), "amount": amount, "purity_percent": "100",
            "density_g_per_ml": "", "opened_on": "2026-01-15", "expires_on": "", "csrf_token": csrf}
    assert client.post(f"/stocks/{lab['cdo']}/edit", data=form).status_code == 303
    assert _stock(app, lab["cdo"]) == (amount, before)
    answer = client.post(f"/stocks/{lab['cdo']}/edit", data={**form, "purity_percent": "140"})
    assert answer.status_code == 422 and 'id="purity_percent-error">At most 100' in answer.get_data(as_text=True)


def test_roles_see_only_their_buttons_and_the_server_refuses_the_rest(app, lab):
    auditor, csrf = _client(app, "auditor@test.example")
    page = auditor.get(f"/stocks/{lab['cdo']}").get_data(as_text=True)
    assert "CdO-1" in page and "Edit or correct" not in page and "Dispose of into waste" not in page
    assert auditor.get("/stocks/new").status_code == 403
    assert auditor.post(f"/stocks/{lab['cdo']}/ship", data={"destination": "x", "csrf_token": csrf,
                                                             "action": "confirm"}).status_code == 403
    assert _count(app, StockMovement) == 0
    researcher, _ = _client(app, "res@test.example")
    page = researcher.get(f"/stocks/{lab['cdo']}").get_data(as_text=True)
    assert "Edit or correct" in page and "Ship out of the site" in page
    assert "Import a spreadsheet" not in researcher.get("/stocks").get_data(as_text=True)
    assert researcher.get("/stocks/import").status_code == 403
    other, csrf = _client(app, "other@test.example")  # another lab's stock is not theirs to see or move
    assert other.get(f"/stocks/{lab['cdo']}").status_code in (403, 404)
    assert other.post(f"/stocks/{lab['cdo']}/ship", data={"destination": "x", "csrf_token": csrf,
                                                          "action": "confirm"}).status_code in (403, 404)
    assert _count(app, StockMovement) == 0


def test_disposal_is_confirmed_with_the_masses_and_a_wrong_container_is_refused(app, lab):
    client, csrf = _client(app, "res@test.example")
    url = f"/stocks/{lab['cdo']}/dispose"
    form = {"container_id": str(lab["containers"]["W-SOL"]), "amount": "2 g", "description": "spilt, swept up",
            "csrf_token": csrf}
    review = client.post(url, data={**form, "action": "review"})
    page = review.get_data(as_text=True)
    assert review.status_code == 200 and "nothing is stored yet" in page and "W-SOL" in page
    assert f"{cd_ug('2') / 1000:,.3f}" in page  # the Cd that will move, mg
    assert _count(app, StockMovement) == 0 and _stock(app, lab["cdo"])[0] == "25 g"  # a review stores nothing
    # CdO is a solid: the liquid container is refused on its field, nothing changes
    wrong = client.post(url, data={**form, "container_id": str(lab["containers"]["W-LIQ"]), "action": "review"})
    assert wrong.status_code == 422 and 'id="container_id-error"' in wrong.get_data(as_text=True)
    assert _count(app, StockMovement) == 0
    done = client.post(url, data={**form, "action": "confirm"})
    assert done.status_code == 303
    with session_scope(app.extensions["dotledger.sessions"]) as session:
        moved = session.scalars(select(StockMovement)).one()
        assert moved.kind == "dispose" and moved.element_mass_ug["Cd"] == cd_ug("2")
    assert _stock(app, lab["cdo"])[1]["Cd"] == cd_ug("25") - cd_ug("2")


def test_transfer_and_ship_from_the_page(app, lab):
    client, csrf = _client(app, "manager@test.example")
    # the lab manager belongs to N-1 only but is not lab-scoped: may transfer to O-2
    url = f"/stocks/{lab['cdo']}/transfer"
    form = {"lab_id": str(lab["other"][0]), "location_id": str(lab["other"][1]), "label": "CdO-O2", "amount": "",
            "csrf_token": csrf}
    too_much = client.post(url, data={**form, "amount": "30 g", "action": "review"})
    assert too_much.status_code == 422 and 'id="amount-error"' in too_much.get_data(as_text=True)
    assert client.post(url, data={**form, "action": "confirm"}).status_code == 303  # blank amount: all of it
    with session_scope(app.extensions["dotledger.sessions"]) as session:
        new = session.scalars(select(Stock).where(Stock.label == "CdO-O2")).one()
        assert {e.element: e.mass_ug for e in new.elements}["Cd"] == cd_ug("25")
        new_id = new.id
    page = client.get(f"/stocks/{new_id}").get_data(as_text=True)
    assert "transferred on" in page and "CdO-1 (N-1)" in page
    ship = client.post(f"/stocks/{new_id}/ship", data={"destination": "Partner institute", "amount": "1 g",
                                                       "note": "", "csrf_token": csrf, "action": "review"})
    assert ship.status_code == 200 and "Ship 1000 mg of CdO-O2" in ship.get_data(as_text=True), ship.get_data(as_text=True)[1500:]
    assert client.post(f"/stocks/{new_id}/ship", data={"destination": "Partner institute", "amount": "1 g",
                                                       "csrf_token": csrf, "action": "confirm"}).status_code == 303
    assert _stock(app, new_id)[1]["Cd"] == cd_ug("25") - cd_ug("1")


def _mixture_form(lab, **changes):
    form = {"label": "CdOl-1", "name": "Cd oleate", "lab_id": str(lab["id"]), "location_id": str(lab["place"]),
            "volume": "10 mL", "density_g_per_ml": "", "prepared_on": "", "expires_on": "",
            "components-0-substance_id": "", "components-0-stated": "molarity", "components-0-value": "0.2 mol/L",
            "components-0-source": "cdo-1", "components-0-amount": "1 g",
            "components-1-substance_id": "", "components-1-stated": "", "components-1-value": "",
            "components-1-source": "", "components-1-amount": ""}
    return {**form, **changes}


def test_preparing_a_mixture_draws_from_the_stock_typed_by_label(app, lab):
    client, csrf = _client(app, "res@test.example")
    beyond = client.post("/mixtures/new", data={**_mixture_form(lab, **{"components-0-amount": "30 g"}),
                                                "csrf_token": csrf, "action": "save"})
    page = beyond.get_data(as_text=True)
    assert beyond.status_code == 422 and 'id="components-0-amount-error"' in page
    assert _count(app, Mixture) == 0 and _stock(app, lab["cdo"])[0] == "25 g"
    unknown = client.post("/mixtures/new", data={**_mixture_form(lab, **{"components-0-source": "no such"}),
                                                 "csrf_token": csrf, "action": "save"})
    assert unknown.status_code == 422 and 'id="components-0-source-error"' in unknown.get_data(as_text=True)
    done = client.post("/mixtures/new", data={**_mixture_form(lab), "csrf_token": csrf, "action": "save"})
    assert done.status_code == 303, done.get_data(as_text=True)[:3000]
    with session_scope(app.extensions["dotledger.sessions"]) as session:
        mixture = session.scalars(select(Mixture)).one()
        assert {e.element: e.mass_ug for e in mixture.elements}["Cd"] == cd_ug("1")
    assert _stock(app, lab["cdo"])[1]["Cd"] == cd_ug("25") - cd_ug("1")


CSV_HEADER = "label,substance,amount,lab,building,room,storage\n"
GOOD_ROWS = "IMP-1,cadmium oxide,5 g,N-1,N,N-1,shelf\nIMP-2,selenium,10 g,N-1,N,N-1,shelf\n"
BAD_ROWS = "IMP-3,unobtainium,5 g,N-1,N,N-1,shelf\nIMP-4,cadmium oxide,5 kgg,N-1,N,N-1,shelf\nIMP-5,selenium,1 g,N-1,N,N-1,\n"


def test_the_import_page_checks_first_and_imports_nothing_from_a_file_with_bad_rows(app, lab):
    client, csrf = _client(app, "manager@test.example")
    data = (CSV_HEADER + GOOD_ROWS + BAD_ROWS).encode()
    check = client.post("/stocks/import", data={"csrf_token": csrf, "file": (io.BytesIO(data), "inv.csv")},
                        content_type="multipart/form-data")
    page = check.get_data(as_text=True)
    assert check.status_code == 200 and "5 rows read: 2 accepted, 3 rejected" in page
    for line, words in ((4, "unknown substance"), (5, "kgg"), (6, "storage")):
        assert re.search(rf'<th scope="row" class="num">{line}</th>.*?{words}', page, re.S), (line, words)
    assert _count(app, Stock) == 1  # the dry run stored nothing
    token = re.search(r'name="token" value="([^"]+)"', page)[1]
    refused = client.post("/stocks/import/run", data={"csrf_token": csrf, "token": token})
    assert refused.status_code == 422 and "Nothing was imported" in refused.get_data(as_text=True)
    assert _count(app, Stock) == 1
    # another session cannot use the token; a made-up path is no token
    stranger, other_csrf = _client(app, "admin@test.example")
    for forged in (token, "../../secret_key", "a" * 32):
        assert stranger.post("/stocks/import/run", data={"csrf_token": other_csrf, "token": forged}).status_code == 422
    done = client.post("/stocks/import/run", data={"csrf_token": csrf, "token": token, "only_valid": "yes"})
    assert done.status_code == 200 and "Imported 2 stocks" in done.get_data(as_text=True)
    assert _count(app, Stock) == 3
    again = client.post("/stocks/import/run", data={"csrf_token": csrf, "token": token, "only_valid": "yes"})
    assert again.status_code == 422 and _count(app, Stock) == 3  # the held file is gone after its run


def _upload(api_client, token, data: bytes, name="inv.csv", query="dry_run=true"):
    # the multipart body written here (RFC 7578): the test client's own encoder spools large bodies to a
    # temporary file it leaves open
    boundary = "dotledger-test-boundary"
    body = (f'--{boundary}\r\nContent-Disposition: form-data; name="file"; filename="{name}"\r\n'
            f"Content-Type: text/csv\r\n\r\n").encode() + data + f"\r\n--{boundary}--\r\n".encode()
    return api_client.post(f"/api/v1/stocks/import?{query}", data=body,
                           headers={"Authorization": f"Bearer {token}"},
                           content_type=f"multipart/form-data; boundary={boundary}")


def test_the_api_import_dry_run_then_real(app, client, lab):
    token = make_user(app, "manager2@test.example", "lab_manager")
    bad = (CSV_HEADER + GOOD_ROWS + BAD_ROWS).encode()
    dry = _upload(client, token, bad)
    report = dry.get_json()
    assert dry.status_code == 200 and report["dry_run"] and (report["accepted"], report["rejected"]) == (2, 3)
    assert [(r["line"], r["accepted"]) for r in report["lines"]] == [(2, True), (3, True), (4, False), (5, False),
                                                                      (6, False)]
    assert _count(app, Stock) == 1
    real = _upload(client, token, bad, query="dry_run=false")
    assert real.status_code == 422 and real.get_json()["error"]["details"]["withheld"]
    assert _count(app, Stock) == 1
    good = _upload(client, token, (CSV_HEADER + GOOD_ROWS).encode(), query="dry_run=false")
    assert good.status_code == 200 and good.get_json()["imported"] == 2 and _count(app, Stock) == 3
    researcher = make_user(app, "res2@test.example", "researcher", lab_ids=[lab["id"]])
    assert _upload(client, researcher, bad).status_code == 403


@pytest.mark.parametrize("size, status", [(MAX_UPLOAD_BYTES, 200), (MAX_UPLOAD_BYTES + 1, 422), (1024 * 1024 + 1, 413)])
def test_the_upload_bound_names_the_file(app, client, lab, size, status):
    token = make_user(app, "manager3@test.example", "lab_manager")
    rows = CSV_HEADER + GOOD_ROWS
    data = (rows + "#" * (size - len(rows.encode()))).encode() if size >= len(rows) else rows.encode()
    # a trailing comment-like filler line: one bad row at most, never a 500
    answer = _upload(client, token, data)
    if status == 200:
        assert answer.status_code in (200,), answer.get_json()
        return
    assert answer.status_code == status
    assert any(d.get("field") == "file" for d in answer.get_json()["error"]["details"])
    assert _count(app, Stock) == 1
