"""Add-entry throughput with 1, 2 and 4 gunicorn worker processes on PostgreSQL, as ratios to 1 worker.

    .venv/bin/python bench/workers.py [ROUNDS]        # default 5 rounds of 240 additions per server

Starts three servers as README's "Running several worker processes" does (``gunicorn -c
python:service.gunicorn_conf -w N``; 1, 2 and 4 workers) on one database, a PostgreSQL schema of its
own (DOTLEDGER_BENCH_POSTGRES_URL, default the test database at 127.0.0.1:5432), dropped afterwards.
Each round sends a burst to each server in turn: 8 client threads, each with its own token and its own
container in an accumulation area of its own (additions into one area queue on the area's row, which
carries its limit clock), 30 ``POST /api/v1/waste_containers/<id>/entries`` each over HTTP; throughput is the burst's
additions per second of wall time. Prints the median of each server's bursts as a ratio to the 1-worker
server. The clients run on the same machine and take CPU from the workers: on a machine with fewer
cores than 4 workers plus the clients, the 4-worker figure says how far the CPUs go, not the design.
Every write also takes the audit chain's head row, so additions from all processes queue there.
"""

from __future__ import annotations

import json
import os
import statistics
import sys
import tempfile
import threading
import time
import urllib.request
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from service.app import create_app  # noqa: E402
from service.schemas import UserIn  # noqa: E402
from service.store import identity  # noqa: E402
from service.store.db import session_scope, upgrade  # noqa: E402
from tests.conftest import gunicorn_server, postgres_schema  # noqa: E402  (as the tests start them)

WORKERS = (1, 2, 4)
CLIENTS = 8
PER_CLIENT = 30
ENTRY = {"description": "bench wash", "volume": "1 mL", "elements": [{"element": "Cd", "mass": "0.01 mg"}]}


def prepare(url: str) -> list[tuple[str, int]]:
    """Schema, a lab, and per client a token, an accumulation area and a 1000 L container in it: [(token, container id)]."""
    upgrade(url)
    app = create_app({"DATABASE_URL": url, "TESTING": True})
    client = app.test_client()
    with session_scope(app.extensions["dotledger.sessions"]) as session:
        admin = identity.create_user(session, UserIn(email="bench@example.org", display_name="bench", role="admin",
                                                     password="correct horse battery"))
        tokens = [identity.issue_token(session, admin, f"bench {n}").secret for n in range(CLIENTS + 1)]

    def post(path: str, body: dict) -> dict:
        response = client.post(f"/api/v1{path}", json=body, headers={"Authorization": f"Bearer {tokens[-1]}"})
        if response.status_code != 201:
            raise RuntimeError(f"POST {path} answered {response.status_code}: {response.get_json()}")
        return response.get_json()

    lab = post("/labs", {"code": "B-1", "name": "Bench lab"})["id"]
    containers = []
    for n in range(CLIENTS):
        area = post("/locations", {"lab_id": lab, "building": "B", "room": f"B-{n}", "storage": "hood SAA",
                                   "kind": "satellite_accumulation_area"})["id"]
        containers.append(post("/waste_containers", {"label": f"B-W{n}", "lab_id": lab, "location_id": area,
                                                     "stream": "non_halogenated_solvent_heavy_metals",
                                                     "capacity": "1000 L"})["id"])
    app.extensions["dotledger.engine"].dispose()
    return list(zip(tokens, containers))


def burst(port: int, clients: list[tuple[str, int]]) -> float:
    """Additions per second: every client adds PER_CLIENT entries to its own container, all at once."""
    failures: list[str] = []

    def client(token: str, container: int) -> None:
        body = json.dumps(ENTRY).encode()
        for _ in range(PER_CLIENT):
            request = urllib.request.Request(f"http://127.0.0.1:{port}/api/v1/waste_containers/{container}/entries",
                                             data=body, method="POST", headers={"Content-Type": "application/json",
                                                                               "Authorization": f"Bearer {token}"})
            try:
                with urllib.request.urlopen(request, timeout=60) as response:
                    response.read()
            except OSError as exc:
                failures.append(str(exc))

    threads = [threading.Thread(target=client, args=pair) for pair in clients]
    t0 = time.perf_counter()
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    elapsed = time.perf_counter() - t0
    if failures:
        raise RuntimeError(f"{len(failures)} additions failed, e.g. {failures[0]}")
    return len(clients) * PER_CLIENT / elapsed


def measure(url: str, rounds: int, folder: Path) -> dict[int, float]:
    """{workers: median additions per second}; the servers take turns in every round."""
    clients = prepare(url)
    rates: dict[int, list[float]] = {n: [] for n in WORKERS}
    with gunicorn_server(url, 1, folder) as (one, _), gunicorn_server(url, 2, folder) as (two, _), \
            gunicorn_server(url, 4, folder) as (four, _):
        ports = dict(zip(WORKERS, (one, two, four)))
        for port in ports.values():
            burst(port, clients)  # warm up: every worker's first requests, connections, caches
        for _ in range(rounds):
            for n, port in ports.items():
                rates[n].append(burst(port, clients))
    return {n: statistics.median(values) for n, values in rates.items()}


def main() -> None:
    rounds = int(sys.argv[1]) if len(sys.argv) > 1 else 5
    postgres = os.environ.get("DOTLEDGER_BENCH_POSTGRES_URL", "postgresql+psycopg://postgres@127.0.0.1:5432/test")
    with postgres_schema(postgres) as url, tempfile.TemporaryDirectory() as folder:
        rates = measure(url, rounds, Path(folder))
    print(f"PostgreSQL, {os.cpu_count()} CPUs: add-entry throughput as a ratio to 1 worker process "
          f"({CLIENTS} clients, median of {rounds} bursts of {CLIENTS * PER_CLIENT} additions)")
    for n, rate in rates.items():
        print(f"  {n} worker{'s' if n > 1 else ' '}  {rate / rates[1]:5.2f}×  ({rate:.0f} additions/s)  "
              f"reproduce: .venv/bin/python bench/workers.py {rounds}")


if __name__ == "__main__":
    main()
