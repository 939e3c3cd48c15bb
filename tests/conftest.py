"""Shared fixtures: the rules folder, the catalogue, an app on a fresh database.

The ``backend`` fixture runs a test once on SQLite and once on PostgreSQL (each in
its own schema of the ``test`` database). Without a reachable PostgreSQL the second run
is skipped, except under CI (``CI=true``), where a missing server is an error.
"""

from __future__ import annotations

import os
import threading
import uuid
from pathlib import Path

import pytest
from sqlalchemy import create_engine, text

from service.app import create_app
from service.chem.substances import load_catalogue
from service.schemas import UserIn
from service.store import identity, inventory
from service.store.db import session_scope, upgrade

ROOT = Path(__file__).resolve().parents[1]
POSTGRES_URL = os.environ.get("DOTLEDGER_TEST_POSTGRES_URL", "postgresql+psycopg://postgres@127.0.0.1:5432/test")


# nodeid -> "sqlite" | "postgres" for the tests that run on both databases (the ``database_url`` fixture).
_BACKEND_OF: dict[str, str] = {}
_OUTCOME_RANK = {"passed": 0, "skipped": 1, "failed": 2, "error": 2}


def pytest_collection_modifyitems(items):
    for item in items:
        callspec = getattr(item, "callspec", None)
        if callspec is not None and "database_url" in callspec.params:
            _BACKEND_OF[item.nodeid] = callspec.params["database_url"]


def pytest_terminal_summary(terminalreporter):
    """One line with the number of tests run on each database, so a skipped PostgreSQL half shows."""
    outcome_of: dict[str, str] = {}
    for outcome in _OUTCOME_RANK:
        for report in terminalreporter.stats.get(outcome, []):
            nodeid = getattr(report, "nodeid", "")
            if nodeid in _BACKEND_OF and _OUTCOME_RANK[outcome] >= _OUTCOME_RANK[outcome_of.get(nodeid, "passed")]:
                outcome_of[nodeid] = outcome
    if not outcome_of:
        return
    parts = []
    for backend, label in (("sqlite", "SQLite"), ("postgres", "PostgreSQL")):
        counts = {o: 0 for o in ("passed", "failed", "skipped")}
        for nodeid, outcome in outcome_of.items():
            if _BACKEND_OF[nodeid] == backend:
                counts["failed" if outcome == "error" else outcome] += 1
        parts.append(f"{label} {counts['passed']} passed, {counts['failed']} failed, {counts['skipped']} skipped")
    terminalreporter.write_line("tests run on each database: " + "; ".join(parts))


@pytest.fixture(scope="session")
def rules_dir() -> Path:
    return ROOT / "rules"


@pytest.fixture(scope="session")
def catalogue(rules_dir):
    return load_catalogue(rules_dir)[0]


def _postgres_schema_url() -> tuple[str, str]:
    try:
        engine = create_engine(POSTGRES_URL)
        schema = f"t_{uuid.uuid4().hex[:12]}"
        with engine.begin() as conn:
            conn.execute(text(f'CREATE SCHEMA "{schema}"'))
        engine.dispose()
    except Exception as exc:  # no server, no driver, no rights
        if os.environ.get("CI") == "true":
            raise RuntimeError(f"PostgreSQL at {POSTGRES_URL} is needed under CI: {exc}") from exc
        pytest.skip(f"PostgreSQL not reachable at {POSTGRES_URL}: {exc}")
    separator = "&" if "?" in POSTGRES_URL else "?"
    return f"{POSTGRES_URL}{separator}options=-csearch_path%3D{schema}", schema


@pytest.fixture(params=["sqlite", pytest.param("postgres", marks=pytest.mark.postgres)])
def database_url(request, tmp_path):
    if request.param == "sqlite":
        yield f"sqlite:///{tmp_path / 'test.sqlite'}"
        return
    url, schema = _postgres_schema_url()
    yield url
    engine = create_engine(POSTGRES_URL)
    with engine.begin() as conn:
        conn.execute(text(f'DROP SCHEMA "{schema}" CASCADE'))
    engine.dispose()


@pytest.fixture
def sqlite_url(tmp_path):
    return f"sqlite:///{tmp_path / 'test.sqlite'}"


def make_app(url: str, rules_dir: Path):
    upgrade(url)
    app = create_app({"DATABASE_URL": url, "TESTING": True, "RULES_DIR": str(rules_dir)})
    with session_scope(app.extensions["dotledger.sessions"]) as session:
        inventory.sync_catalogue(session, load_catalogue(rules_dir)[0])
    return app


@pytest.fixture
def app(database_url, rules_dir):
    app = make_app(database_url, rules_dir)
    yield app
    app.extensions["dotledger.engine"].dispose()


@pytest.fixture
def client(app):
    return app.test_client()


def make_user(app, email: str, role: str, lab_ids=(), password: str = "correct horse battery") -> str:
    """Create a user directly and return a fresh personal token for them."""
    with session_scope(app.extensions["dotledger.sessions"]) as session:
        user = identity.create_user(session, UserIn(email=email, display_name=email.split("@")[0], role=role,
                                                    password=password, lab_ids=list(lab_ids)))
        return identity.issue_token(session, user, "test").secret


class Api:
    """A small helper over the test client that sends a bearer token and checks the
    error shape on every 4xx."""

    def __init__(self, client, token: str | None = None) -> None:
        self.client = client
        self.token = token

    def as_(self, token: str | None) -> "Api":
        return Api(self.client, token)

    def call(self, method: str, path: str, json=None, expect: int = 200):
        headers = {"Authorization": f"Bearer {self.token}"} if self.token else {}
        response = self.client.open(f"/api/v1{path}", method=method, json=json, headers=headers)
        assert response.status_code == expect, (response.status_code, response.get_json())
        body = response.get_json()
        if response.status_code >= 400:
            assert set(body) == {"error"} and {"code", "message", "details"} <= set(body["error"]), body
        return body

    def substance_id(self, name: str) -> int:
        items = self.call("GET", "/substances?limit=500")["items"]
        return next(s["id"] for s in items if s["name"] == name)

    def lab_and_location(self) -> tuple[int, int]:
        lab = self.call("POST", "/labs", {"code": "B-101", "name": "Test group", "building": "B"}, 201)
        place = self.call("POST", "/locations", {"lab_id": lab["id"], "building": "B", "room": "B-101",
                                                  "storage": "cabinet 1"}, 201)
        return lab["id"], place["id"]


@pytest.fixture
def api(app, client) -> Api:
    """The API as a site administrator."""
    return Api(client, make_user(app, "admin@test.example", "admin"))


def threads_against_server(app, worker, count: int, *, timeout: float = 300) -> None:
    """Serve ``app`` over real HTTP (waitress, 8 threads) and run ``worker(port, n)`` for n < count in
    as many threads at once; returns when every thread is done (or ``timeout`` seconds passed)."""
    from waitress.server import create_server

    server = create_server(app, host="127.0.0.1", port=0, threads=8)
    stop = threading.Event()

    def serve() -> None:
        # The loop polls in short slices and closes the server in this same thread: closing it from
        # another thread while the loop sits in select() fails with "Bad file descriptor".
        while not stop.is_set():
            server.asyncore.loop(timeout=0.05, map=server._map, count=1)
        server.task_dispatcher.shutdown()
        server.asyncore.close_all(server._map)  # the listening socket, the wake-up trigger, open channels

    loop = threading.Thread(target=serve, name="waitress-loop", daemon=True)
    loop.start()
    try:
        workers = [threading.Thread(target=worker, args=(server.effective_port, n)) for n in range(count)]
        for w in workers:
            w.start()
        for w in workers:
            w.join(timeout=timeout)
    finally:
        stop.set()
        loop.join(timeout=30)
