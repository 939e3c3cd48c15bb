"""The inventory in a real browser, as the lab manager: a spreadsheet with three bad rows checked and
listed with their reasons (nothing imported from it as a whole; its accepted rows only when chosen), a
stock added by the form, a mixture prepared from it, a stock shipped; at 1280 px and at 390 px.

Choice checked here (DEVELOPERS.md): a file with rejected rows imports nothing; the page offers only
"Import only the N accepted rows", and the server refuses the whole file (tests/test_web_inventory.py).
"""

from __future__ import annotations

import re
from decimal import Decimal

import pytest
from playwright.sync_api import expect
from sqlalchemy import select

from service.store.db import session_scope
from service.store.models import Location, Stock, Substance
from tests.browser.browsing import PHONE, no_horizontal_scroll, shot, sign_in

pytestmark = pytest.mark.browser

CD_IN_CDO = Decimal("112.414") / (Decimal("112.414") + Decimal("15.999"))  # CIAAW 2021, from memory
BAD = {  # label -> words its reason must contain
    "BRW-BAD-1": "unknown substance",
    "BRW-BAD-2": "kgg",
    "BRW-BAD-3": "storage",
}
CSV = ("label,substance,amount,lab,building,room,storage\n"
       "BRW-OK-1,cadmium oxide,2 g,C-214,C,C-214,import shelf\n"
       "BRW-BAD-1,unobtainium,5 g,C-214,C,C-214,import shelf\n"
       "BRW-OK-2,selenium,3 g,C-214,C,C-214,import shelf\n"
       "BRW-BAD-2,cadmium oxide,5 kgg,C-214,C,C-214,import shelf\n"
       "BRW-BAD-3,selenium,1 g,C-214,C,C-214,\n")


def _db(live_server):
    return session_scope(live_server.app.extensions["dotledger.sessions"])


def _labels_like(live_server, prefix: str) -> set[str]:
    with _db(live_server) as session:
        return set(session.scalars(select(Stock.label).where(Stock.label.like(prefix + "%"))))


def test_import_with_three_bad_rows(new_page, live_server, tmp_path):
    page = new_page()
    sign_in(page, "lab_manager")
    page.goto("/stocks")
    page.get_by_role("link", name="Import a spreadsheet").click()
    sheet = tmp_path / "inventory.csv"
    sheet.write_text(CSV, encoding="utf-8")
    page.get_by_label("Spreadsheet").set_input_files(str(sheet))
    page.get_by_role("button", name="Check the file (dry run)").click()
    expect(page.get_by_role("heading", name=re.compile("Checked inventory.csv"))).to_be_visible()
    expect(page.locator("main")).to_contain_text("5 rows read: 2 accepted, 3 rejected")
    rows = page.locator("#rejected-rows tbody tr")
    expect(rows).to_have_count(3)
    for i, (label, words) in enumerate(BAD.items()):
        expect(rows.nth(i)).to_contain_text(label)
        expect(rows.nth(i).locator("td.reason")).to_contain_text(words)
    shot(page, "import-report")
    assert _labels_like(live_server, "BRW-") == set()  # the dry run stored nothing
    # no button imports the file whole; the one offered leaves the bad rows out
    expect(page.get_by_role("button", name=re.compile("Import these"))).to_have_count(0)
    page.get_by_role("button", name="Import only the 2 accepted rows (leave out 3)").click()
    expect(page.get_by_role("heading", name="Imported 2 stocks from inventory.csv")).to_be_visible()
    assert _labels_like(live_server, "BRW-") == {"BRW-OK-1", "BRW-OK-2"}

    phone = new_page(viewport=PHONE)
    sign_in(phone, "lab_manager")
    phone.goto("/stocks/import")
    other = tmp_path / "inventory-phone.csv"
    other.write_text(CSV.replace("BRW-", "BRP-"), encoding="utf-8")  # labels not yet used
    phone.get_by_label("Spreadsheet").set_input_files(str(other))
    phone.get_by_role("button", name="Check the file (dry run)").click()
    expect(phone.locator("#rejected-rows tbody tr")).to_have_count(3)
    assert no_horizontal_scroll(phone)
    shot(phone, "import-report-390")


def test_add_a_stock_prepare_a_mixture_and_ship(new_page, live_server):
    with _db(live_server) as session:
        cdo = str(session.scalar(select(Substance.id).where(Substance.key == "cadmium-oxide")))
        place = str(session.scalar(select(Location.id).where(Location.lab_id == live_server.ids["lab"],
                                                            Location.kind == "storage").order_by(Location.id)))
    page = new_page()
    sign_in(page, "lab_manager")
    page.goto("/stocks")
    page.get_by_role("link", name="Add a stock").click()
    page.get_by_label("Label", exact=True).fill("BRW-CDO")
    page.get_by_label("Substance").select_option(cdo)
    page.get_by_label("Lab", exact=True).select_option(str(live_server.ids["lab"]))
    page.get_by_label("Location").select_option(place)
    page.get_by_label("Amount").fill("5 gg")
    page.get_by_role("button", name="Add the stock").click()
    expect(page.locator("#amount-error")).to_be_visible()  # the error next to its field
    shot(page, "stock-form-error")
    page.get_by_label("Amount").fill("5 g")
    page.get_by_role("button", name="Add the stock").click()
    expect(page.get_by_role("status")).to_contain_text("Stock added.")
    expect(page.get_by_role("heading", level=1)).to_contain_text("BRW-CDO")
    # Cd in 5 g CdO: 5000 mg × 112.414 / 128.413 = 4377.049 mg (CIAAW 2021 weights, from memory)
    expect(page.locator("main")).to_contain_text(f"{5000 * CD_IN_CDO:,.3f}")
    shot(page, "stock-page")

    page.goto("/mixtures")
    page.get_by_role("link", name="Prepare a mixture").click()
    page.get_by_label("Label", exact=True).fill("BRW-MIX")
    page.get_by_label("Name").fill("Cd oleate 0.2 M (browser)")
    page.get_by_label("Lab", exact=True).select_option(str(live_server.ids["lab"]))
    page.get_by_label("Location").select_option(place)
    page.get_by_label("Volume").fill("10 mL")
    page.get_by_label("Component 1 drawn from").fill("BRW-CDO")
    page.get_by_label("Component 1 amount drawn").fill("1 g")
    page.get_by_label("Component 1 stated as").select_option("molarity")
    page.get_by_label("Component 1 concentration").fill("0.2 mol/L")
    shot(page, "mixture-form")
    page.get_by_role("button", name="Prepare the mixture").click()
    expect(page.locator("main")).to_contain_text("BRW-MIX")
    with _db(live_server) as session:
        stock = session.scalar(select(Stock).where(Stock.label == "BRW-CDO"))
        assert stock.amount_text == "4000 mg"
        stock_id = stock.id

    page.goto(f"/stocks/{stock_id}")
    page.get_by_role("link", name="Ship out of the site").click()
    page.get_by_label("Destination").fill("Partner institute, room 12")
    page.get_by_label("Amount").fill("1 g")
    page.get_by_role("button", name="Review what will move").click()
    expect(page.get_by_role("heading", name=re.compile("Please confirm"))).to_be_visible()
    # Cd in 1 g of the 4 g left: a quarter of what it holds, i.e. the Cd of 1 g CdO, 875.410 mg
    expect(page.locator("#moving-caption")).to_be_visible()
    expect(page.locator("table:has(#moving-caption)")).to_contain_text(f"{1000 * CD_IN_CDO:,.3f}")
    shot(page, "ship-confirm")
    page.get_by_role("button", name=re.compile(r"^Ship 1000 mg of BRW-CDO")).click()
    expect(page.get_by_role("status")).to_contain_text("Shipped out of the site.")
    expect(page.locator("main")).to_contain_text("shipped out of the site")
    shot(page, "stock-after-shipping")

    phone = new_page(viewport=PHONE)
    sign_in(phone, "lab_manager")
    for path in (f"/stocks/{stock_id}", "/stocks/new", "/mixtures/new", f"/stocks/{stock_id}/ship"):
        phone.goto(path)
        assert no_horizontal_scroll(phone), path
        shot(phone, path.strip("/").replace("/", "-") + "-390")
