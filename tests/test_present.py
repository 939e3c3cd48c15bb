"""The presentation layer (service/present): shown = judged, findings once, documents rendered after the session.

Outside values, with their sources:
- 40 CFR 261.24(a) (seen): a waste with less than 0.5 % filterable solids is, after filtering,
  itself the extract for the toxicity characteristic; otherwise the leaching procedure
  (Method 1311) makes the extract.
- 40 CFR 261.24(b) Table 1 (seen): D006 cadmium, 1.0 mg/L.
- 5 mg of cadmium in 2 L is 2.5 mg/L (arithmetic).
"""

from __future__ import annotations

from collections import Counter

import pytest
from flask import g

from service.documents import render
from tests.conftest import Api, make_user


@pytest.fixture
def site(app, client):
    admin = Api(client, make_user(app, "admin@test.example", "admin"))
    lab, place = admin.lab_and_location()
    return {"admin": admin, "lab": lab, "saa": place}


def _aqueous_cd(site, solids_percent: float) -> dict:
    """One entry: 2 L of aqueous waste with 5 mg Cd and the given filterable solids."""
    admin = site["admin"]
    container = admin.call("POST", "/waste_containers", {"label": f"P-W{solids_percent:g}", "lab_id": site["lab"],
                                                         "location_id": site["saa"], "stream": "aqueous_heavy_metals",
                                                         "capacity": "20 L"}, 201)
    admin.call("POST", f"/waste_containers/{container['id']}/entries", {
        "description": "aqueous washes", "volume": "2 L", "filterable_solids_percent": solids_percent,
        "elements": [{"element": "Cd", "mass": "5 mg"}]}, 201)
    return admin.call("GET", f"/waste_containers/{container['id']}")


def _codes(view: dict) -> set[str]:
    return {f["suggested_code"]["code"] for f in view["findings"] if f.get("suggested_code")}


def _manifest_html(site, ident: int) -> str:
    api = site["admin"]
    response = api.client.get(f"/api/v1/waste_containers/{ident}/manifest.html",
                              headers={"Authorization": f"Bearer {api.token}"})
    assert response.status_code == 200
    return response.get_data(as_text=True)


def test_one_percent_solids_is_not_compared_with_the_tc_limit(site):
    view = _aqueous_cd(site, 1.0)
    cd = next(e for e in view["elements"] if e["element"] == "Cd")
    assert cd["mass_ug"] == 5000 and view["volume_l"] == 2
    assert cd["concentration_mg_per_l"] is None  # 2.5 mg/L would not be the extract's concentration
    assert "D006" not in _codes(view)
    assert view["concentration_basis"] == "extraction_test"
    note = view["concentration_note"]
    assert "1.0 % filterable solids" in note and "0.5 %" in note and "261.24(a)" in note
    html = _manifest_html(site, view["id"])
    assert "2.500" not in html and "D006" not in html
    assert "no mg/L here compares with a TC limit" in html


def test_no_solids_gives_2_5_mg_per_l_and_d006(site):
    view = _aqueous_cd(site, 0.0)
    cd = next(e for e in view["elements"] if e["element"] == "Cd")
    assert cd["concentration_mg_per_l"] == pytest.approx(2.5)  # 5 mg / 2 L
    assert "D006" in _codes(view)  # 2.5 mg/L >= 1.0 mg/L (Table 1)
    assert view["concentration_basis"] == "extract" and "261.24(a)" in view["concentration_note"]
    assert view["fill_percent"] == 10.0  # 2 L of 20 L
    html = _manifest_html(site, view["id"])
    assert ">2.50</td>" in html and "D006" in html  # 3 significant figures (service.chem.figures)


class CountingRules:
    """The active rules, counting how often each scope's rules are asked for (once per evaluation)."""

    def __init__(self, rules) -> None:
        self._rules = rules
        self.calls: Counter[str] = Counter()

    def rules_for(self, scope: str):
        self.calls[scope] += 1
        return self._rules.rules_for(scope)

    def __getattr__(self, name: str):
        return getattr(self._rules, name)


@pytest.fixture
def counting(app):
    loaded = app.extensions["dotledger.loaded"]
    rules = CountingRules(loaded.rules)
    app.extensions["dotledger.loaded"] = loaded._replace(rules=rules)
    yield rules
    app.extensions["dotledger.loaded"] = loaded


def test_a_container_is_evaluated_once_per_request(site, counting):
    view = _aqueous_cd(site, 0.0)
    counting.calls.clear()
    site["admin"].call("GET", f"/waste_containers/{view['id']}")
    assert counting.calls["waste_container"] == 1
    counting.calls.clear()
    _manifest_html(site, view["id"])
    assert counting.calls["waste_container"] == 1


def _procedure(site) -> int:
    admin = site["admin"]
    stock = admin.call("POST", "/stocks", {"label": "P-CdO", "substance_id": admin.substance_id("cadmium oxide"),
                                           "lab_id": site["lab"], "location_id": site["saa"], "amount": "5 g"}, 201)
    researcher = Api(admin.client, make_user(admin.client.application, "res@test.example", "researcher",
                                             lab_ids=[site["lab"]]))
    proc = researcher.call("POST", "/procedures", {
        "lab_id": site["lab"], "title": "CdO test", "steps": [{"operation": "heat", "temperature_c": 300}],
        "draws": [{"stock_id": stock["id"], "amount": "25 mg"}]}, 201)
    site["researcher"] = researcher
    return proc["id"]


def test_a_procedure_is_evaluated_once_per_request(site, counting):
    ident = _procedure(site)
    counting.calls.clear()
    site["admin"].call("GET", f"/procedures/{ident}")
    assert counting.calls["procedure"] == 1
    counting.calls.clear()
    submitted = site["researcher"].call("POST", f"/procedures/{ident}/submit")  # judged, then shown: one evaluation
    assert submitted["state"] == "submitted" and submitted["findings"]
    assert counting.calls["procedure"] == 1
    counting.calls.clear()
    response = site["admin"].client.get(f"/api/v1/procedures/{ident}/assessment.html",
                                        headers={"Authorization": f"Bearer {site['admin'].token}"})
    assert response.status_code == 200
    assert counting.calls["procedure"] == 1


def test_documents_render_after_the_session_has_ended(site, app, monkeypatch):
    view = _aqueous_cd(site, 0.0)
    engine = app.extensions["dotledger.engine"]
    seen = []

    def watch(original):
        def wrapped(*args, **kwargs):
            seen.append((original.__name__, g.get("db_session"), engine.pool.checkedout()))
            return original(*args, **kwargs)

        return wrapped

    monkeypatch.setattr(render.Draft, "render", watch(render.Draft.render))
    monkeypatch.setattr(render, "render_pdf", watch(render.render_pdf))
    api = site["admin"]
    response = api.client.get(f"/api/v1/waste_containers/{view['id']}/manifest.pdf",
                              headers={"Authorization": f"Bearer {api.token}"})
    assert response.status_code == 200 and response.data.startswith(b"%PDF")
    assert [name for name, _, _ in seen] == ["render", "render_pdf"]
    assert all(session is None and checked_out == 0 for _, session, checked_out in seen), seen


@pytest.mark.parametrize("fmt, writer", [("csv", "to_csv_bytes"), ("xlsx", "to_xlsx_bytes")])
def test_reports_serialise_after_the_session_has_ended(site, app, monkeypatch, fmt, writer):
    from service.store import ledger

    _aqueous_cd(site, 0.0)  # one entry, so the report has a row
    engine = app.extensions["dotledger.engine"]
    seen = []
    original = getattr(ledger, writer)

    def wrapped(*args, **kwargs):
        seen.append((g.get("db_session"), engine.pool.checkedout()))
        return original(*args, **kwargs)

    monkeypatch.setattr(ledger, writer, wrapped)
    api = site["admin"]
    response = api.client.get(f"/api/v1/reports/waste?by=element&format={fmt}",
                              headers={"Authorization": f"Bearer {api.token}"})
    assert response.status_code == 200 and len(response.data) > 0
    assert seen == [(None, 0)]


def test_rule_packs_and_catalogue_load_once_per_process(sqlite_url, rules_dir):
    from service.app import create_app

    first = create_app({"DATABASE_URL": sqlite_url, "TESTING": True, "RULES_DIR": str(rules_dir)})
    second = create_app({"DATABASE_URL": sqlite_url, "TESTING": True, "RULES_DIR": str(rules_dir)})
    try:
        assert first.extensions["dotledger.loaded"] is second.extensions["dotledger.loaded"]
        assert first.extensions["dotledger.documents"] is not None
    finally:
        first.extensions["dotledger.engine"].dispose()
        second.extensions["dotledger.engine"].dispose()
