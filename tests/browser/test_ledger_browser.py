"""The ledger and a container label in a real browser, as the safety officer: open the ledger, follow a
figure to the records behind it and see their sum equal the figure, download the CSV, print a label and
read its QR code back from the printed page (pdftoppm + zbarimg, independent of the encoder)."""

from __future__ import annotations

import re
from decimal import Decimal

import pandas as pd
import pytest
from playwright.sync_api import expect

from tests.browser.browsing import PHONE, no_horizontal_scroll, shot, sign_in
from tests.test_labels import decode_qr

pytestmark = pytest.mark.browser


def _number(text: str) -> Decimal:
    return Decimal(text.strip().replace(",", ""))


def test_ledger_figure_drill_down_download_and_label(new_page, live_server, tmp_path):
    page = new_page()
    sign_in(page, "safety_officer")
    page.get_by_role("link", name="Ledger", exact=True).click()
    expect(page.get_by_role("heading", name="Site element ledger")).to_be_visible()
    shot(page, "ledger")
    # The cadmium table's "into waste" figure of the latest month, followed to its records.
    cadmium = page.locator("table.ledger", has=page.get_by_text("Cd ledger per month"))
    link = cadmium.locator("a.figure[href*='figure=into_waste']").last
    figure = _number(link.inner_text())
    assert figure > 0  # the demo's run 1 put cadmium into NG-W01 and NG-W04
    link.click()
    expect(page).to_have_url(re.compile(r"/ledger/figure\?"))
    shot(page, "drill-down")
    parts = [_number(t) for t in page.locator("table.contributions tbody td.num:last-child").all_inner_texts()]
    assert parts and sum(parts) == figure
    assert _number(page.locator("#sum").inner_text()) == figure == _number(page.locator("#stated").inner_text())
    expect(page.locator("#agree")).to_contain_text("yes")
    # Back to the ledger, then the CSV download: its Cd into-waste column holds the same figure in µg.
    page.get_by_role("link", name=re.compile("ledger of")).click()
    with page.expect_download() as caught:
        page.locator("nav.downloads").get_by_role("link", name="CSV").first.click()
    frame = pd.read_csv(caught.value.path(), skiprows=1)
    cd = frame[frame["element"] == "Cd"]
    assert Decimal(int(cd.iloc[-1]["into_waste_ug"])) / 1000 == figure
    # The label of NG-W01, printed from its container page: a PDF whose QR code is the entry page's address.
    ident = live_server.ids["container"]
    page.goto(f"/waste/{ident}")
    page.get_by_label("label size").select_option("a4-2x4")
    shot(page, "container")
    page.get_by_role("button", name="Print label (PDF)").click()
    expect(page).to_have_url(live_server.at(f"/waste/{ident}/label.pdf?size=a4-2x4"))
    # Served inline for printing, Chromium shows it in its viewer; the same address fetched with the session's
    # cookie gives the PDF's bytes.
    printed = page.request.get(page.url)
    assert printed.status == 200 and printed.headers["content-type"] == "application/pdf"
    pdf = printed.body()
    assert pdf[:5] == b"%PDF-"
    assert decode_qr(pdf, tmp_path) == [live_server.at(f"/containers/{ident}/entry")] * 8


def test_ledger_at_phone_width(new_page):
    page = new_page(PHONE)
    sign_in(page, "safety_officer", "/ledger")
    expect(page.get_by_role("heading", name="Site element ledger")).to_be_visible()
    assert no_horizontal_scroll(page)  # the wide tables scroll inside their .table-wrap
    for link in page.locator("a.figure").all()[:5]:
        box = link.bounding_box()
        assert box and box["height"] >= 44 and box["width"] >= 44  # targets of at least 44 px
    shot(page, "ledger-phone")


def test_researchers_have_no_ledger(new_page):
    page = new_page()
    sign_in(page, "researcher")
    expect(page.get_by_role("link", name="Ledger", exact=True)).to_have_count(0)
    response = page.goto("/ledger")
    assert response.status == 403
