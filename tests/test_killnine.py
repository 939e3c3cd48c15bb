"""kill -9: a real server is killed mid-stream and restarted; no acknowledged waste entry is lost.

A client thread streams waste entries, each with its own Idempotency-Key, and resends an entry whose
answer it did not get (refused connection, reset, timeout) under the same key until it is
acknowledged. The server (`dotledger serve` in a subprocess) is killed with SIGKILL twice while the
stream runs and started again. Afterwards every acknowledged entry must be stored, nothing stored
twice, the container's running totals must equal the sum of its entries, and `dotledger audit-verify`
must pass. The figures are printed (run with -s to see them).
"""

from __future__ import annotations

import http.client
import json
import os
import signal
import socket
import subprocess
import sys
import threading
import time

import pytest
from click.testing import CliRunner

from service.cli import main
from tests.conftest import Api, make_app, make_user
from tests.test_idempotency import open_container

pytestmark = pytest.mark.slow

KILLS = 2
ENTRY_UL, ENTRY_CD_UG = 10_000, 100  # each entry: 10 mL with 0.1 mg Cd
ACKS_BETWEEN_KILLS = 15


def _free_port() -> int:
    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        return probe.getsockname()[1]


def _request(port: int, method: str, path: str, token: str, body=None, headers=None, timeout=5.0):
    connection = http.client.HTTPConnection("127.0.0.1", port, timeout=timeout)
    try:
        connection.request(method, f"/api/v1{path}", body=None if body is None else json.dumps(body),
                           headers={"Authorization": f"Bearer {token}", "Content-Type": "application/json",
                                    **(headers or {})})
        answer = connection.getresponse()
        return answer.status, dict(answer.getheaders()), json.loads(answer.read() or b"null")
    finally:
        connection.close()


class Server:
    def __init__(self, url: str, port: int, log_path) -> None:
        self.url, self.port, self.log_path, self.process = url, port, log_path, None

    def start(self) -> None:
        env = {**os.environ, "DOTLEDGER_DATABASE_URL": self.url}
        with open(self.log_path, "ab") as log:
            self.process = subprocess.Popen(
                [sys.executable, "-c", "from service.console import main; main()", "serve", "--port", str(self.port)],
                env=env, stdout=log, stderr=subprocess.STDOUT)
        deadline = time.monotonic() + 60
        while time.monotonic() < deadline:
            assert self.process.poll() is None, self.log_path.read_text()
            try:
                socket.create_connection(("127.0.0.1", self.port), timeout=0.2).close()
                return
            except OSError:
                time.sleep(0.05)
        raise AssertionError("the server did not start within 60 s:\n" + self.log_path.read_text())

    def kill(self) -> None:
        os.kill(self.process.pid, signal.SIGKILL)
        self.process.wait(timeout=10)


class Stream(threading.Thread):
    """Adds entries one after another; each is resent under its key until acknowledged."""

    def __init__(self, port: int, token: str, container: int, body: dict) -> None:
        super().__init__(daemon=True)
        self.port, self.token, self.container, self.body = port, token, container, body
        self.acknowledged: dict[str, int] = {}  # key -> entry id
        self.replayed = self.retries = 0
        self.unexpected: list = []
        self.stop = threading.Event()

    def run(self) -> None:
        number = 0
        while not self.stop.is_set() and not self.unexpected:
            key = f"kill9-{number:05d}"
            while True:
                try:
                    status, headers, body = _request(self.port, "POST", f"/waste_containers/{self.container}/entries",
                                                     self.token, self.body, {"Idempotency-Key": key})
                except (OSError, http.client.HTTPException):
                    self.retries += 1
                    time.sleep(0.02)
                    continue
                if status == 201:
                    self.acknowledged[key] = body["id"]
                    self.replayed += headers.get("Idempotent-Replayed") == "true"
                elif status == 409 and body["error"]["code"] == "idempotency_key_in_use":
                    time.sleep(0.02)  # the first copy of this request is still being recorded
                    continue
                else:
                    self.unexpected.append((key, status, body))
                break
            number += 1

    def wait_for(self, count: int, timeout: float = 60) -> None:
        deadline = time.monotonic() + timeout
        while len(self.acknowledged) < count and time.monotonic() < deadline and not self.unexpected:
            time.sleep(0.01)
        assert not self.unexpected, self.unexpected
        assert len(self.acknowledged) >= count, f"only {len(self.acknowledged)} of {count} entries acknowledged"


def test_no_acknowledged_entry_is_lost_across_kill_nine(database_url, rules_dir, tmp_path, monkeypatch):
    app = make_app(database_url, rules_dir)
    token = make_user(app, "admin@test.example", "admin")
    api = Api(app.test_client(), token)
    _, container = open_container(api, "K-9", "200 L")
    body = {"description": "acetone washes", "volume": "10 mL",
            "components": [{"substance_id": api.substance_id("acetone"), "volume": "10 mL"}],
            "elements": [{"element": "Cd", "mass": "0.1 mg"}]}
    app.extensions["dotledger.engine"].dispose()

    server = Server(database_url, _free_port(), tmp_path / "server.log")
    server.start()
    stream = Stream(server.port, token, container, body)
    stream.start()
    try:
        for kill in range(KILLS):
            stream.wait_for((kill + 1) * ACKS_BETWEEN_KILLS)
            server.kill()
            server.start()
        stream.wait_for(len(stream.acknowledged) + ACKS_BETWEEN_KILLS)
        stream.stop.set()
        stream.join(timeout=60)
        assert not stream.is_alive() and not stream.unexpected, stream.unexpected

        status, _, listed = _request(server.port, "GET", f"/waste_containers/{container}/entries?limit=500", token)
        assert status == 200 and listed["total"] <= 500
        status, _, read = _request(server.port, "GET", f"/waste_containers/{container}", token)
        assert status == 200
    finally:
        server.kill()

    stored = {entry["id"] for entry in listed["items"]}
    acknowledged = set(stream.acknowledged.values())
    lost = acknowledged - stored
    unacknowledged = stored - acknowledged
    print(f"\nkill -9 on {database_url.split(':')[0]}: {KILLS} kills, {len(acknowledged)} acknowledged, "
          f"{len(lost)} lost, {len(unacknowledged)} stored but never acknowledged, {stream.retries} resends, "
          f"{stream.replayed} answered from the kept key")
    assert not lost
    assert len(acknowledged) == len(stream.acknowledged)  # every key answered with its own entry
    assert not unacknowledged  # a resent entry was recorded once
    # The running totals equal the sum of the entries (each 10 mL with 100 µg Cd, as sent).
    volume_ul = sum(round(entry["volume_ml"] * 1000) for entry in listed["items"])
    cd_ug = sum(row["mass_ug"] for entry in listed["items"] for row in entry["elements"] if row["element"] == "Cd")
    assert volume_ul == ENTRY_UL * len(stored) and cd_ug == ENTRY_CD_UG * len(stored)
    assert read["entries"] == len(stored)
    assert round(read["volume_l"] * 1_000_000) == volume_ul
    assert next(row["mass_ug"] for row in read["elements"] if row["element"] == "Cd") == cd_ug

    monkeypatch.setenv("DOTLEDGER_DATABASE_URL", database_url)
    verified = CliRunner().invoke(main, ["audit-verify"])
    assert verified.exit_code == 0, verified.output
