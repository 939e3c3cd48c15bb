"""What the browser tests share: the accounts, sign-in through the form, screenshots, the layout check."""

from __future__ import annotations

import re
import shutil
from pathlib import Path

from tests.conftest import ROOT

CHROMIUM = "/usr/bin/chromium"
CHROMIUM_ARGS = ["--no-sandbox", "--disable-dev-shm-usage", "--disable-gpu"]
SCREENS = ROOT / "build" / "screens"
PHONE = {"width": 390, "height": 844}
PASSWORD = "browser test passphrase"
# role -> (email, member of the demo lab)
ACCOUNTS = {
    "researcher": ("researcher.browser@example.org", True),
    "safety_officer": ("safety.browser@example.org", False),
    "lab_manager": ("manager.browser@example.org", True),
    "auditor": ("auditor.browser@example.org", False),
}


class Screens:
    """Numbered full-page screenshots of one test, in build/screens/<test name>/."""

    def __init__(self, test_name: str) -> None:
        self.folder = SCREENS / re.sub(r"[^A-Za-z0-9_.-]+", "_", test_name).strip("_")
        shutil.rmtree(self.folder, ignore_errors=True)
        self.count = 0
        self.last_url: dict[object, str] = {}  # page -> the address of its latest picture

    def save(self, page, name: str) -> Path:
        self.count += 1
        self.folder.mkdir(parents=True, exist_ok=True)
        path = self.folder / f"{self.count:02d}-{re.sub(r'[^A-Za-z0-9_.-]+', '_', name).strip('_') or 'page'}.png"
        self.last_url[page] = page.url
        page.screenshot(path=str(path), full_page=True)
        return path


_SCREENS: dict[object, Screens] = {}


def remember(page, screens: Screens | None) -> None:
    """Tie a page to its test's screenshots (None: forget it)."""
    if screens is None:
        _SCREENS.pop(page, None)
    else:
        _SCREENS[page] = screens


def shot(page, name: str) -> Path:
    """Save a full-page screenshot of ``page`` under the running test's folder."""
    return _SCREENS[page].save(page, name)


def sign_in(page, role: str, next_path: str | None = None) -> str:
    """Sign in through the form as the account of ``role``; returns its email."""
    from playwright.sync_api import expect

    email = ACCOUNTS[role][0]
    page.goto("/login" + (f"?next={next_path}" if next_path else ""))
    page.get_by_label(re.compile("email", re.I)).fill(email)
    page.get_by_label(re.compile("password", re.I)).fill(PASSWORD)
    page.get_by_role("button", name=re.compile("sign in", re.I)).click()
    expect(page).not_to_have_url(re.compile(r"/login"))
    return email


def horizontal_overflow(page) -> tuple[int, int]:
    """(scrollWidth of the document, width of the window)."""
    return tuple(page.evaluate("[document.documentElement.scrollWidth, window.innerWidth]"))


def no_horizontal_scroll(page) -> bool:
    scroll_width, inner_width = horizontal_overflow(page)
    return scroll_width <= inner_width
