"""Waste entries and container pages with the Flask test client, on the demo scenario.

What the checks compare with, outside the code under test:
- the demo's container NG-W01 is 20 L and holds 25 mL + 20 mL of supernatants (service/store/demo.py's
  invented scenario), so its room is 20 L − 0.045 L = 19.955 L, computed here;
- a share of a run's remainder is the remainder × percent / 100, rounded to the µg (the schema's
  definition of ``share_percent``), computed here from the run's draws;
- RCRA waste codes have the form of 40 CFR 261 subpart C/D (a letter D, F, K, P or U and three digits),
  so "X99" is not one and "D006" (cadmium, 40 CFR 261.24 Table 1) is.
"""

from __future__ import annotations

import re
from decimal import ROUND_HALF_EVEN, Decimal

import pytest
from sqlalchemy import func, select

from service.appdata import active_rules
from service.schemas import RunIn
from service.store import runs
from service.store.db import session_scope
from service.store.models import Procedure, Run, User, WasteContainer, WasteContainerElement, WasteEntry
from tests.test_web_pages import _client, demo  # noqa: F401  (demo is a fixture)

RESEARCHER, OFFICER, MANAGER = "researcher@example.org", "safety@example.org", "manager@example.org"


def _sessions(app):
    return session_scope(app.extensions["dotledger.sessions"])


def _ids(app) -> dict[str, int]:
    with _sessions(app) as s:
        return {label: s.scalar(select(WasteContainer.id).where(WasteContainer.label == label))
                for label in ("NG-W01", "NG-W04")}


def _open_run(app) -> int:
    """A new run of the approved CdSe procedure by the demo researcher (open, nothing in waste yet)."""
    with _sessions(app) as s:
        user = s.scalar(select(User).where(User.email == RESEARCHER))
        s.info["actor"] = {"user_id": user.id, "label": user.email}
        proc = s.scalar(select(Procedure.id).where(Procedure.title == "CdSe cores by hot injection",
                                                   Procedure.state == "approved"))
        return runs.start_run(s, RunIn(procedure_id=proc), user, active_rules(app)).id


def _run_input_ug(app, run_id: int, element: str) -> int:
    with _sessions(app) as s:
        return sum(d.element_mass_ug.get(element, 0) for d in s.get(Run, run_id).draws)


def _state(app, container_id: int) -> tuple:
    """What an action may change: the state, the entry count and every element total of the container."""
    with _sessions(app) as s:
        container = s.get(WasteContainer, container_id)
        totals = dict(s.execute(select(WasteContainerElement.element, WasteContainerElement.mass_ug)
                                .where(WasteContainerElement.container_id == container_id)).all())
        return (container.state, s.scalar(select(func.count()).select_from(WasteEntry)
                                          .where(WasteEntry.container_id == container_id)), totals,
                len(container.determinations))


def _token(client) -> str:
    page = client.get("/waste").get_data(as_text=True)
    return page.split('name="csrf_token" value="', 1)[1].split('"', 1)[0]


def _errors(html: str) -> dict[str, str]:
    return dict(re.findall(r'class="field-error" id="([^"]*)-error">([^<]*)<', html))


def _entry(client, container_id: int, action: str = "check", **fields):
    data = {"csrf_token": _token(client), "description": "wash", "amount": "12", "amount_unit": "mL",
            "action": action, **fields}
    return client.post(f"/waste/{container_id}/entry", data=data)


def test_check_shows_milligrams_and_writes_nothing_then_save_adds_them(demo):
    app, _ = demo
    client = _client(demo, RESEARCHER)
    ident, run = _ids(app)["NG-W01"], _open_run(app)
    before = _state(app, ident)
    cd_in = _run_input_ug(app, run, "Cd")
    answer = _entry(client, ident, run_id=str(run), **{"elements-0-element": "Cd", "elements-0-mass": "2.5",
                                                        "elements-0-mass_unit": "mg", "elements-1-element": "Se",
                                                        "elements-1-share_percent": "40"})
    html = answer.get_data(as_text=True)
    assert answer.status_code == 200 and "not saved yet" in html
    assert "<strong class=\"mg\">2.5 mg</strong>" in html
    se_in = _run_input_ug(app, run, "Se")
    se_share = int((Decimal(se_in) * Decimal("0.40")).to_integral_value(ROUND_HALF_EVEN))  # percent × remainder
    assert f"<strong class=\"mg\">{Decimal(se_share) / 1000:f} mg</strong>".replace(".000 mg", " mg") in html
    assert "room left after it: 19.943 L" in html  # 20 L − 0.045 L − 0.012 L
    assert _state(app, ident) == before  # the check wrote nothing
    # the same form saved: the container's Cd grows by what the check showed
    answer = _entry(client, ident, "save", run_id=str(run), **{"elements-0-element": "Cd", "elements-0-mass": "2.5",
                                                                "elements-0-mass_unit": "mg"})
    assert answer.status_code == 303 and "done=entry" in answer.headers["Location"]
    after = _state(app, ident)
    assert after[1] == before[1] + 1 and after[2]["Cd"] == before[2]["Cd"] + 2500
    # a share of the remainder: the run put 2.5 mg into waste, so 50 % of (input − 2.5 mg)
    answer = _entry(client, ident, "save", run_id=str(run), **{"elements-0-element": "Cd",
                                                                "elements-0-share_percent": "50"})
    assert answer.status_code == 303
    half = int((Decimal(cd_in - 2500) / 2).to_integral_value(ROUND_HALF_EVEN))
    assert _state(app, ident)[2]["Cd"] == before[2]["Cd"] + 2500 + half
    assert "Entry saved." in client.get(answer.headers["Location"]).get_data(as_text=True)


@pytest.mark.parametrize("fields, field, words", [
    ({"description": ""}, "description", "Required"),
    ({"amount": "abc"}, "amount", "abc"),
    ({"amount": ""}, "amount", "give the entry's volume"),
    ({"amount": "0"}, "amount", "above zero"),
    ({"filterable_solids_percent": "101"}, "filterable_solids_percent", "At most 100"),
    ({"elements-0-element": "Cd", "elements-0-mass": "1", "elements-0-share_percent": "5"}, "elements-0", "exactly one"),
    ({"elements-0-element": "Cd", "elements-0-concentration": "12"}, "elements-0", "both concentration and volume"),
    ({"elements-0-element": "Cd", "elements-0-share_percent": "5"}, "elements", "needs run_id"),
    ({"elements-0-element": "Cd", "elements-0-mass": "2,5"}, "elements-0-mass", "2,5"),
    ({"components-0-substance_id": "", "components-0-volume": "5"}, "components-0-substance_id", ""),
    ({"amount": "10", "components-0-substance_id": "1", "components-0-volume": "11"}, "components", "more than"),
])
def test_form_errors_name_the_field_and_change_nothing(demo, fields, field, words):
    app, _ = demo
    client = _client(demo, RESEARCHER)
    ident = _ids(app)["NG-W01"]
    before = _state(app, ident)
    for action in ("check", "save"):
        answer = _entry(client, ident, action, **fields)
        html = answer.get_data(as_text=True)
        assert answer.status_code == 422, (action, _errors(html))
        errors = _errors(html)
        assert field in errors and words in errors[field].replace("&#39;", "'"), errors
        assert f'href="#{field}"' in html  # the summary at the top links to it
    assert _state(app, ident) == before


def test_overfill_is_refused_with_the_room_left(demo):
    app, _ = demo
    client = _client(demo, RESEARCHER)
    ident = _ids(app)["NG-W01"]
    before = _state(app, ident)
    # 20 L capacity − 45 mL held = 19.955 L of room; 19.956 L is 1 mL too much, 19.955 L fits exactly
    answer = _entry(client, ident, "save", amount="19.956", amount_unit="L")
    assert answer.status_code == 409
    assert "room left: 19.955 L" in _errors(answer.get_data(as_text=True))["amount"]
    assert _state(app, ident) == before
    answer = _entry(client, ident, "check", amount="19.955", amount_unit="L")
    assert answer.status_code == 200 and "room left after it: 0 L" in answer.get_data(as_text=True)


def test_solid_container_takes_a_mass_and_no_composition(demo):
    app, _ = demo
    client = _client(demo, RESEARCHER)
    ident = _ids(app)["NG-W04"]
    html = client.get(f"/waste/{ident}/entry").get_data(as_text=True)
    assert '<label for="amount">Mass</label>' in html and "components-0-volume" not in html
    assert client.get(f"/containers/{ident}/entry").get_data(as_text=True) == html  # the label's QR address
    assert 'inputmode="decimal"' in html
    answer = _entry(client, ident, "check", amount="35", amount_unit="g")
    assert answer.status_code == 200 and "0.035 kg" in answer.get_data(as_text=True)


def test_chooser_filters_containers_by_kind(demo):
    client = _client(demo, RESEARCHER)
    liquid = client.get("/waste/entry?kind=liquid").get_data(as_text=True)
    solid = client.get("/waste/entry?kind=solid").get_data(as_text=True)
    assert "NG-W01" in liquid and "NG-W04" not in liquid
    assert "NG-W04" in solid and "NG-W01" not in solid


BUTTONS = {"Add waste entry", "Mark full", "Request pickup", "Record collection", "Confirm waste codes"}


@pytest.mark.parametrize("email, shown", [
    (RESEARCHER, {"Add waste entry", "Mark full"}),
    (MANAGER, {"Add waste entry", "Mark full", "Request pickup"}),
    (OFFICER, {"Add waste entry", "Mark full", "Request pickup", "Confirm waste codes"}),
])
def test_buttons_by_role(demo, email, shown):
    app, _ = demo
    html = _client(demo, email).get(f"/waste/{_ids(app)['NG-W01']}").get_data(as_text=True)
    assert {b for b in BUTTONS if f">{b}<" in html} == shown
    assert "Print the manifest (PDF)" in html and "transporter" in html


def test_auditor_sees_no_buttons_and_is_refused(demo, monkeypatch):
    app, _ = demo
    from tests.conftest import make_user

    make_user(app, "auditor@example.org", "auditor", password="auditor passphrase 1")
    monkeypatch.setitem(demo[1], "auditor@example.org", "auditor passphrase 1")
    client = _client(demo, "auditor@example.org")
    ident = _ids(app)["NG-W01"]
    html = client.get(f"/waste/{ident}").get_data(as_text=True)
    assert not {b for b in BUTTONS if f">{b}<" in html} and "Reverse entry" not in html
    before = _state(app, ident)
    assert client.get(f"/waste/{ident}/entry").status_code == 403
    assert _entry(client, ident, "save").status_code == 403
    assert client.post(f"/waste/{ident}/move/mark_full", data={"csrf_token": _token(client)}).status_code == 403
    assert _state(app, ident) == before


@pytest.mark.parametrize("email, action, status, state", [
    (RESEARCHER, "request_pickup", 403, "open"),  # the API lets a researcher only mark full
    (RESEARCHER, "collect", 403, "open"),
    (MANAGER, "collect", 403, "open"),
    (OFFICER, "collect", 409, "open"),  # a role that may, from a state that may not
    (RESEARCHER, "mark_full", 303, "full"),
    (MANAGER, "request_pickup", 303, "pickup_requested"),
])
def test_moves_refused_for_the_wrong_role_or_state(demo, email, action, status, state):
    app, _ = demo
    client = _client(demo, email)
    ident = _ids(app)["NG-W01"]
    answer = client.post(f"/waste/{ident}/move/{action}", data={"csrf_token": _token(client)})
    assert answer.status_code == status
    assert _state(app, ident)[0] == state
    if status == 409:
        assert "Not done: cannot collect" in answer.get_data(as_text=True)


def test_collection_after_pickup_then_no_more_entries(demo):
    app, _ = demo
    client = _client(demo, OFFICER)
    ident = _ids(app)["NG-W01"]
    for action in ("request_pickup", "collect"):
        assert client.post(f"/waste/{ident}/move/{action}", data={"csrf_token": _token(client)}).status_code == 303
    html = client.get(f"/waste/{ident}?done=collect").get_data(as_text=True)
    assert "Collection recorded." in html and ">Add waste entry<" not in html
    answer = _entry(client, ident, "save")
    assert answer.status_code == 409 and "entries go to open containers" in _errors(answer.get_data(as_text=True))["form"]


def test_determination_only_for_the_safety_officer(demo):
    app, _ = demo
    ident = _ids(app)["NG-W01"]
    researcher = _client(demo, RESEARCHER)
    assert researcher.get(f"/waste/{ident}/determination").status_code == 403
    data = {"csrf_token": _token(researcher), "codes-0-system": "RCRA", "codes-0-code": "D006"}
    assert researcher.post(f"/waste/{ident}/determination", data=data).status_code == 403
    officer = _client(demo, OFFICER)
    form = officer.get(f"/waste/{ident}/determination").get_data(as_text=True)
    assert 'value="F003"' in form  # the findings' suggestion, offered to confirm
    before = _state(app, ident)
    bad = officer.post(f"/waste/{ident}/determination",
                       data={"csrf_token": _token(officer), "codes-0-system": "RCRA", "codes-0-code": "X99"})
    assert bad.status_code == 422 and "is not a RCRA code" in _errors(bad.get_data(as_text=True))["codes-0-code"].replace("&#39;", "'")
    assert _state(app, ident) == before
    good = officer.post(f"/waste/{ident}/determination",
                        data={"csrf_token": _token(officer), "codes-0-system": "RCRA", "codes-0-code": "D006",
                              "codes-1-system": "RCRA", "codes-1-code": "F003", "comment": "checked the log"})
    assert good.status_code == 303
    html = officer.get(good.headers["Location"]).get_data(as_text=True)
    assert "Determination recorded." in html and "RCRA D006" in html and "checked the log" in html


def test_reversal_needs_a_reason(demo):
    app, _ = demo
    client = _client(demo, RESEARCHER)
    ident = _ids(app)["NG-W01"]
    with _sessions(app) as s:
        first = s.scalar(select(WasteEntry.id).where(WasteEntry.container_id == ident).order_by(WasteEntry.id))
    before = _state(app, ident)
    refused = client.post(f"/waste/{ident}/entries/{first}/reverse", data={"csrf_token": _token(client), "reason": "x"})
    assert refused.status_code == 422 and "At least 3 characters" in refused.get_data(as_text=True)
    assert _state(app, ident) == before
    done = client.post(f"/waste/{ident}/entries/{first}/reverse",
                       data={"csrf_token": _token(client), "reason": "went into the wrong container"})
    assert done.status_code == 303
    after = _state(app, ident)
    assert after[1] == before[1] + 1 and after[2]["Cd"] < before[2]["Cd"]
    again = client.post(f"/waste/{ident}/entries/{first}/reverse",
                        data={"csrf_token": _token(client), "reason": "twice"})
    assert again.status_code == 409 and "already reversed" in again.get_data(as_text=True)


def test_list_has_a_column_for_every_element_held(demo):
    app, _ = demo
    client = _client(demo, RESEARCHER)
    html = client.get("/waste").get_data(as_text=True)
    assert "Cd (mg)" in html and "Se (mg)" in html and "Te (mg)" not in html and "Pb (mg)" not in html
    ident = _ids(app)["NG-W01"]
    assert _entry(client, ident, "save", **{"elements-0-element": "Te", "elements-0-mass": "1.2",
                                            "elements-0-mass_unit": "mg"}).status_code == 303
    html = client.get("/waste").get_data(as_text=True)
    assert "Te (mg)" in html and "1.200" in html


def test_container_page_charts_the_metal_over_time(demo):
    app, _ = demo
    ident = _ids(app)["NG-W01"]
    html = _client(demo, RESEARCHER).get(f"/waste/{ident}").get_data(as_text=True)
    assert html.count("<svg") == 2  # Cd and Se, one chart each, each on its own scale
    figure = html.split("Cd in NG-W01 after each entry", 1)[1].split("</figure>", 1)[0]
    with _sessions(app) as s:  # the demo's two supernatants: 22 % and 6 % of the run's Cd
        entries = s.scalars(select(WasteEntry).where(WasteEntry.container_id == ident).order_by(WasteEntry.id))
        first, second = (next(x.mass_ug for x in e.elements if x.element == "Cd") for e in entries)
    rows = re.findall(r'<td class="num">([\d,.]+)</td>', figure)
    assert rows == [f"{first / 1000:,.3f}", f"{(first + second) / 1000:,.3f}"]  # a running sum, last = the total


def test_area_pages(demo):
    app, _ = demo
    client = _client(demo, RESEARCHER)
    html = client.get("/areas").get_data(as_text=True)
    found = re.search(r'href="/areas/(\d+)"', html)
    assert found, html
    area = client.get(f"/areas/{found[1]}").get_data(as_text=True)
    assert "NG-W01" in area and "Totals against the limits" in area and "site safety officer" in area
