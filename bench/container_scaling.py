"""Container read and entry add at 10, 10 000 and 100 000 entries, as ratios to the 10-entry case.

    .venv/bin/python bench/container_scaling.py [REPEATS]        # default 30 timed calls per case

Fills a fresh SQLite database (alembic schema; entries inserted in bulk, then the running totals
set from them as migration 0008 would) with three containers of 10, 10 000 and 100 000 entries,
and times through the app's test client: ``GET /api/v1/waste_containers/<id>`` and
``POST /api/v1/waste_containers/<id>/entries`` (the adds are kept: a few dozen entries of 1 mL do
not change the sizes compared). Prints the median of each as a ratio to the 10-entry container; the goal is ≤ 1.5×.
With DOTLEDGER_BENCH_POSTGRES_URL set (e.g. postgresql+psycopg://postgres@127.0.0.1:5432/test)
the same runs on PostgreSQL, in a schema of its own that is dropped afterwards.
"""

from __future__ import annotations

import datetime as dt
import os
import statistics
import sys
import tempfile
import time
import uuid
from pathlib import Path

from sqlalchemy import create_engine, insert, text

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from service.app import create_app  # noqa: E402
from service.schemas import UserIn  # noqa: E402
from service.store import identity  # noqa: E402
from service.store.db import session_scope, upgrade  # noqa: E402
from service.store.models import Lab, Location, WasteContainer, WasteEntry, WasteEntryElement  # noqa: E402

SIZES = (10, 10_000, 100_000)
BATCH = 20_000
ENTRY = {"description": "bench wash", "volume": "1 mL", "elements": [{"element": "Cd", "mass": "0.01 mg"}]}


def fill(engine, sizes: tuple[int, ...] = SIZES) -> dict[int, int]:
    """One container per size, its entries and their Cd rows; returns {size: container id}."""
    now = dt.datetime(2026, 1, 1, tzinfo=dt.timezone.utc)
    with engine.begin() as conn:
        conn.execute(insert(Lab), [{"id": 1, "code": "B-1", "name": "Bench lab", "created_at": now, "updated_at": now}])
        conn.execute(insert(Location), [{"id": 1, "lab_id": 1, "building": "B", "room": "B-1", "storage": "SAA",
                                         "kind": "satellite_accumulation_area", "created_at": now, "updated_at": now}])
        conn.execute(insert(WasteContainer), [
            {"id": n, "label": f"B-W{size}", "lab_id": 1, "location_id": 1,
             "stream": "non_halogenated_solvent_heavy_metals", "form": "liquid", "capacity_text": "1000 L",
             "capacity_micro": 1_000_000_000, "acute_hazardous": False, "state": "open", "created_at": now,
             "updated_at": now} for n, size in enumerate(sizes, start=1)])
        next_id = 1
        for container_id, size in enumerate(sizes, start=1):
            for first in range(0, size, BATCH):
                ids = range(next_id + first, next_id + min(first + BATCH, size))
                conn.execute(insert(WasteEntry), [{"id": i, "container_id": container_id, "description": "bench",
                                                   "volume_ul": 1000, "mass_ug": 0, "at": now} for i in ids])
                conn.execute(insert(WasteEntryElement), [{"entry_id": i, "element": "Cd", "mass_ug": 10} for i in ids])
            next_id += size
        # The running totals, as migration 0008 computes them for existing entries.
        conn.execute(text("DELETE FROM waste_container_elements"))
        conn.execute(text("DELETE FROM waste_container_totals"))
        conn.execute(text(
            "INSERT INTO waste_container_totals (container_id, entries, volume_ul, mass_ug, solids_percent_ul_e6) "
            "SELECT container_id, COUNT(*), SUM(volume_ul), SUM(mass_ug), 0 FROM waste_entries GROUP BY container_id"))
        conn.execute(text(
            "INSERT INTO waste_container_elements (container_id, element, mass_ug) "
            "SELECT e.container_id, x.element, SUM(x.mass_ug) FROM waste_entry_elements x "
            "JOIN waste_entries e ON e.id = x.entry_id GROUP BY e.container_id, x.element"))
        if engine.dialect.name == "postgresql":  # explicit ids leave the sequences behind
            for table in ("labs", "locations", "waste_containers", "waste_entries"):
                conn.execute(text(f"SELECT setval(pg_get_serial_sequence('{table}', 'id'), (SELECT MAX(id) FROM {table}))"))
    if engine.dialect.name == "postgresql":  # planner statistics, as autovacuum would gather them
        with engine.connect().execution_options(isolation_level="AUTOCOMMIT") as conn:
            conn.execute(text("ANALYZE"))
    return {size: n for n, size in enumerate(sizes, start=1)}


def medians(calls: dict[int, object], repeats: int) -> dict[int, float]:
    """Median seconds of each call; the calls take turns, so a busy moment of the machine hits all alike."""
    times: dict[int, list[float]] = {key: [] for key in calls}
    for call in calls.values():
        call()  # warm up (statement caches, the first connection)
    for _ in range(repeats):
        for key, call in calls.items():
            t0 = time.perf_counter()
            call()
            times[key].append(time.perf_counter() - t0)
    return {key: statistics.median(values) for key, values in times.items()}


def filled_app(url: str, filler=fill):
    """The app on a migrated database that ``filler(engine)`` filled, and an administrator's bearer token:
    (app, what ``filler`` returned, test client, headers)."""
    upgrade(url)
    app = create_app({"DATABASE_URL": url, "TESTING": True})
    ids = filler(app.extensions["dotledger.engine"])
    with session_scope(app.extensions["dotledger.sessions"]) as session:
        admin = identity.create_user(session, UserIn(email="bench@example.org", display_name="bench", role="admin",
                                                     password="correct horse battery"))
        token = identity.issue_token(session, admin, "bench").secret
    return app, ids, app.test_client(), {"Authorization": f"Bearer {token}"}


def measure(url: str, repeats: int) -> dict[int, tuple[float, float]]:
    """{size: (median read s, median add s)} on the database at ``url``."""
    app, ids, client, headers = filled_app(url)
    engine = app.extensions["dotledger.engine"]

    def call(method: str, path: str, expect: int, **body):
        def timed() -> None:
            status = client.open(path, method=method, headers=headers, **body).status_code
            if status != expect:
                raise RuntimeError(f"{method} {path} answered {status}")
        return timed

    def read(cid: int):
        return call("GET", f"/api/v1/waste_containers/{cid}", 200)

    def add(cid: int):
        return call("POST", f"/api/v1/waste_containers/{cid}/entries", 201, json=ENTRY)

    reads = medians({size: read(cid) for size, cid in ids.items()}, repeats)
    adds = medians({size: add(cid) for size, cid in ids.items()}, repeats)
    results = {size: (reads[size], adds[size]) for size in ids}
    engine.dispose()
    return results


def report(name: str, results: dict[int, tuple[float, float]]) -> None:
    base_read, base_add = results[SIZES[0]]
    print(f"{name}: median time as a ratio to the {SIZES[0]}-entry container (goal ≤ 1.5×)")
    print(f"  {'entries':>8}  {'read':>7}  {'add':>7}")
    for size, (read, add) in results.items():
        print(f"  {size:>8}  {read / base_read:6.2f}×  {add / base_add:6.2f}×")


def main() -> None:
    repeats = int(sys.argv[1]) if len(sys.argv) > 1 else 30
    with tempfile.TemporaryDirectory() as folder:
        report("SQLite", measure(f"sqlite:///{Path(folder) / 'bench.sqlite'}", repeats))
    postgres = os.environ.get("DOTLEDGER_BENCH_POSTGRES_URL")
    if postgres:
        schema = f"bench_{uuid.uuid4().hex[:10]}"
        admin = create_engine(postgres)
        with admin.begin() as conn:
            conn.execute(text(f'CREATE SCHEMA "{schema}"'))
        try:
            separator = "&" if "?" in postgres else "?"
            report("PostgreSQL", measure(f"{postgres}{separator}options=-csearch_path%3D{schema}", repeats))
        finally:
            with admin.begin() as conn:
                conn.execute(text(f'DROP SCHEMA "{schema}" CASCADE'))
            admin.dispose()


if __name__ == "__main__":
    main()
