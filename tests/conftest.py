"""Shared fixtures: the rules folder, the catalogue, an app on a fresh database.

The ``backend`` fixture runs a test once on SQLite and once on PostgreSQL (each in
its own schema of the ``test`` database). Without a reachable PostgreSQL the second run
is skipped, except under CI (``CI=true``), where a missing server is an error.

``make_app`` on a fresh database starts from a template made once per session and backend by
the same steps (alembic upgrade from an empty database, then the catalogue sync): on SQLite the
template file is copied; on PostgreSQL a schema is taken from a pool of schemas in the template's
state, which a finished test's schema rejoins after its tables are emptied and refilled from the
template (only when its structure still matches the template's; else it is dropped). Tests that
call ``upgrade`` themselves (the migration tests) still start from an empty database.

Passwords are hashed at a low scrypt cost (common practice: Django's testing documentation advises a
fast password hasher for test runs); tests marked ``production_password_cost`` use the service's own.
``DOTLEDGER_TEST_SHORTCUTS=0`` turns both off: every database from the migrations, every password at
the service's cost (the suite as it ran before; what ``bench/test_time.py`` compares against).
"""

from __future__ import annotations

import atexit
import os
import shutil
import tempfile
import secrets
import signal
import socket
import subprocess
import sys
import threading
import time
import urllib.error
import urllib.request
import uuid
from contextlib import contextmanager
from pathlib import Path
from urllib.parse import unquote
from typing import Iterator

import pytest
from sqlalchemy import create_engine, text

from service.app import create_app
from service.chem.substances import load_catalogue
from service.schemas import UserIn
from service.store import identity, inventory
from service.store.db import session_scope, upgrade

ROOT = Path(__file__).resolve().parents[1]
POSTGRES_URL = os.environ.get("DOTLEDGER_TEST_POSTGRES_URL", "postgresql+psycopg://postgres@127.0.0.1:5432/test")
SHORTCUTS = os.environ.get("DOTLEDGER_TEST_SHORTCUTS") != "0"
# scrypt with N = 2**10 instead of 2**15: each hash about 1/32 of the work; the format and the check are the same.
TEST_PASSWORD_METHOD = "scrypt:1024:8:1"


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


def _postgres_schema_url(base: str = POSTGRES_URL) -> tuple[str, str]:
    try:
        engine = create_engine(base)
        schema = f"t_{uuid.uuid4().hex[:12]}"
        with engine.begin() as conn:
            conn.execute(text(f'CREATE SCHEMA "{schema}"'))
        engine.dispose()
    except Exception as exc:  # no server, no driver, no rights
        if os.environ.get("CI") == "true":
            raise RuntimeError(f"PostgreSQL at {base} is needed under CI: {exc}") from exc
        pytest.skip(f"PostgreSQL not reachable at {base}: {exc}")
    return _schema_url(schema, base), schema


@contextmanager
def postgres_schema(base: str = POSTGRES_URL) -> Iterator[str]:
    """The URL of a fresh schema of the PostgreSQL database at ``base``, dropped afterwards (skips, or fails
    under CI, without a server)."""
    url, schema = _postgres_schema_url(base)
    try:
        yield url
    finally:
        engine = create_engine(base)
        with engine.begin() as conn:
            conn.execute(text(f'DROP SCHEMA "{schema}" CASCADE'))
        engine.dispose()


@pytest.fixture(params=["sqlite", pytest.param("postgres", marks=pytest.mark.postgres)])
def database_url(request, tmp_path):
    if request.param == "sqlite":
        yield f"sqlite:///{tmp_path / 'test.sqlite'}"
        return
    url, schema = _postgres_schema_url()
    yield url
    _PG_TEMPLATE.release(schema)


@pytest.fixture
def sqlite_url(tmp_path):
    return f"sqlite:///{tmp_path / 'test.sqlite'}"


def _build(url: str, rules_dir: Path):
    """What a fresh database needs before the app serves: the migrations, then the catalogue."""
    upgrade(url)
    app = create_app({"DATABASE_URL": url, "TESTING": True, "RULES_DIR": str(rules_dir)})
    with session_scope(app.extensions["dotledger.sessions"]) as session:
        inventory.sync_catalogue(session, load_catalogue(rules_dir)[0])
    return app


class _SqliteTemplate:
    """A migrated, catalogue-synced SQLite file per rules folder, made once and copied per test."""

    def __init__(self) -> None:
        self.files: dict[str, Path] = {}
        self.folder: Path | None = None

    def file_for(self, rules_dir: Path) -> Path:
        key = str(Path(rules_dir).resolve())
        if key not in self.files:
            if self.folder is None:
                self.folder = Path(tempfile.mkdtemp(prefix="dotledger-template-"))
                atexit.register(shutil.rmtree, self.folder, True)
            path = self.folder / f"template-{len(self.files)}.sqlite"
            app = _build(f"sqlite:///{path}", rules_dir)
            engine = app.extensions["dotledger.engine"]
            with engine.connect() as conn:  # everything into the main file: the copy takes no -wal file
                conn.exec_driver_sql("PRAGMA wal_checkpoint(TRUNCATE)")
            engine.dispose()
            self.files[key] = path
        return self.files[key]

    def restore(self, url: str, rules_dir: Path) -> bool:
        """Copy the template to the file of ``url`` if that database is new (no file yet)."""
        if "///" not in url or "?" in url or url.endswith(":memory:"):
            return False
        path = Path(url.split("///", 1)[1])
        if path.exists() or Path(f"{path}-wal").exists():
            return False
        template = self.file_for(rules_dir)
        path.parent.mkdir(parents=True, exist_ok=True)
        shutil.copyfile(template, path)
        return True


# The structure of a schema: its tables' columns, constraints, indexes, triggers, functions and the
# alembic revision. A schema whose test changed any of them is dropped, not reused. Run with the
# schema as the search path, so that names print unqualified and two schemas compare equal.
_STRUCTURE = text("""
    SELECT md5(coalesce(string_agg(item, ';' ORDER BY item), '')) FROM (
        SELECT c.relname || '.' || a.attname || ':' || format_type(a.atttypid, a.atttypmod)
               || ':' || a.attnotnull || ':' || coalesce(pg_get_expr(d.adbin, d.adrelid), '') AS item
          FROM pg_attribute a JOIN pg_class c ON c.oid = a.attrelid
          JOIN pg_namespace n ON n.oid = c.relnamespace
          LEFT JOIN pg_attrdef d ON d.adrelid = a.attrelid AND d.adnum = a.attnum
         WHERE n.nspname = :schema AND a.attnum > 0 AND NOT a.attisdropped
      UNION ALL
        SELECT t.relname || '#' || co.conname || ':' || pg_get_constraintdef(co.oid)
          FROM pg_constraint co JOIN pg_class t ON t.oid = co.conrelid
          JOIN pg_namespace n ON n.oid = co.connamespace WHERE n.nspname = :schema
      UNION ALL
        SELECT 'index:' || replace(pg_get_indexdef(i.indexrelid), ' ON ' || :schema || '.', ' ON ')
          FROM pg_index i JOIN pg_class c ON c.oid = i.indexrelid
          JOIN pg_namespace n ON n.oid = c.relnamespace WHERE n.nspname = :schema
      UNION ALL
        SELECT 'trigger:' || t.tgname || ':' || c.relname FROM pg_trigger t JOIN pg_class c ON c.oid = t.tgrelid
          JOIN pg_namespace n ON n.oid = c.relnamespace WHERE n.nspname = :schema AND NOT t.tgisinternal
      UNION ALL
        SELECT 'object:' || c.relkind::text || ':' || c.relname FROM pg_class c
          JOIN pg_namespace n ON n.oid = c.relnamespace WHERE n.nspname = :schema
      UNION ALL
        SELECT 'function:' || p.proname || ':' || md5(p.prosrc) FROM pg_proc p
          JOIN pg_namespace n ON n.oid = p.pronamespace WHERE n.nspname = :schema
      UNION ALL
        SELECT 'revision:' || version_num FROM alembic_version
    ) AS parts
""")


def _schema_url(schema: str, base: str = POSTGRES_URL) -> str:
    separator = "&" if "?" in base else "?"
    return f"{base}{separator}options=-csearch_path%3D{schema}"


def _schema_of(url: str) -> str | None:
    marker = "options=-csearch_path%3D"
    return unquote(url.split(marker, 1)[1].split("&", 1)[0]) if marker in url else None


class _PostgresTemplate:
    """Schemas in a template's state (migrated from empty, catalogue synced), per rules folder.

    The template schema is made once per session and never handed out; a test gets a schema of
    the pool (a copy made by the same steps the first time) renamed to its own schema's name.
    When the test ends its schema, if its structure still matches the template's, is emptied
    (every table but alembic_version), refilled from the template's rows, its
    sequences set to the template's, and returned to the pool; otherwise it is dropped.
    """

    def __init__(self) -> None:
        self.templates: dict[str, tuple[str, str]] = {}  # rules folder -> (template schema, structure)
        self.pools: dict[str, list[str]] = {}
        self.handed_out: dict[str, str] = {}  # test schema -> rules folder
        self._engine = None

    @property
    def engine(self):
        if self._engine is None:
            self._engine = create_engine(POSTGRES_URL)
            atexit.register(self._drop_all)
        return self._engine

    def _structure(self, conn, schema: str) -> str:
        conn.execute(text(f'SET LOCAL search_path = "{schema}"'))
        return conn.execute(_STRUCTURE, {"schema": schema}).scalar_one()

    def _new_schema(self, rules_dir: Path) -> str:
        schema = f"p_{uuid.uuid4().hex[:12]}"
        with self.engine.begin() as conn:
            conn.execute(text(f'CREATE SCHEMA "{schema}"'))
        _build(_schema_url(schema), rules_dir).extensions["dotledger.engine"].dispose()
        return schema

    def _template(self, key: str, rules_dir: Path) -> tuple[str, str]:
        if key not in self.templates:
            schema = self._new_schema(rules_dir)
            with self.engine.begin() as conn:
                self.templates[key] = (schema, self._structure(conn, schema))
            self.pools[key] = []
        return self.templates[key]

    def restore(self, url: str, rules_dir: Path) -> bool:
        """Put a schema in the template's state under the name in ``url`` if that schema is empty."""
        schema = _schema_of(url)
        if schema is None or not url.startswith(POSTGRES_URL):
            return False
        with self.engine.begin() as conn:
            objects = conn.execute(text("SELECT count(*) FROM pg_class c JOIN pg_namespace n ON n.oid = c.relnamespace "
                                        "WHERE n.nspname = :schema"), {"schema": schema}).scalar_one()
            if objects:
                return False
        key = str(Path(rules_dir).resolve())
        self._template(key, rules_dir)
        pooled = self.pools[key].pop() if self.pools[key] else self._new_schema(rules_dir)
        with self.engine.begin() as conn:
            conn.execute(text(f'DROP SCHEMA "{schema}"'))
            conn.execute(text(f'ALTER SCHEMA "{pooled}" RENAME TO "{schema}"'))
        self.handed_out[schema] = key
        return True

    def release(self, schema: str) -> None:
        """The end of a test's schema: back to the pool in the template's state, or dropped."""
        key = self.handed_out.pop(schema, None)
        try:
            if key is not None and self._reset(schema, key):
                return
        except Exception:  # noqa: BLE001 - a schema that cannot be reset is dropped like any other
            pass
        with self.engine.begin() as conn:
            conn.execute(text(f'DROP SCHEMA "{schema}" CASCADE'))

    def _reset(self, schema: str, key: str) -> bool:
        template, structure = self.templates[key]
        with self.engine.begin() as conn:
            conn.execute(text("SET LOCAL lock_timeout = '10s'"))
            if self._structure(conn, schema) != structure:
                return False
            tables = conn.execute(text("SELECT tablename FROM pg_tables WHERE schemaname = :schema "
                                       "AND tablename <> 'alembic_version'"), {"schema": template}).scalars().all()
            # No trigger fires while the tables are emptied and refilled (the audit trail's guards, the foreign
            # keys: the rows are the template's, which kept them), so the tables go in any order. DELETE, not
            # TRUNCATE: a test leaves few rows, and TRUNCATE makes every table's files anew.
            conn.execute(text("SET LOCAL session_replication_role = replica"))
            conn.execute(text("; ".join(f'DELETE FROM "{schema}"."{t}"; INSERT INTO "{schema}"."{t}" '
                                        f'SELECT * FROM "{template}"."{t}"' for t in tables)))
            sequences = conn.execute(text("SELECT sequencename, last_value FROM pg_sequences WHERE schemaname = :schema"),
                                     {"schema": template}).all()
            for name, last_value in sequences:
                if last_value is None:  # never used: back to its start
                    conn.execute(text(f'ALTER SEQUENCE "{schema}"."{name}" RESTART'))
                else:
                    conn.execute(text("SELECT setval(CAST(:name AS regclass), :value, true)"),
                                 {"name": f'"{schema}"."{name}"', "value": last_value})
            pooled = f"p_{uuid.uuid4().hex[:12]}"
            conn.execute(text(f'ALTER SCHEMA "{schema}" RENAME TO "{pooled}"'))
        self.pools[key].append(pooled)
        return True

    def _drop_all(self) -> None:
        schemas = [schema for schema, _ in self.templates.values()] + [s for pool in self.pools.values() for s in pool]
        try:
            with self._engine.begin() as conn:
                for schema in schemas:
                    conn.execute(text(f'DROP SCHEMA IF EXISTS "{schema}" CASCADE'))
            self._engine.dispose()
        except Exception:  # the server went away: nothing left to tidy
            pass


_SQLITE_TEMPLATE = _SqliteTemplate()
_PG_TEMPLATE = _PostgresTemplate()


def make_app(url: str, rules_dir: Path):
    """An app on ``url``, migrated and with the catalogue synced (from the session's template when ``url``
    names a database that is still empty)."""
    template = _SQLITE_TEMPLATE if url.startswith("sqlite") else _PG_TEMPLATE
    if not SHORTCUTS or not template.restore(url, rules_dir):
        return _build(url, rules_dir)
    return create_app({"DATABASE_URL": url, "TESTING": True, "RULES_DIR": str(rules_dir)})


@pytest.fixture(autouse=True)
def _password_cost(request, monkeypatch):
    """The low test cost for every password hashed in this process, unless the test is marked otherwise."""
    if SHORTCUTS and request.node.get_closest_marker("production_password_cost") is None:
        monkeypatch.setattr(identity, "PASSWORD_METHOD", TEST_PASSWORD_METHOD)


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


def http_post(port: int, path: str, body: dict, token: str) -> int:
    """POST ``body`` as JSON to ``/api/v1<path>`` of a server on 127.0.0.1:``port``; the answer's status."""
    import json
    import urllib.error
    import urllib.request

    request = urllib.request.Request(f"http://127.0.0.1:{port}/api/v1{path}", data=json.dumps(body).encode(),
                                     method="POST", headers={"Content-Type": "application/json",
                                                             "Authorization": f"Bearer {token}"})
    try:
        with urllib.request.urlopen(request, timeout=60) as response:
            return response.status
    except urllib.error.HTTPError as exc:
        return exc.code


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
        threads_against_port(server.effective_port, worker, count, timeout=timeout)
    finally:
        stop.set()
        loop.join(timeout=30)


def gunicorn_workers(master: int) -> set[int]:
    """The worker processes of the gunicorn master ``master`` (Linux: its children in /proc)."""
    try:
        return {int(p) for p in Path(f"/proc/{master}/task/{master}/children").read_text().split()}
    except OSError:
        return set()


@contextmanager
def gunicorn_server(database_url: str, workers: int, folder: Path, *, timeout: float = 60) -> Iterator[tuple[int, int]]:
    """Serve dotledger as README's "Running several worker processes" says: ``gunicorn -c
    python:service.gunicorn_conf -w WORKERS`` on a free port of 127.0.0.1, the database (migrated and
    filled by the caller) and a fresh session key in the environment, the log in ``folder``.

    Yields (port, master pid) once every worker is up and the server answers; then stops the master
    with SIGTERM (gunicorn's graceful shutdown) and fails unless it exits with status 0.
    """
    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        port = probe.getsockname()[1]
    env = {k: v for k, v in os.environ.items() if not k.startswith("DOTLEDGER_")}
    env.update(DOTLEDGER_DATABASE_URL=database_url, DOTLEDGER_SECRET_KEY=secrets.token_hex(32),
               DOTLEDGER_INSTANCE_PATH=str(folder / "instance"), DOTLEDGER_RULES_DIR=str(ROOT / "rules"))
    log = folder / f"gunicorn-{port}.log"
    with open(log, "wb") as output:
        server = subprocess.Popen([sys.executable, "-m", "gunicorn", "-c", "python:service.gunicorn_conf",
                                   "-w", str(workers), "-b", f"127.0.0.1:{port}"],
                                  cwd=ROOT, env=env, stdout=output, stderr=subprocess.STDOUT)
    try:
        deadline = time.monotonic() + timeout
        while True:
            if server.poll() is not None:
                raise RuntimeError(f"gunicorn exited with status {server.returncode}:\n{log.read_text()[-3000:]}")
            if time.monotonic() > deadline:
                raise RuntimeError(f"gunicorn did not answer within {timeout} s:\n{log.read_text()[-3000:]}")
            if len(gunicorn_workers(server.pid)) == workers:
                try:
                    with urllib.request.urlopen(f"http://127.0.0.1:{port}/api/v1/", timeout=5):
                        break
                except urllib.error.HTTPError:
                    break  # an answer, even a refusal, means the server is up
                except OSError:
                    pass
            time.sleep(0.1)
        yield port, server.pid
    finally:
        server.send_signal(signal.SIGTERM)
        try:
            status = server.wait(timeout=30)
        except subprocess.TimeoutExpired:
            server.kill()
            server.wait()
            raise RuntimeError(f"gunicorn did not stop within 30 s of SIGTERM:\n{log.read_text()[-3000:]}") from None
    if status != 0:
        raise RuntimeError(f"gunicorn stopped with status {status}:\n{log.read_text()[-3000:]}")


def threads_against_port(port: int, worker, count: int, *, timeout: float = 300) -> None:
    """Run ``worker(port, n)`` for n < count in as many threads at once; returns when every thread is done."""
    threads = [threading.Thread(target=worker, args=(port, n)) for n in range(count)]
    for t in threads:
        t.start()
    for t in threads:
        t.join(timeout=timeout)
