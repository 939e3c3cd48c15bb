"""Page layout, error pages, role homes and the audit trail page, on the demo scenario."""

from __future__ import annotations

import datetime as dt
import json
import re
from contextlib import contextmanager
from pathlib import Path

import pytest
from sqlalchemy import text

from service.schemas import ContainerIn, EntryIn, LabIn, UserIn
from service.store import identity, inventory, waste
from service.store.db import session_scope
from service.present.waste import dump_container
from service.store.models import Lab, Substance, User, WasteContainer
from tests.test_cli import sign_in
from tests.test_web_pages import _client, _ids, demo  # noqa: F401 - the demo fixture

PASSWORD = "correct horse battery"


def _account(app, email: str, role: str, lab_code: str | None = None) -> None:
    """A user made directly in the store; ``lab_code`` names a new lab they belong to."""
    with session_scope(app.extensions["dotledger.sessions"]) as session:
        session.info["actor"] = {"user_id": None, "label": "test"}
        lab_ids = [inventory.create_record(session, Lab, LabIn(code=lab_code, name="Other group")).id] if lab_code else []
        identity.create_user(session, UserIn(email=email, display_name=email.split("@")[0], role=role,
                                             password=PASSWORD, lab_ids=lab_ids))


def _signed_in(app, email: str):
    client = app.test_client()
    sign_in(client, email, PASSWORD)
    return client


def _header(page: str) -> str:
    return page.split('<header class="topbar">', 1)[1].split("</header>", 1)[0]


def _section(page: str, heading_id: str) -> str:
    """The text of the home-page section labelled by ``heading_id``."""
    return page.split(f'aria-labelledby="{heading_id}"', 1)[1].split("</section>", 1)[0]


# --- layout -------------------------------------------------------------------


@pytest.mark.parametrize("path, current", [("/", "Overview"), ("/stocks", "Stocks"), ("/waste", "Waste"),
                                           ("/procedures", "Procedures")])
def test_skip_link_and_the_current_page_in_the_nav(demo, path, current):
    page = _client(demo, "safety@example.org").get(path).get_data(as_text=True)
    assert page.index('<a class="skip-link" href="#main">Skip to content</a>') < page.index("<header")
    assert '<main id="main" tabindex="-1">' in page
    marked = re.findall(r'<a class="current" aria-current="page" href="[^"]*">([^<]+)</a>', _header(page))
    assert marked == [current]  # exactly one link is the current page


def test_a_page_under_a_section_marks_the_section_but_not_as_the_page(demo):
    ids = _ids(demo[0])
    header = _header(_client(demo, "safety@example.org").get(f"/waste/{ids['solvent']}").get_data(as_text=True))
    assert 'aria-current="page"' not in header
    assert re.search(r'<a class="in-section" href="/waste">Waste</a>', header)


def test_wide_tables_scroll_in_a_labelled_focusable_wrapper_and_have_captions(demo):
    ids = _ids(demo[0])
    client = _client(demo, "safety@example.org")
    for path in ("/stocks", "/mixtures", "/waste", f"/waste/{ids['solvent']}", "/runs/1"):
        page = client.get(path).get_data(as_text=True)
        tables = page.count("<table")
        wrappers = re.findall(r'<div class="table-wrap" tabindex="0" role="region" aria-label="[^"]+">\s*<table', page)
        assert tables and len(wrappers) == tables, path
        assert page.count("<caption") == tables, path
        assert '<th scope="col"' in page and "<th>" not in page, path


def test_the_stylesheet_has_focus_rings_and_a_narrow_screen_layout():
    css = (Path(__file__).resolve().parents[1] / "service/web/static/dotledger.css").read_text(encoding="utf-8")
    assert re.search(r"a:focus-visible[^{]*button:focus-visible[^{]*\{[^}]*outline: 3px solid", css)
    assert ".table-wrap { max-width: 100%; overflow-x: auto;" in css
    assert "@media (max-width: 720px)" in css  # a 390 px phone gets the wrapped nav and one column


# --- errors as pages ----------------------------------------------------------


def test_another_labs_procedure_is_a_403_page_with_the_signed_in_header(demo):
    app, _ = demo
    _account(app, "outsider@example.org", "researcher", lab_code="X-9")
    response = _signed_in(app, "outsider@example.org").get(f"/procedures/{_ids(app)['cdse']}")
    page = response.get_data(as_text=True)
    assert response.status_code == 403 and response.content_type.startswith("text/html")
    assert "<h1>Not allowed</h1>" in page and "a lab you are not a member of" in page
    assert "outsider@example.org · researcher" in _header(page) and "sign out" in _header(page)
    assert "lab_id" not in page and '{"' not in page and "<pre" not in page  # no JSON details
    assert 'href="/">Go to the home page' in page


def test_an_unknown_page_is_a_404_with_the_signed_in_header(demo):
    response = _client(demo, "researcher@example.org").get("/no-such-page")
    page = response.get_data(as_text=True)
    assert response.status_code == 404 and "<h1>Not found</h1>" in page
    assert "researcher@example.org · researcher" in _header(page)
    assert 'href="/procedures">Procedures' in _header(page)  # the nav of a signed-in user


def test_a_stale_form_token_is_a_page_naming_the_fix(demo):
    response = _client(demo, "researcher@example.org").post("/logout", data={"csrf_token": "stale"})
    page = response.get_data(as_text=True)
    assert response.status_code == 400 and "<h1>The form has expired</h1>" in page and "reload the page" in page
    assert "researcher@example.org" in _header(page)


def test_a_wrong_method_on_a_page_is_a_405_page(demo):
    # a PUT carries no form token, so it reaches the method check
    response = _client(demo, "researcher@example.org").put("/stocks")
    assert response.status_code == 405 and "<h1>Not possible here</h1>" in response.get_data(as_text=True)


def test_api_paths_keep_their_json_errors(demo):
    response = _client(demo, "researcher@example.org").get("/api/v1/no-such-thing")
    assert response.status_code == 404 and response.is_json and response.get_json()["error"]["code"] == "not_found"


# --- role homes ---------------------------------------------------------------


def test_the_researchers_home_lists_their_own_procedures_by_state(demo):
    app, _ = demo
    page = _client(demo, "researcher@example.org").get("/").get_data(as_text=True)
    tables = {t.split(" (", 1)[0]: t for t in _section(page, "h-mine").split("<caption>")[1:]}
    assert "CsPbBr3 perovskite nanocrystals" in tables["My drafts and procedures sent back for changes"]
    assert "CdSe/ZnS core-shell growth" in tables["My procedures waiting for review"]
    assert "CdSe cores by hot injection" in tables["My approved procedures"]
    assert "CdSe cores" not in tables["My procedures waiting for review"]
    assert "No open runs." in _section(page, "h-runs")  # the demo run is closed
    assert "Tracked elements on hand" in page  # the totals stay
    # another researcher of the same lab sees none of them as their own
    _account(app, "second@example.org", "researcher")
    other = _signed_in(app, "second@example.org").get("/").get_data(as_text=True)
    assert "No drafts." in other and "CdSe cores by hot injection" not in _section(other, "h-mine")


@contextmanager
def _store(app):
    """A store session acting as the test, committed at the end."""
    with session_scope(app.extensions["dotledger.sessions"]) as session:
        session.info["actor"] = {"user_id": None, "label": "test"}
        yield session


def test_the_safety_officers_home(demo):
    app, _ = demo
    with _store(app) as session:
        solids = session.get(WasteContainer, _ids(app)["solids"])
        waste.move(session, solids, "mark_full")
        waste.move(session, solids, "request_pickup")
    page = _client(demo, "safety@example.org").get("/").get_data(as_text=True)
    assert "CdSe/ZnS core-shell growth" in _section(page, "h-queue")
    assert "NG-W04" in _section(page, "h-pickups") and "<caption>Containers waiting for pickup (1)" in page
    near = _section(page, "h-near")
    assert "NG-W04" not in near  # a container waiting for pickup is listed there, not here
    assert "NG-W01" in near  # the demo's solvent container carries findings at level review


def test_near_their_limits_means_80_percent_full_or_a_finding_that_needs_review(demo):
    app, _ = demo
    with _store(app) as session:
        solvent = session.get(WasteContainer, _ids(app)["solvent"])
        acetone = session.query(Substance.id).filter(Substance.name == "acetone").scalar()
        for label, acetone_ml in (("T-81", "81"), ("T-79", "79")):
            box = waste.create_container(session, ContainerIn(label=label, lab_id=solvent.lab_id,
                                                              location_id=solvent.location_id,
                                                              stream=solvent.stream, capacity="100 mL"))
            waste.add_entry(session, box.id, EntryIn(description="acetone rinse", volume=f"{acetone_ml} mL",
                                                     components=[{"substance_id": acetone,
                                                                  "volume": f"{acetone_ml} mL"}]), None)
        waste.create_container(session, ContainerIn(label="T-EMPTY", lab_id=solvent.lab_id,
                                                    location_id=solvent.location_id, stream=solvent.stream,
                                                    capacity="1 L"))
    near = _section(_client(demo, "safety@example.org").get("/").get_data(as_text=True), "h-near")
    assert ">T-81<" in near  # 81 % full: at or past the 80 % mark
    assert ">T-EMPTY<" not in near  # empty and without findings
    # 79 % full: listed only if a rule finds something that needs review (acetone alone: flammable, D001)
    with app.test_request_context("/"):
        from service.store.db import get_session

        box = get_session().query(WasteContainer).filter(WasteContainer.label == "T-79").one()
        levels = {f["level"] for f in dump_container(box)["findings"]}
    assert (">T-79<" in near) == bool(levels & {"review", "block"})


def test_the_lab_managers_home_and_the_auditors_home(demo):
    app, _ = demo
    page = _client(demo, "manager@example.org").get("/").get_data(as_text=True)
    inventory_rows = re.findall(r'<th scope="row"><a href="/stocks\?element=(\w+)">', _section(page, "h-inv"))
    assert "Cd" in inventory_rows and "Se" in inventory_rows
    assert "<caption>Net element mass put into waste, by element and stream" in _section(page, "h-ledger")
    _account(app, "auditor@example.org", "auditor")
    audit_home = _signed_in(app, "auditor@example.org").get("/").get_data(as_text=True)
    assert 'href="/audit">Open the audit trail' in _section(audit_home, "h-audit")
    assert 'aria-labelledby="h-queue"' not in audit_home


# --- the audit trail page -----------------------------------------------------


def test_the_audit_page_filters_and_pages(demo):
    app, _ = demo
    _account(app, "auditor@example.org", "auditor")
    client = _signed_in(app, "auditor@example.org")
    everything = client.get("/audit?limit=5").get_data(as_text=True)
    assert re.search(r"<caption>Audit events 1–5 of \d+, in chain order</caption>", everything)
    assert 'rel="next"' in everything
    labs = client.get("/audit?entity=labs").get_data(as_text=True)
    rows = re.findall(r"<td class=\"nowrap\">(\w+) · ", labs)
    assert rows and set(rows) == {"labs"}
    changes = client.get("/audit?entity=procedures&action=state_change").get_data(as_text=True)
    assert "<td>state change:draft-&gt;submitted</td>" in changes and "<td>create</td>" not in changes
    nobody = client.get("/audit?actor=nobody@example.org").get_data(as_text=True)
    assert "No event matches these filters." in nobody
    later = client.get("/audit?since=2999-01-01").get_data(as_text=True)
    assert "No event matches these filters." in later
    today = client.get("/audit?until=2999-12-31&limit=1").get_data(as_text=True)
    assert "Audit events 1–1 of" in today
    # A bare date in "until" takes in that whole day (UTC): the demo's events are today's, not yesterday's.
    utc_today = dt.datetime.now(dt.timezone.utc).date()
    assert "No event matches" not in client.get(f"/audit?until={utc_today}").get_data(as_text=True)
    yesterday = client.get(f"/audit?until={utc_today - dt.timedelta(days=1)}").get_data(as_text=True)
    assert "No event matches these filters." in yesterday
    assert client.get("/audit?until=9999-12-31").status_code == 200  # the last day there is: no overflow
    assert client.get("/audit?limit=0").status_code == 422
    assert client.get("/audit?actor=" + "x" * 300).status_code == 422
    assert _client(demo, "researcher@example.org").get("/audit").status_code == 403


def test_a_bare_date_filter_reads_as_utc_in_the_api_too(demo):
    app, _ = demo
    _account(app, "auditor@example.org", "auditor")
    with session_scope(app.extensions["dotledger.sessions"]) as session:
        auditor = session.query(User).filter(User.email == "auditor@example.org").one()
        secret = identity.issue_token(session, auditor, "t").secret
    response = app.test_client().get("/api/v1/audit_events?since=2000-01-01&until=2999-01-01&actor=SYSTEM",
                                     headers={"Authorization": f"Bearer {secret}"})
    assert response.status_code == 200, response.get_data(as_text=True)


def test_verify_now_reports_an_intact_chain_and_names_a_tampered_event(demo):
    app, _ = demo
    _account(app, "auditor@example.org", "auditor")
    client = _signed_in(app, "auditor@example.org")
    page = client.get("/audit").get_data(as_text=True)
    token = page.split('name="csrf_token" value="', 1)[1].split('"', 1)[0]
    intact = client.post("/audit/verify", data={"csrf_token": token})
    assert intact.status_code == 200
    count = int(re.search(r"Chain intact:</strong> (\d+) events verified", intact.get_data(as_text=True)).group(1))
    assert count > 10
    assert client.post("/audit/verify", data={}).status_code == 400  # the form token is required
    with session_scope(app.extensions["dotledger.sessions"]) as session:
        forged = json.dumps({"code": "C-214", "name": "forged"})
        session.execute(text('UPDATE audit_events SET "after" = :after WHERE id = 3'), {"after": forged})
    broken = client.post("/audit/verify", data={"csrf_token": token}).get_data(as_text=True)
    assert "Chain broken at event 3:</strong> stored hash does not match the event&#39;s content" in broken
    assert "2 events before it verified" in broken
