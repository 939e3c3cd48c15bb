"""Several worker processes (gunicorn, README "Running several worker processes").

The concurrent-additions scenario of tests/test_waste.py runs again against 4 gunicorn worker
processes on PostgreSQL: no addition lost, none beyond the capacity, the running totals equal a
fresh SUM, the audit chain intact. The master refuses, before any worker starts, the settings that
several processes cannot share: SQLite (one file lock for every writer) and a session key that each
process would read or make on its own.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import urllib.error
import urllib.request

import pytest

from service.store.db import upgrade

from tests.conftest import ROOT, gunicorn_server, gunicorn_workers, postgres_schema, threads_against_port
from tests.test_waste import concurrent_additions_are_never_lost, site  # noqa: F401  (site: the fixture)

pytestmark = pytest.mark.skipif(not sys.platform.startswith("linux"), reason="gunicorn_server counts workers in /proc")


@pytest.fixture
def database_url():
    """PostgreSQL only (a schema of its own); several processes on SQLite are refused (tests below).

    Without a reachable server the test that uses it is skipped; under CI=true that is an error."""
    with postgres_schema() as url:
        yield url


@pytest.mark.postgres
@pytest.mark.slow
def test_four_worker_processes_never_lose_an_addition(app, site, database_url, tmp_path):  # noqa: F811
    with gunicorn_server(database_url, 4, tmp_path) as (port, master):
        workers = gunicorn_workers(master)
        concurrent_additions_are_never_lost(app, site, lambda worker, count: threads_against_port(port, worker, count))
        # The same four processes at the end: none died or was restarted (a timeout) during the run.
        assert len(workers) == 4 and gunicorn_workers(master) == workers


def _start(tmp_path, workers: int, **env: str) -> subprocess.CompletedProcess:
    """gunicorn as README's recipe starts it, expected to stop on its own (a refusal) within 60 s."""
    environment = {k: v for k, v in os.environ.items() if not k.startswith("DOTLEDGER_")}
    environment.update(DOTLEDGER_INSTANCE_PATH=str(tmp_path / "instance"), **env)
    return subprocess.run([sys.executable, "-m", "gunicorn", "-c", "python:service.gunicorn_conf", "-w", str(workers),
                           "-b", "127.0.0.1:0"], cwd=ROOT, env=environment, capture_output=True, text=True, timeout=60)


def test_several_workers_on_sqlite_are_refused(tmp_path):
    result = _start(tmp_path, 2, DOTLEDGER_SECRET_KEY="k" * 64)
    assert result.returncode == 1, result.stderr[-2000:]
    assert "DOTLEDGER_DATABASE_URL is SQLite" in result.stderr and "2 worker processes need PostgreSQL" in result.stderr
    assert "Booting worker" not in result.stderr  # refused in the master, before any worker


def test_several_workers_without_a_session_key_are_refused(tmp_path):
    # The check needs no server: the URL is only read, never connected to.
    result = _start(tmp_path, 4, DOTLEDGER_DATABASE_URL="postgresql+psycopg://nobody@127.0.0.1:1/none")
    assert result.returncode == 1, result.stderr[-2000:]
    assert "DOTLEDGER_SECRET_KEY is not set: 4 worker processes" in result.stderr
    assert "Booting worker" not in result.stderr
    assert not (tmp_path / "instance" / "secret_key").exists()  # no key made that one process alone would know


def test_one_worker_on_sqlite_is_allowed(tmp_path):
    # Beside the boundary: one process is what SQLite serves; the sign-in reads and writes the file.
    url = f"sqlite:///{tmp_path / 'one.sqlite'}"
    upgrade(url)
    with gunicorn_server(url, 1, tmp_path) as (port, _master):
        body = json.dumps({"email": "nobody@example.org", "password": "not the password", "name": "x"}).encode()
        request = urllib.request.Request(f"http://127.0.0.1:{port}/api/v1/auth/tokens", data=body, method="POST",
                                         headers={"Content-Type": "application/json"})
        with pytest.raises(urllib.error.HTTPError) as refused:
            urllib.request.urlopen(request, timeout=30)
        assert refused.value.code == 401 and "error" in json.loads(refused.value.read())
