"""The procedure workflow through the pages: buttons by role and state, the form route, the review
page, the decision history and the risk assessment under the sign-in cookie, on the demo scenario.

Who may take which action is not read from the code: it is the API's rule as tests/test_permissions.py
writes it out (submit and withdraw: researcher, lab manager, administrator; approve, ask for changes,
decline: safety officer only; retire: safety officer, lab manager, administrator).
"""

from __future__ import annotations

import re

import pytest

from service.schemas import PlannedDrawIn, ProcedureIn, StepIn
from service.store import procedures
from service.store.db import session_scope
from service.store.models import Lab, Procedure, Stock, User, WasteContainer
from tests.conftest import make_user
from tests.test_cli import sign_in
from tests.test_permissions import EXPECTED
from tests.test_web_pages import demo  # noqa: F401 - the demo scenario's fixture

DRAFT = "CsPbBr3 perovskite nanocrystals"  # a draft in the demo; 170 °C over 1-octadecene: a review finding
SUBMITTED = "CdSe/ZnS core-shell growth"
APPROVED = "CdSe cores by hot injection"
ACTIONS = ("submit", "withdraw", "approve", "request_changes", "decline", "retire")


@pytest.fixture
def with_auditor(demo):
    """The demo scenario (tests/test_web_pages.py) with an auditor added."""
    app, passwords = demo
    make_user(app, "auditor@example.org", "auditor")
    return app, {**passwords, "auditor@example.org": "correct horse battery"}


class Browser:
    """A signed-in test client that posts forms with the session's CSRF token."""

    def __init__(self, demo, email: str) -> None:
        app, passwords = demo
        self.client = app.test_client()
        sign_in(self.client, email, passwords[email])
        page = self.client.get("/procedures").get_data(as_text=True)
        self.csrf = page.split('name="csrf_token" value="', 1)[1].split('"', 1)[0]

    def get(self, path: str, expect: int = 200) -> str:
        response = self.client.get(path)
        assert response.status_code == expect, (path, response.status_code)
        return response.get_data(as_text=True)

    def act(self, ident: int, action: str, expect: int = 303, **form) -> str:
        response = self.client.post(f"/procedures/{ident}/act/{action}", data={"csrf_token": self.csrf, **form})
        assert response.status_code == expect, (action, response.status_code, response.get_data(as_text=True)[:2000])
        if expect == 303:
            assert response.headers["Location"].endswith(f"/procedures/{ident}?done={action}")
            return self.get(response.headers["Location"])
        assert "text/html" in response.content_type  # a page with the reason, never JSON
        return response.get_data(as_text=True)


def _ids(app) -> dict[str, int]:
    with session_scope(app.extensions["dotledger.sessions"]) as session:
        ids = {title: session.query(Procedure.id).filter(Procedure.title == title).scalar()
               for title in (DRAFT, SUBMITTED, APPROVED)}
        ids["container"] = session.query(WasteContainer.id).filter(WasteContainer.label == "NG-W01").scalar()
        return ids


def _state(app, ident: int) -> str:
    with session_scope(app.extensions["dotledger.sessions"]) as session:
        return session.get(Procedure, ident).state


def _forms(page: str) -> set[str]:
    """The workflow actions the page offers as buttons (form posts and review-form buttons)."""
    return set(re.findall(r'/act/(\w+)"', page))


def test_submit_withdraw_resubmit_and_approve_from_the_review_page(demo):
    app, _ = demo
    ident = _ids(app)[DRAFT]
    researcher = Browser(demo, "researcher@example.org")
    page = researcher.get(f"/procedures/{ident}")
    assert _forms(page) == {"submit"} and f'href="/procedures/{ident}/edit"' in page
    assert f'href="/procedures/{ident}/assessment.pdf"' in page
    page = researcher.act(ident, "submit")
    assert "Submitted for review." in page and _state(app, ident) == "submitted"
    assert _forms(page) == {"withdraw"} and f'href="/procedures/{ident}/edit"' not in page
    page = researcher.act(ident, "withdraw")
    assert "Withdrawn: the procedure is a draft again." in page and _state(app, ident) == "draft"
    researcher.act(ident, "submit")

    officer = Browser(demo, "safety@example.org")
    assert f'href="/review/{ident}"' in officer.get(f"/procedures/{ident}")  # the Review button
    queue = officer.get("/review")
    assert f'href="/review/{ident}"' in queue
    review = officer.get(f"/review/{ident}")
    assert _forms(review) == {"approve", "request_changes", "decline"}
    assert "required for every decision: 1" in review and " required" in review  # a review finding: the box says why
    assert "site safety officer" in review  # the cautions stay beside the findings
    refused = officer.act(ident, "approve", expect=422, comment="  ", **{"from": "review"})
    assert "a comment is required to approve this procedure" in refused and "Review: " in refused
    assert _state(app, ident) == "submitted"
    page = officer.act(ident, "approve", comment="Hood H2; ice bath ready before the injection.", **{"from": "review"})
    assert "Approved." in page and _state(app, ident) == "approved"
    history = page.split("Decision history", 1)[1]
    assert history.count("Demo researcher") == 3 and "researcher@example.org" in history  # submit, withdraw, submit
    assert "Demo safety officer" in history and "safety@example.org" in history
    assert "Hood H2; ice bath ready before the injection." in history
    # approved: a new revision (through the editor) and retiring are what is left
    page = researcher.get(f"/procedures/{ident}")
    assert _forms(page) == set() and "New revision" in page and f'href="/procedures/{ident}/edit"' in page
    assert _forms(officer.get(f"/procedures/{ident}")) == {"retire"}


def test_a_wrong_state_and_a_long_comment_are_pages_with_the_reason(demo):
    app, _ = demo
    ids = _ids(app)
    researcher = Browser(demo, "researcher@example.org")
    page = researcher.act(ids[APPROVED], "withdraw", expect=409)
    assert "cannot withdraw a procedure that is approved" in page and "Not done" in page
    officer = Browser(demo, "safety@example.org")
    page = officer.act(ids[SUBMITTED], "request_changes", expect=422, comment="x" * 5001, **{"from": "review"})
    assert "comment: " in page and "5000" in page and 'aria-invalid="true"' in page
    assert "x" * 5001 in page  # what was typed is kept, not lost
    page = officer.act(ids[SUBMITTED], "decline", expect=422, **{"from": "review"})
    assert "a comment is required to decline" in page
    assert _state(app, ids[SUBMITTED]) == "submitted"
    assert researcher.client.post(f"/procedures/{ids[DRAFT]}/act/publish",
                                  data={"csrf_token": researcher.csrf}).status_code == 404
    assert researcher.client.post(f"/procedures/{ids[DRAFT]}/act/submit").status_code == 400  # no CSRF token


@pytest.mark.parametrize("email, role", [("researcher@example.org", "researcher"), ("safety@example.org", "safety_officer"),
                                         ("manager@example.org", "lab_manager"), ("admin@example.org", "admin"),
                                         ("auditor@example.org", "auditor")])
def test_the_form_route_refuses_what_the_api_refuses_the_role(with_auditor, email, role):
    app, _ = with_auditor
    ident = _ids(app)[SUBMITTED]
    browser = Browser(with_auditor, email)
    for action in ACTIONS:
        if role in EXPECTED[f"api.{action}_procedure"]:
            continue
        page = browser.act(ident, action, expect=403, comment="forged")
        assert "may not" in page, action
    assert _state(app, ident) == "submitted"


def test_the_author_gets_no_approve_button_and_a_forged_approval_is_refused(demo):
    app, _ = demo
    ids = _ids(app)
    researcher = Browser(demo, "researcher@example.org")
    page = researcher.get(f"/procedures/{ids[SUBMITTED]}")
    assert "approve" not in _forms(page) and f'href="/review/{ids[SUBMITTED]}"' not in page
    researcher.get(f"/review/{ids[SUBMITTED]}", expect=403)
    # A procedure a safety officer wrote: their review page has no approve button, and the store refuses.
    with session_scope(app.extensions["dotledger.sessions"]) as session:
        officer = session.query(User).filter(User.email == "safety@example.org").one()
        session.info["actor"] = {"user_id": officer.id, "label": officer.email}
        lab = session.query(Lab).first()
        stock = session.query(Stock.id).filter(Stock.label == "NG-0001").scalar()
        body = ProcedureIn(lab_id=lab.id, title="Officer's own test", steps=[StepIn(operation="charge")],
                           draws=[PlannedDrawIn(stock_id=stock, amount="10 mg")])
        own = procedures.create_procedure(session, body, officer)
        procedures.transition(session, own, "submit", officer, None, app.extensions["dotledger.rules"])
        own_id = own.id
    browser = Browser(demo, "safety@example.org")
    assert f'href="/review/{own_id}"' not in browser.get(f"/procedures/{own_id}")
    review = browser.get(f"/review/{own_id}")
    assert "You wrote this procedure" in review and "approve" not in _forms(review)
    page = browser.act(own_id, "approve", expect=403, comment="looks fine to me", **{"from": "review"})
    assert "nobody approves their own procedure" in page
    assert _state(app, own_id) == "submitted"


def test_the_documents_open_with_the_sign_in_cookie(demo):
    app, _ = demo
    ids = _ids(app)
    researcher = Browser(demo, "researcher@example.org")
    response = researcher.client.get(f"/procedures/{ids[APPROVED]}/assessment.pdf")
    assert response.status_code == 200 and response.mimetype == "application/pdf"
    assert response.data.startswith(b"%PDF-") and re.fullmatch(r"[0-9a-f]{64}", response.headers["X-Document-SHA256"])
    manifest = researcher.client.get(f"/waste/{ids['container']}/manifest.pdf")
    assert manifest.status_code == 200 and manifest.mimetype == "application/pdf"
    # the cookie does not open the API's copy of the same document: that takes a bearer token
    assert researcher.client.get(f"/api/v1/procedures/{ids[APPROVED]}/assessment.pdf").status_code == 401
    missing = researcher.client.get("/procedures/99999/assessment.pdf")
    assert missing.status_code == 404 and "text/html" in missing.content_type
    anonymous = app.test_client().get(f"/procedures/{ids[APPROVED]}/assessment.pdf")
    assert anonymous.status_code == 302 and "/login" in anonymous.headers["Location"]


def test_the_notice_shows_only_known_texts(demo):
    app, _ = demo
    ident = _ids(app)[APPROVED]
    page = Browser(demo, "researcher@example.org").get(f"/procedures/{ident}?done=<b>hello</b>")
    assert "hello" not in page and 'role="status"' not in page
