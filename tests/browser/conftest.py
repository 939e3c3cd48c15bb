"""Browser tests: the demo scenario served on 127.0.0.1 and Debian's Chromium driven by Playwright.

One server and one browser for the whole session; every test gets fresh browser contexts (no shared
cookies). Every page a test visits is saved as a full-page screenshot under
``build/screens/<test name>/<NN>-<page>.png`` for a person to look through.

Chromium is the system's (/usr/bin/chromium, ``bash requirements/system.sh test``), never a download.
Without it the tests are skipped with the reason, except under CI (``CI=true``), where that is an error.
"""

from __future__ import annotations

import os
import threading
from dataclasses import dataclass, field

import pytest
from click.testing import CliRunner
from playwright.sync_api import sync_playwright
from sqlalchemy import select
from werkzeug.serving import make_server

from service.cli import main as cli
from service.store.db import session_scope
from service.store.models import Lab, Mixture, Procedure, Run, Stock, WasteContainer
from tests.browser.browsing import ACCOUNTS, CHROMIUM, CHROMIUM_ARGS, PASSWORD, PageNotes, Screens, remember
from tests.conftest import make_app, make_user


def _unavailable(reason: str):
    if os.environ.get("CI") == "true":
        pytest.fail(f"browser tests need {reason} under CI: bash requirements/system.sh test", pytrace=False)
    pytest.skip(f"browser tests need {reason} (bash requirements/system.sh test)")


@dataclass
class LiveServer:
    url: str
    app: object
    notes: PageNotes
    ids: dict[str, int] = field(default_factory=dict)

    def at(self, path: str) -> str:
        return self.url + path


@pytest.fixture(scope="session")
def live_server(tmp_path_factory, rules_dir):
    """The app on a fresh SQLite file with the demo scenario (loaded as ``dotledger demo`` loads it)
    and one account per role, served by werkzeug in a daemon thread on a free port."""
    url = f"sqlite:///{tmp_path_factory.mktemp('browser') / 'browser.sqlite'}"
    result = CliRunner().invoke(cli, ["demo"], env={"DOTLEDGER_DATABASE_URL": url})
    assert result.exit_code == 0, result.output
    app = make_app(url, rules_dir)
    with session_scope(app.extensions["dotledger.sessions"]) as session:
        lab_id = session.scalar(select(Lab.id).where(Lab.code == "C-214"))
        ids = {
            "lab": lab_id,
            "cdse": session.scalar(select(Procedure.id).where(Procedure.title == "CdSe cores by hot injection")),
            "container": session.scalar(select(WasteContainer.id).where(WasteContainer.label == "NG-W01")),
            "run": session.scalar(select(Run.id).order_by(Run.id)),
            "cadmium oxide": session.scalar(select(Stock.id).where(Stock.label == "NG-0001")),
            "1-octadecene": session.scalar(select(Stock.id).where(Stock.label == "NG-0010")),
            "oleic acid": session.scalar(select(Stock.id).where(Stock.label == "NG-0011")),
            "TOP-Se": session.scalar(select(Mixture.id).where(Mixture.label == "NG-M02")),
        }
    assert all(ids.values()), ids
    for role, (email, member) in ACCOUNTS.items():
        make_user(app, email, role, [lab_id] if member else [], password=PASSWORD)
    notes = PageNotes(app.wsgi_app)
    app.wsgi_app = notes
    server = make_server("127.0.0.1", 0, app, threaded=True)
    thread = threading.Thread(target=server.serve_forever, name="browser-live-server", daemon=True)
    thread.start()
    yield LiveServer(f"http://127.0.0.1:{server.server_port}", app, notes, ids)
    server.shutdown()
    thread.join(timeout=10)
    server.server_close()
    app.extensions["dotledger.engine"].dispose()


@pytest.fixture(scope="session")
def browser():
    """One headless Chromium for the session."""
    if not os.access(CHROMIUM, os.X_OK):
        _unavailable(f"Chromium at {CHROMIUM}")
    playwright = sync_playwright().start()
    try:
        chromium = playwright.chromium.launch(executable_path=CHROMIUM, headless=True, args=CHROMIUM_ARGS)
        yield chromium
        chromium.close()
    finally:
        playwright.stop()


@pytest.fixture
def new_page(browser, live_server, request):
    """A factory of pages, each in its own browser context (own cookies). Every HTML page the server
    sends them is pictured after the test (``Screens``)."""
    screens = Screens(request.node.name)
    live_server.notes.screens = screens
    contexts = []

    def factory(viewport: dict | None = None):
        context = browser.new_context(base_url=live_server.url, viewport=viewport or {"width": 1280, "height": 900},
                                      extra_http_headers={PageNotes.HEADER: str(len(contexts))})
        context.set_default_timeout(10_000)
        contexts.append(context)
        page = context.new_page()
        remember(page, screens)
        return page

    yield factory
    live_server.notes.screens = None
    screens.picture_pages(contexts, live_server.url)
    for context in contexts:
        for page in context.pages:
            remember(page, None)
        context.close()


@pytest.fixture
def page(new_page):
    return new_page()
