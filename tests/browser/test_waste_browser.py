"""Waste entries in a real browser: two entries of a run (one by share of its remainder) with the milligrams
shown before saving, the container's cadmium total equal to the sum of its entries, an entry at phone width
from the container's entry address (the one its label's QR code carries), and an overfill refused with the
room left.

Independent of the code under test: the sums are taken here from the numbers the pages show; a share is
the remainder × percent / 100 (the definition of ``share_percent``); 48 px is the target size asked for
gloved use (common practice; WCAG 2.5.5 asks for 44 CSS px).
"""

from __future__ import annotations

import re
from decimal import Decimal

import pytest
from playwright.sync_api import expect
from sqlalchemy import select

from service.appdata import active_rules
from service.schemas import RunIn
from service.store import runs
from service.store.db import session_scope
from service.store.models import Run, User
from tests.browser.browsing import ACCOUNTS, PHONE, horizontal_overflow, shot, sign_in

pytestmark = pytest.mark.browser


def _open_run(live_server) -> tuple[int, int]:
    """A new open run of the approved CdSe procedure by the browser researcher: (run id, its Cd input in µg)."""
    app = live_server.app
    with session_scope(app.extensions["dotledger.sessions"]) as s:
        user = s.scalar(select(User).where(User.email == ACCOUNTS["researcher"][0]))
        s.info["actor"] = {"user_id": user.id, "label": user.email}
        run = runs.start_run(s, RunIn(procedure_id=live_server.ids["cdse"]), user, active_rules(app))
        return run.id, sum(d.element_mass_ug.get("Cd", 0) for d in s.get(Run, run.id).draws)


def _mg(text: str) -> Decimal:
    return Decimal(text.replace(",", "").replace("mg", "").strip())


def _cd_total(page) -> Decimal:
    """The Cd mass the container page's element table shows, in mg."""
    row = page.locator("table", has=page.locator("caption", has_text="Element content")).locator("tr", has_text="Cd")
    return _mg(row.locator("td").first.inner_text())


def _entries_cd(page) -> list[Decimal]:
    """Every Cd figure in the container page's entries table (reversals negative), in mg."""
    cells = page.locator("table.entries td.others").all_inner_texts()
    return [_mg(m) for cell in cells for m in re.findall(r"Cd (-?[\d,]+\.\d+)", cell)]


def _checked_cd(page) -> Decimal:
    """The Cd milligrams the check panel shows (before saving)."""
    panel = page.locator("section.check-panel")
    expect(panel).to_contain_text("not saved yet")
    text = panel.locator("dt:text-is('Cd') + dd strong").inner_text()
    return _mg(text)


def test_two_entries_of_a_run_then_the_container_total(page, live_server):
    run_id, cd_in = _open_run(live_server)
    sign_in(page, "researcher")
    container = live_server.ids["container"]
    page.goto(f"/waste/{container}")
    before = _cd_total(page)
    # from the run: choose liquid waste, then the container
    page.goto(f"/waste/entry?run={run_id}")
    page.get_by_role("link", name=re.compile("Liquid waste")).click()
    page.get_by_role("link", name=re.compile("NG-W01")).click()
    expect(page.locator("#run_id")).to_have_value(str(run_id))
    page.locator("#description").fill("first supernatant")
    page.locator("#amount").fill("12")
    expect(page.locator("#elements-0-element")).to_have_value("Cd")  # prefilled: what the run has left
    page.locator("#elements-0-mass").fill("3.25")
    page.get_by_role("button", name="Check amounts (mg)").click()
    first = _checked_cd(page)
    assert first == Decimal("3.25")
    shot(page, "first entry checked")
    page.get_by_role("button", name="Save entry").click()
    expect(page.get_by_role("status")).to_have_text("Entry saved.")
    # the second by share of what the run leaves unaccounted
    page.goto(f"/waste/{container}/entry?run={run_id}")
    page.locator("#description").fill("second supernatant")
    page.locator("#amount").fill("8")
    page.locator("#elements-0-share_percent").fill("25")
    page.get_by_role("button", name="Check amounts (mg)").click()
    second = _checked_cd(page)
    expected = (Decimal(cd_in) / 1000 - first) * Decimal("0.25")  # remainder × 25 %
    assert abs(second - expected) <= Decimal("0.001")  # shown to the µg
    shot(page, "share checked")
    page.get_by_role("button", name="Save entry").click()
    expect(page.get_by_role("status")).to_have_text("Entry saved.")
    total = _cd_total(page)
    assert total == before + first + second
    assert total == sum(_entries_cd(page))  # the container's total is the sum of its entries
    shot(page, "container after two entries")


def test_phone_entry_from_the_containers_entry_address(new_page, live_server):
    page = new_page(viewport=PHONE)
    container = live_server.ids["container"]
    sign_in(page, "researcher", next_path=f"/waste/{container}/entry")  # as after scanning the label
    expect(page.get_by_role("heading", level=1)).to_have_text(re.compile("Waste entry into NG-W01"))
    scroll_width, width = horizontal_overflow(page)
    assert scroll_width <= width
    for target in ("#amount", "#elements-0-mass", "#save", "#check-button", "#description"):
        box = page.locator(target).bounding_box()
        assert box["height"] >= 48, (target, box)
    assert page.locator("#amount").get_attribute("inputmode") == "decimal"
    assert page.locator("#elements-0-share_percent").get_attribute("inputmode") == "decimal"
    page.locator("#description").fill("rinse of the flask")
    page.locator("#amount").fill("5")
    page.locator("#elements-0-mass").fill("0.4")
    page.locator("#check-button").click()
    assert _checked_cd(page) == Decimal("0.4")
    shot(page, "phone check")
    page.locator("#save").click()
    expect(page.get_by_role("status")).to_have_text("Entry saved.")
    shot(page, "phone saved")


def test_overfill_refused_with_the_room_left(page, live_server):
    sign_in(page, "researcher")
    container = live_server.ids["container"]
    page.goto(f"/waste/{container}")
    entries = page.locator("table.entries tbody tr").count()
    held = Decimal(page.locator("dl.contents dt:text-is('volume') + dd").inner_text().removesuffix(" L"))
    room = Decimal(20) - held  # NG-W01 holds 20 L (the demo scenario)
    page.goto(f"/waste/{container}/entry")
    page.locator("#description").fill("too much")
    page.locator("#amount").fill("25")
    page.locator("#amount_unit").select_option("L")
    page.locator("#save").click()
    error = page.locator("#amount-error")
    expect(error).to_contain_text(re.compile("would overfill", re.I))
    expect(error).to_contain_text(f"room left: {room.normalize():f} L")
    expect(page.locator("#error-summary")).to_contain_text("nothing was saved")
    assert page.locator("#amount").get_attribute("aria-invalid") == "true"
    shot(page, "overfill refused")
    page.goto(f"/waste/{container}")
    assert page.locator("table.entries tbody tr").count() == entries
