"""`dotledger backup` / `restore` on both databases, and `audit-verify --expect HASH`.

Independent checks: the SQLite copy is opened with the standard library's sqlite3 module, the
PostgreSQL archive is listed with pg_restore, and the head hash is compared with the audit_head row
read with plain SQL.
"""

from __future__ import annotations

import shutil
import sqlite3
import subprocess
import uuid

import pytest
from click.testing import CliRunner
from sqlalchemy import create_engine, text
from sqlalchemy.engine import make_url

from service.cli import main
from tests.conftest import POSTGRES_URL, Api, make_app, make_user


def _head(url: str) -> tuple[int, str]:
    engine = create_engine(url)
    try:
        with engine.connect() as conn:
            return tuple(conn.execute(text("SELECT last_event_id, last_hash FROM audit_head")).one())
    finally:
        engine.dispose()


def _scalar(url: str, sql: str):
    engine = create_engine(url)
    try:
        with engine.connect() as conn:
            return conn.execute(text(sql)).scalar()
    finally:
        engine.dispose()


def _run(monkeypatch, url: str, *args: str):
    monkeypatch.setenv("DOTLEDGER_DATABASE_URL", url)
    return CliRunner().invoke(main, list(args))


@pytest.fixture
def seeded(database_url, rules_dir):
    """A database with the catalogue, an admin and one lab, made through the API."""
    app = make_app(database_url, rules_dir)
    api = Api(app.test_client(), make_user(app, "admin@test.example", "admin"))
    api.call("POST", "/labs", {"code": "B-1", "name": "Backup test lab"}, 201)
    app.extensions["dotledger.engine"].dispose()
    return database_url


@pytest.fixture
def empty_target(database_url, tmp_path):
    """An empty database of the same kind: a new SQLite file, or a new PostgreSQL database working in
    the same schema name as the source (the archive holds that schema)."""
    if database_url.startswith("sqlite"):
        yield f"sqlite:///{tmp_path / 'restored.sqlite'}"
        return
    if shutil.which("pg_dump") is None:
        pytest.skip("pg_dump is not installed (postgresql-client)")
    name = f"r_{uuid.uuid4().hex[:12]}"
    admin = create_engine(POSTGRES_URL, isolation_level="AUTOCOMMIT")
    with admin.connect() as conn:
        conn.execute(text(f'CREATE DATABASE "{name}"'))
    yield make_url(database_url).set(database=name).render_as_string(hide_password=False)
    with admin.connect() as conn:
        conn.execute(text(f'DROP DATABASE "{name}" WITH (FORCE)'))
    admin.dispose()


def test_backup_then_restore_into_an_empty_database(seeded, empty_target, rules_dir, tmp_path, monkeypatch):
    path = tmp_path / "site.backup"
    done = _run(monkeypatch, seeded, "backup", str(path))
    assert done.exit_code == 0, done.output
    last_id, last_hash = _head(seeded)
    assert last_id > 0 and last_hash in done.output
    assert (tmp_path / "site.backup.head").read_text().strip() == last_hash
    if seeded.startswith("sqlite"):  # a self-contained SQLite file, readable on its own
        with sqlite3.connect(path) as copy:
            assert copy.execute("SELECT name FROM labs").fetchall() == [("Backup test lab",)]
            assert copy.execute("SELECT last_hash FROM audit_head").fetchone() == (last_hash,)
    else:  # a pg_dump archive that lists the labs table's data
        listing = subprocess.run(["pg_restore", "--list", str(path)], capture_output=True, text=True, check=True)
        assert "TABLE DATA" in listing.stdout and " labs " in listing.stdout

    # A write after the backup is not in it.
    app = make_app(seeded, rules_dir)
    Api(app.test_client(), make_user(app, "late@test.example", "admin")).call(
        "POST", "/labs", {"code": "B-2", "name": "Written after the backup"}, 201)
    app.extensions["dotledger.engine"].dispose()

    restored = _run(monkeypatch, empty_target, "restore", str(path))
    assert restored.exit_code == 0, restored.output
    assert "audit chain intact" in restored.output
    assert _scalar(empty_target, "SELECT name FROM labs") == "Backup test lab"
    assert _head(empty_target) == (last_id, last_hash)
    verified = _run(monkeypatch, empty_target, "audit-verify", "--expect", last_hash)
    assert verified.exit_code == 0, verified.output
    assert f"found at event {last_id} (the head)" in verified.output

    # A database that is not empty is never overwritten without --force.
    again = _run(monkeypatch, empty_target, "restore", str(path))
    assert again.exit_code == 1 and "not empty" in again.output
    forced = _run(monkeypatch, empty_target, "restore", "--force", str(path))
    assert forced.exit_code == 0, forced.output
    assert _scalar(empty_target, "SELECT COUNT(*) FROM labs") == 1

    # An existing backup file is not replaced either.
    assert _run(monkeypatch, seeded, "backup", str(path)).exit_code == 1


def test_expect_detects_the_head_rolled_back_with_the_last_event(seeded, rules_dir, monkeypatch):
    last_id, last_hash = _head(seeded)
    # Later events leave the recorded hash in the chain: still intact.
    app = make_app(seeded, rules_dir)
    make_user(app, "second@test.example", "admin")
    app.extensions["dotledger.engine"].dispose()
    later = _run(monkeypatch, seeded, "audit-verify", "--expect", last_hash)
    assert later.exit_code == 0, later.output
    assert "event(s) recorded after it" in later.output

    # Roll back: delete the newest events and point the head at the one before them, consistently.
    new_last, new_hash = _head(seeded)
    engine = create_engine(seeded)
    with engine.begin() as conn:
        conn.execute(text("DELETE FROM audit_events WHERE id >= :first"), {"first": last_id})
        previous = conn.execute(text("SELECT hash FROM audit_events WHERE id = :id"), {"id": last_id - 1}).scalar()
        conn.execute(text("UPDATE audit_head SET last_event_id = :id, last_hash = :hash"),
                     {"id": last_id - 1, "hash": previous})
    engine.dispose()
    plain = _run(monkeypatch, seeded, "audit-verify")
    assert plain.exit_code == 0  # the chain alone cannot tell: it is intact up to its new head
    for kept in (last_hash, new_hash):
        anchored = _run(monkeypatch, seeded, "audit-verify", "--expect", kept)
        assert anchored.exit_code == 1, anchored.output
        assert "does NOT hold the expected head hash" in anchored.output
    unknown = _run(monkeypatch, seeded, "audit-verify", "--expect", "f" * 64)
    assert unknown.exit_code == 1
