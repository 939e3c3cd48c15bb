"""The pages that exist, in a real browser: signing in per role, the layout at phone width,
the risk-assessment PDF, and the sign-in form by keyboard alone."""

from __future__ import annotations

import io
import re

import pytest
from playwright.sync_api import expect
from pypdf import PdfReader
from sqlalchemy import select

from service.store.db import session_scope
from service.store.models import Procedure

from tests.browser.browsing import ACCOUNTS, PASSWORD, PHONE, horizontal_overflow, shot, sign_in

pytestmark = pytest.mark.browser

PAGES = {
    "overview": "/",
    "stocks": "/stocks",
    "mixtures": "/mixtures",
    "procedures": "/procedures",
    "procedure": "/procedures/{cdse}",
    "review": "/review",
    "waste": "/waste",
    "container": "/waste/{container}",
    "run": "/runs/{run}",
    "review page": "/review/{cdse}",
    "account": "/account",
    "not found": "/procedures/999999",
}
# Pages another role opens (the rest: the safety officer), and the answer each page gives.
ROLE_OF = {"audit trail": "auditor", "forbidden": "auditor"}
PAGES.update({"audit trail": "/audit", "forbidden": "/procedures/new"})
STATUS = {"not found": 404, "forbidden": 403}


@pytest.mark.parametrize("role", list(ACCOUNTS))
def test_each_role_signs_in_through_the_form(page, live_server, role):
    email = sign_in(page, role)
    assert page.url == live_server.at("/")
    expect(page.get_by_role("heading", level=1)).to_be_visible()
    expect(page.locator("header")).to_contain_text(email)
    expect(page.get_by_role("button", name=re.compile("sign out", re.I))).to_be_visible()
    # every page carries the caution that the findings are suggestions only
    expect(page.locator("body")).to_contain_text("site safety officer")


def test_a_wrong_password_keeps_the_form(page):
    page.goto("/login")
    page.get_by_label(re.compile("email", re.I)).fill(ACCOUNTS["researcher"][0])
    page.get_by_label(re.compile("password", re.I)).fill(PASSWORD + " typo")
    page.get_by_role("button", name=re.compile("sign in", re.I)).click()
    expect(page.get_by_role("alert")).to_be_visible()
    assert "/login" in page.url


@pytest.mark.parametrize("name", list(PAGES))
def test_no_horizontal_scroll_at_390px(new_page, live_server, name):
    page = new_page(viewport=PHONE)
    sign_in(page, ROLE_OF.get(name, "safety_officer"))
    response = page.goto(PAGES[name].format(**live_server.ids))
    assert response.status == STATUS.get(name, 200), name
    expect(page.locator("header")).to_contain_text("sign out")  # error pages too keep the signed-in header
    scroll_width, inner_width = horizontal_overflow(page)
    assert scroll_width <= inner_width, f"{name}: the page is {scroll_width} px wide in a {inner_width} px window"


def test_the_risk_assessment_pdf_downloads(page, live_server):
    sign_in(page, "researcher")
    path = f"/procedures/{live_server.ids['cdse']}/assessment.pdf"
    page.goto(f"/procedures/{live_server.ids['cdse']}")
    link = page.locator(f'a[href="{path}"]')
    expect(link).to_be_visible()
    shot(page, "procedure-with-pdf-link")
    response = page.context.request.get(path)  # the page's session cookie
    assert response.status == 200
    assert response.headers["content-type"].startswith("application/pdf")
    body = response.body()
    assert body.startswith(b"%PDF")
    text = " ".join(re.sub(r"\s+", " ", p.extract_text()) for p in PdfReader(io.BytesIO(body)).pages)
    assert "CdSe cores by hot injection" in text
    assert re.search(r"State\s*approved", text), text[:400]


def test_the_sign_in_page_by_keyboard_alone(page, live_server):
    page.goto("/login")
    fields = {"email": ACCOUNTS["lab_manager"][0], "password": PASSWORD}
    for name, value in fields.items():
        for _ in range(30):  # from wherever focus starts, Tab reaches the field
            if page.evaluate("document.activeElement && document.activeElement.name") == name:
                break
            page.keyboard.press("Tab")
        else:
            pytest.fail(f"Tab never reached the {name} field")
        page.keyboard.type(value)
    page.keyboard.press("Enter")
    expect(page).to_have_url(live_server.at("/"))
    expect(page.locator("header")).to_contain_text(ACCOUNTS["lab_manager"][0])


# Pages with forms, and the role that opens them (the editor: a researcher of the lab).
FORM_PAGES = {
    "procedure editor": ("/procedures/new", "researcher"),
    "review page": ("/review/{submitted}", "safety_officer"),
    "container": ("/waste/{container}", "safety_officer"),
    "stocks": ("/stocks", "safety_officer"),
    "account": ("/account", "researcher"),
    "audit trail": ("/audit", "auditor"),
}
# A control's name from a <label> (HTML "labelable elements" and label.control), aria-label or aria-labelledby:
# WCAG 2.1 success criterion 4.1.2 (Name, Role, Value) with technique H44 (label elements) and ARIA16.
UNLABELLED = """() => [...document.querySelectorAll('input, select, textarea')]
  .filter(el => !['hidden', 'submit', 'button', 'reset', 'image'].includes(el.type))
  .filter(el => !(el.labels && [...el.labels].some(l => l.textContent.trim()))
                && !(el.getAttribute('aria-label') || '').trim()
                && !(el.getAttribute('aria-labelledby') || '').split(/\\s+/).some(id => id && document.getElementById(id)
                                                                               && document.getElementById(id).textContent.trim()))
  .map(el => el.outerHTML.slice(0, 160))"""


@pytest.mark.parametrize("name", list(FORM_PAGES))
def test_every_form_control_has_a_label(page, live_server, name):
    path, role = FORM_PAGES[name]
    with session_scope(live_server.app.extensions["dotledger.sessions"]) as session:  # the demo's submitted one
        submitted = session.scalar(select(Procedure.id).where(Procedure.state == "submitted").order_by(Procedure.id))
    sign_in(page, role)
    response = page.goto(path.format(submitted=submitted, **live_server.ids))
    assert response.status == 200, name
    assert page.locator("input:not([type=hidden]), select, textarea").count() > 0, f"{name} has no form"
    assert page.evaluate(UNLABELLED) == [], name
