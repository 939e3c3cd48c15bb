"""A run at the bench, in a real browser: start it from the approved demo procedure, record the product by
assay, put the rest into a waste container (through the API: the entry form is a page of its own), close
it; the run page at desktop and at phone width.

Worked by hand: an assay of 3000 mg/L in 5.0 mL is 15.000 mg of Cd; a waste entry of 100 % of what the
run leaves unaccounted leaves 0 unaccounted, so the balance closes within any tolerance.
"""

from __future__ import annotations

import re

import pytest
from playwright.sync_api import expect

from tests.browser.browsing import ACCOUNTS, PASSWORD, PHONE, horizontal_overflow, shot, sign_in

pytestmark = pytest.mark.browser


def _waste_entry_by_api(live_server, run_id: int) -> None:
    """The run's remainder of Cd and Se into container NG-W01, as the researcher, through the JSON API."""
    client = live_server.app.test_client()
    answer = client.post("/api/v1/auth/tokens", json={"email": ACCOUNTS["researcher"][0], "password": PASSWORD})
    assert answer.status_code == 201, answer.get_json()
    headers = {"Authorization": f"Bearer {answer.get_json()['token']}"}
    body = {"run_id": run_id, "description": "supernatants and acetone washes", "volume": "30 mL",
            "elements": [{"element": "Cd", "share_percent": 100}, {"element": "Se", "share_percent": 100}]}
    answer = client.post(f"/api/v1/waste_containers/{live_server.ids['container']}/entries", json=body,
                         headers=headers)
    assert answer.status_code == 201, answer.get_json()


def test_a_run_from_start_to_close(new_page, live_server):
    page = new_page()
    sign_in(page, "researcher")
    page.goto(f"/procedures/{live_server.ids['cdse']}")
    page.get_by_role("link", name="Start a run").click()
    expect(page.get_by_label(re.compile(r"Draw 1 \(NG-0001\) amount"))).to_have_value("25.7 mg")
    shot(page, "start form")
    page.get_by_role("button", name="Start the run and take these draws").click()
    expect(page.get_by_role("status")).to_contain_text("Run started")
    run_id = int(re.search(r"/runs/(\d+)", page.url)[1])

    page.get_by_role("link", name="Record an output").click()
    page.get_by_label("Label").fill("CdSe cores in hexane")
    page.get_by_label("by assay").check()
    page.get_by_label("Cd concentration (e.g. 12.5 mg/L)").fill("3000 mg/L")
    page.get_by_label("Cd volume it applies to (e.g. 4.0 mL)").fill("5.0 mL")
    shot(page, "output by assay")
    page.get_by_role("button", name="Record the output").click()
    expect(page.get_by_role("status")).to_contain_text("Output recorded")
    cd_table = page.locator("#balance-Cd-numbers")
    expect(cd_table.locator("tr", has_text="product")).to_contain_text("15.000")  # 3000 mg/L × 5.0 mL
    expect(page.get_by_text("does not close").first).to_be_visible()

    _waste_entry_by_api(live_server, run_id)
    page.reload()
    expect(cd_table.locator("tr", has_text="unaccounted")).to_contain_text("0.000")
    shot(page, "run before closing")
    page.get_by_role("button", name="Close the run").click()
    expect(page.get_by_role("status")).to_contain_text("Run closed")
    expect(page.get_by_role("button", name="Close the run")).to_have_count(0)
    assert page.locator("figure.chart svg title").count() >= 2  # a chart per element, each named
    shot(page, "run closed")

    phone = new_page(PHONE)
    sign_in(phone, "researcher")
    phone.goto(f"/runs/{run_id}")
    expect(phone.locator("#balance-Cd-numbers")).to_be_visible()
    scroll_width, width = horizontal_overflow(phone)
    assert scroll_width <= width, (scroll_width, width)
    shot(phone, "run closed at 390 px")
    phone.goto(f"/runs?procedure_id={live_server.ids['cdse']}")
    expect(phone.get_by_role("link", name=f"Run {run_id}")).to_be_visible()
    assert horizontal_overflow(phone)[0] <= width
    shot(phone, "runs list at 390 px")
