"""A procedure from plan to printed risk assessment, in a real browser: a researcher writes it in the
editor (one mistake on the way), submits it; a safety officer reviews and approves it; the researcher
prints the risk assessment. Then the editor by keyboard alone, and the editor at phone width.

Field names are the editor's form (ids equal names): title, lab_id, steps-N-<field>, draws-N-<field>;
rows are found by name pattern, so the tests do not depend on whether N counts from 0 or 1.
"""

from __future__ import annotations

import io
import re

import pytest
from playwright.sync_api import expect
from pypdf import PdfReader

from tests.browser.browsing import PHONE, horizontal_overflow, shot, sign_in

pytestmark = pytest.mark.browser

# A CdSe hot-injection batch at the demo's scale: hot injection runs around 240–320 °C in 1-octadecene
# (common practice, /work/shared/REFERENCES.md "Flash points"); 5000 °C is past any heater and past the
# form's bound (StepIn.temperature_c, at most 1200 °C), so the editor must refuse it and name the field.
STEPS = [
    {"operation": "charge", "atmosphere": "air", "note": "CdO, oleic acid and 1-octadecene into a 50 mL flask"},
    {"operation": "heat", "temperature_c": "300", "atmosphere": "argon", "note": "until clear and colourless"},
    {"operation": "inject", "temperature_c": "270", "atmosphere": "argon", "note": "TOP-Se swiftly by syringe"},
]
DRAWS = [("stock", "cadmium oxide", "25.7 mg"), ("stock", "1-octadecene", "10 mL"), ("mixture", "TOP-Se", "1.0 mL")]
ADD_BUTTON = {"steps": r"add.*step", "draws": r"add.*(draw|reagent|source)"}
# The editor's buttons (a copy hidden from people and screen readers may come first, for Enter in a field).
ACTION = 'button[name="action"]:not([aria-hidden="true"])'
PROCEDURE_URL = re.compile(r"/procedures/(\d+)(\?.*)?$")


def rows(page, group: str, field: str):
    """The ``field`` inputs of a repeated group (steps, draws, waste), in screen order."""
    return page.locator(f'[name^="{group}-"][name$="-{field}"]')


def row_field(page, group: str, index: int, field: str):
    """The ``field`` input of row ``index`` (0 = the first row on screen), adding rows as needed."""
    found = rows(page, group, field)
    for _ in range(index + 1):
        if found.count() > index:
            break
        page.get_by_role("button", name=re.compile(ADD_BUTTON[group], re.I)).click()
    return found.nth(index)


def set_value(field, value: str) -> None:
    """Type into an input or textarea, choose in a select; a hidden field must already hold the value."""
    kind = field.evaluate("e => e.tagName === 'SELECT' ? 'select' : (e.type || '')")
    if kind == "select":
        field.select_option(value)
    elif kind == "hidden":
        assert field.input_value() == value
    else:
        field.fill(value)


def source_of(live_server, kind: str, name: str) -> str:
    return f"{kind}:{live_server.ids[name]}"


def fill_editor(page, live_server, title: str, steps: list[dict]) -> None:
    set_value(page.locator("#title"), title)
    set_value(page.locator("#lab_id"), str(live_server.ids["lab"]))
    for index, step in enumerate(steps):
        for name, value in step.items():
            set_value(row_field(page, "steps", index, name), value)
    for index, (kind, name, amount) in enumerate(DRAWS):
        set_value(row_field(page, "draws", index, "source"), source_of(live_server, kind, name))
        set_value(row_field(page, "draws", index, "amount"), amount)


def press(page, action: str):
    """Press the editor's save or check button; returns the response of the page it leads to, once loaded."""
    with page.expect_navigation() as answer:
        page.locator(f'{ACTION}[value="{action}"]').click()
    return answer.value


def pdf_text(body: bytes) -> str:
    return " ".join(re.sub(r"\s+", " ", p.extract_text()) for p in PdfReader(io.BytesIO(body)).pages)


def test_plan_submit_review_approve_print(new_page, live_server):
    title = "CdSe cores for the browser scenario"
    researcher = new_page()
    sign_in(researcher, "researcher")
    researcher.goto("/procedures")
    researcher.get_by_role("link", name=re.compile("new procedure", re.I)).click()
    expect(researcher).to_have_url(live_server.at("/procedures/new"))

    # One mistake: 5000 °C in step 2.
    wrong = [dict(step) for step in STEPS]
    wrong[1]["temperature_c"] = "5000"
    fill_editor(researcher, live_server, title, wrong)
    assert press(researcher, "save").status == 422
    temperature = rows(researcher, "steps", "temperature_c").nth(1)
    field_id = temperature.get_attribute("id")
    assert field_id and field_id == temperature.get_attribute("name")
    summary_link = researcher.locator(f'a[href="#{field_id}"]')
    expect(summary_link).to_be_visible()
    shot(researcher, "error-summary")
    # Nothing typed is lost on the way back.
    expect(researcher.locator("#title")).to_have_value(title)
    expect(temperature).to_have_value(re.compile(r"^5000(\.0*)?$"))
    expect(rows(researcher, "draws", "amount").nth(2)).to_have_value(re.compile(r"^1(\.0)?\s*mL$"))

    summary_link.click()
    expect(researcher).to_have_url(re.compile(f"#{re.escape(field_id)}$"))
    expect(temperature).to_be_in_viewport()
    temperature.fill("300")
    # The check round trip: masses, findings and the scale-up preview, nothing stored.
    assert press(researcher, "check").status == 200
    panel = researcher.locator("#live")
    expect(panel.get_by_role("table", name=re.compile("^element masses per batch", re.I))).to_contain_text("Cd")
    expect(panel.get_by_role("table", name=re.compile("scale-up preview", re.I))).to_contain_text("× 10")
    expect(panel).to_contain_text("site safety officer")  # the findings' caution
    shot(researcher, "check-panel")
    response = press(researcher, "save")
    first = response.request.redirected_from
    assert first is not None and first.method == "POST" and first.response().status == 303
    expect(researcher).to_have_url(PROCEDURE_URL)
    ident = int(PROCEDURE_URL.search(researcher.url).group(1))
    expect(researcher.get_by_role("heading", level=1)).to_have_text(title)
    expect(researcher.locator("main")).to_contain_text("draft")

    researcher.get_by_role("button", name=re.compile(r"^submit", re.I)).click()
    expect(researcher).to_have_url(PROCEDURE_URL)
    expect(researcher.locator("main")).to_contain_text("submitted")
    # Never an approve button on one's own procedure, nor the review page.
    expect(researcher.get_by_role("button", name=re.compile("approve", re.I))).to_have_count(0)
    expect(researcher.locator('[action*="/act/approve"], [formaction*="/act/approve"]')).to_have_count(0)
    assert researcher.goto(f"/review/{ident}").status == 403

    officer = new_page()
    sign_in(officer, "safety_officer")
    officer.goto("/review")
    officer.get_by_role("link", name=title).click()
    if not officer.url.endswith(f"/review/{ident}"):  # the queue may lead to the procedure page first
        officer.locator(f'a[href$="/review/{ident}"]').click()
    expect(officer).to_have_url(live_server.at(f"/review/{ident}"))
    expect(officer.locator("main")).to_contain_text("site safety officer")  # the findings' caution
    comment = "Checked the argon line and the temperature controller; face shield for the injection."
    officer.get_by_label(re.compile("comment", re.I)).fill(comment)
    shot(officer, "review-with-comment")
    officer.get_by_role("button", name=re.compile(r"^approve", re.I)).click()
    expect(officer).to_have_url(PROCEDURE_URL)
    expect(officer.locator("main")).to_contain_text("approved")
    expect(officer.locator("main")).to_contain_text(comment)

    researcher.goto(f"/procedures/{ident}")
    path = f"/procedures/{ident}/assessment.pdf"
    expect(researcher.locator(f'a[href="{path}"]')).to_be_visible()
    printed = researcher.context.request.get(path)  # with the researcher's session cookie
    assert printed.status == 200
    body = printed.body()
    assert body.startswith(b"%PDF")
    text = pdf_text(body)
    assert title in text
    assert re.search(r"State\s*approved", text), text[:400]
    expect(researcher.get_by_role("button", name=re.compile("approve", re.I))).to_have_count(0)


def _focus_is(page, selector: str, index: int = 0) -> bool:
    return page.evaluate("([s, i]) => document.activeElement === document.querySelectorAll(s)[i]", [selector, index])


def tab_to(page, selector: str, index: int = 0, limit: int = 300) -> None:
    """Press Tab until the ``index``-th element matching ``selector`` has the focus."""
    assert page.locator(selector).count() > index, f"no {selector} #{index} on {page.url}"
    for _ in range(limit):
        if _focus_is(page, selector, index):
            return
        page.keyboard.press("Tab")
    pytest.fail(f"Tab never reached {selector} #{index}")


def key_in(page, selector: str, value: str, index: int = 0) -> None:
    """Give the field the value by keyboard: arrow keys in a select, typing elsewhere."""
    tab_to(page, selector, index)
    kind = page.evaluate("document.activeElement.tagName === 'SELECT' ? 'select' : document.activeElement.type")
    if kind == "select":
        page.keyboard.press("Home")
        for _ in range(100):
            if page.evaluate("document.activeElement.value") == value:
                return
            page.keyboard.press("ArrowDown")
        pytest.fail(f"no option {value!r} in {selector}")
    page.keyboard.press("Control+A")
    page.keyboard.type(value)


def test_the_editor_by_keyboard_alone(new_page, live_server):
    title = "ZnS shell trial, typed without a mouse"
    page = new_page()
    sign_in(page, "researcher")
    page.goto("/procedures/new")
    key_in(page, "#title", title)
    if page.locator("#lab_id").evaluate("e => e.type") != "hidden":
        key_in(page, "#lab_id", str(live_server.ids["lab"]))
    for field, value in (("operation", "charge"), ("atmosphere", "air"), ("note", "zinc acetate and oleylamine")):
        key_in(page, f'[name^="steps-"][name$="-{field}"]', value)
    key_in(page, '[name^="draws-"][name$="-source"]', source_of(live_server, "stock", "1-octadecene"))
    key_in(page, '[name^="draws-"][name$="-amount"]', "8 mL")
    tab_to(page, f'{ACTION}[value="save"]')
    page.keyboard.press("Enter")
    expect(page).to_have_url(PROCEDURE_URL)
    expect(page.get_by_role("heading", level=1)).to_have_text(title)
    expect(page.locator("main")).to_contain_text("1-octadecene")


def test_the_editor_fits_a_phone(new_page, live_server):
    page = new_page(viewport=PHONE)
    sign_in(page, "researcher")
    page.goto("/procedures/new")
    width, window = horizontal_overflow(page)
    assert width <= window, f"the empty editor is {width} px wide in a {window} px window"
    wrong = [dict(STEPS[1], temperature_c="5000")]
    fill_editor(page, live_server, "Phone-width check", wrong)
    assert press(page, "check").status == 422
    width, window = horizontal_overflow(page)
    assert width <= window, f"the editor with its error summary is {width} px wide in a {window} px window"
