"""What the browser tests share: the accounts, sign-in through the form, screenshots, the layout check."""

from __future__ import annotations

import functools
import re
import shutil
import threading
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
    """The numbered screenshots of one test, in build/screens/<test name>/<NN>-<name>.png.

    The live server notes every HTML page it sends to one of the test's browser contexts (``note``,
    from the server's threads); ``shot`` pictures a page at once. After the test, ``picture_pages``
    shows each noted page again, as it was sent, in the context that asked for it, and pictures it:
    so every page visited is kept, also those the test left before they finished drawing.
    """

    def __init__(self, test_name: str) -> None:
        self.folder = SCREENS / _file_name(test_name)
        shutil.rmtree(self.folder, ignore_errors=True)
        self.count = 0
        self.pages: list[tuple[Path, int, str, int, bytes]] = []  # (file, context, path, status, body)
        self._lock = threading.Lock()

    def _next_file(self, name: str) -> Path:
        with self._lock:
            self.count += 1
            return self.folder / f"{self.count:02d}-{_file_name(name) or 'page'}.png"

    def note(self, context_index: int, path: str, status: int, body: bytes) -> None:
        name = path.split("?", 1)[0].strip("/").replace("/", "-") or "home"
        self.pages.append((self._next_file(name), context_index, path, status, body))

    def shot(self, page, name: str) -> Path:
        file = self._next_file(name)
        self.folder.mkdir(parents=True, exist_ok=True)
        page.screenshot(path=str(file), full_page=True)
        return file

    def picture_pages(self, contexts, base_url: str) -> None:
        from playwright.sync_api import Error as PlaywrightError

        self.folder.mkdir(parents=True, exist_ok=True)
        for file, index, path, status, body in self.pages:
            page = contexts[index].new_page()
            try:
                page.route(base_url + path, functools.partial(_send_again, body=body, status=status), times=1)
                page.goto(base_url + path)
                page.screenshot(path=str(file), full_page=True)
            except PlaywrightError:  # a page that cannot be shown again is not a failure of the test
                pass
            finally:
                page.close()


def _send_again(route, request, *, body: bytes, status: int) -> None:
    route.fulfill(status=status, body=body, content_type="text/html; charset=utf-8")


def _file_name(text: str) -> str:
    return re.sub(r"[^A-Za-z0-9_.-]+", "_", text).strip("_")


class PageNotes:
    """WSGI middleware of the live server: hands each HTML page (not redirects) sent for display to a test's browser
    context to that test's ``Screens``; the context names itself in the ``X-Browser-Context`` header."""

    HEADER = "X-Browser-Context"

    def __init__(self, app) -> None:
        self.app = app
        self.screens: Screens | None = None

    def __call__(self, environ, start_response):
        screens, tag = self.screens, environ.get("HTTP_X_BROWSER_CONTEXT")
        # Only what the browser shows as a page (not a favicon's 404 page, nor a script's fetch).
        if screens is None or tag is None or environ.get("HTTP_SEC_FETCH_DEST") != "document":
            return self.app(environ, start_response)
        sent = {}

        def start(status, headers, exc_info=None):
            sent["status"], sent["headers"] = int(status.split()[0]), headers
            return start_response(status, headers, exc_info)

        answer = self.app(environ, start)
        try:
            body = b"".join(answer)
        finally:
            if hasattr(answer, "close"):
                answer.close()
        content_type = next((v for k, v in sent["headers"] if k.lower() == "content-type"), "")
        if content_type.startswith("text/html") and not 300 <= sent["status"] < 400:
            query = environ.get("QUERY_STRING")
            screens.note(int(tag), environ.get("PATH_INFO", "/") + (f"?{query}" if query else ""), sent["status"], body)
        return [body]


_SCREENS: dict[object, Screens] = {}


def remember(page, screens: Screens | None) -> None:
    """Tie a page to its test's screenshots (None: forget it)."""
    if screens is None:
        _SCREENS.pop(page, None)
    else:
        _SCREENS[page] = screens


def shot(page, name: str) -> Path:
    """Save a full-page screenshot of ``page`` now, numbered among the test's pages."""
    return _SCREENS[page].shot(page, name)


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
