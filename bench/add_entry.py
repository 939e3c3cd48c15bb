"""Adding a waste entry, as a ratio to a bare Flask + SQLAlchemy insert of the same rows, on SQLite and PostgreSQL.

    .venv/bin/python bench/add_entry.py [REPEATS]        # default 200 timed calls per case

The baseline is a bare Flask app in the same process: one route that takes the same JSON body and
inserts the same rows (the entry, its element row and its component row) with a plain SQLAlchemy
session on the same database, no checks, no audit. dotledger's ``POST /api/v1/waste_containers/<id>/entries``
runs through its test client with a bearer token (locks, overfill check, running totals, audit
chain, the answer's body). The calls take turns (interleaved) and the medians are compared, at a
container holding 10 and one holding 10 000 earlier entries (flat: the second ratio is the first).
Also prints the SQL statements each request sends. The goal is ≤ 2×.

PostgreSQL: DOTLEDGER_BENCH_POSTGRES_URL, default postgresql+psycopg://postgres@127.0.0.1:5432/test;
the run uses a schema of its own, dropped afterwards (skipped when the server cannot be reached).
"""

from __future__ import annotations

import datetime as dt
import os
import sys
import tempfile
import uuid
from pathlib import Path

from flask import Flask, jsonify, request
from sqlalchemy import create_engine, event, insert, text
from sqlalchemy.orm import sessionmaker

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from bench import container_scaling as scaling  # noqa: E402
from service.store.db import make_engine  # noqa: E402
from service.store.models import Substance, WasteEntry, WasteEntryComponent, WasteEntryElement  # noqa: E402

SIZES = (10, 10_000)
POSTGRES = os.environ.get("DOTLEDGER_BENCH_POSTGRES_URL", "postgresql+psycopg://postgres@127.0.0.1:5432/test")
ENTRY = {"description": "bench wash", "volume": "1 mL", "components": [{"substance_id": 1, "volume": "0.5 mL"}],
         "elements": [{"element": "Cd", "mass": "0.01 mg"}]}


def fill(engine) -> dict[int, int]:
    """Containers of SIZES entries (``container_scaling.fill``) and the solvent the entries name; {size: id}."""
    ids = scaling.fill(engine, SIZES)
    now = dt.datetime(2026, 1, 1, tzinfo=dt.timezone.utc)
    with engine.begin() as conn:
        conn.execute(insert(Substance), [{"id": 1, "key": "bench-acetone", "name": "acetone", "synonyms": [],
                                          "formula": "C3H6O", "cas": "67-64-1", "state": "liquid",
                                          "density_g_per_ml": 0.784, "flash_point_c": -20.0, "hazard": {},
                                          "flags": ["flammable"], "source": "bench (invented)", "origin": "local",
                                          "created_at": now, "updated_at": now}])
    return ids


def bare_app(url: str) -> Flask:
    """The baseline: the same rows inserted by a bare Flask view with a plain SQLAlchemy session."""
    engine = make_engine(url)  # the same connection settings as dotledger's (SQLite: WAL, foreign keys)
    factory = sessionmaker(bind=engine, expire_on_commit=False)
    app = Flask("bare")
    app.extensions["engine"] = engine

    @app.post("/entries/<int:container_id>")
    def add(container_id: int):
        body = request.get_json()
        with factory() as session, session.begin():
            entry = WasteEntry(container_id=container_id, description=body["description"], volume_ul=1000, mass_ug=0,
                               components=[WasteEntryComponent(substance_id=1, volume_ul=500)],
                               elements=[WasteEntryElement(element="Cd", mass_ug=10, basis={"kind": "mass"})])
            session.add(entry)
        return jsonify({"id": entry.id}), 201

    return app


def statements(engine, call) -> int:
    """How many SQL statements one call sends."""
    sent = []

    def count(*_args) -> None:
        sent.append(1)

    event.listen(engine, "before_cursor_execute", count)
    try:
        call()
    finally:
        event.remove(engine, "before_cursor_execute", count)
    return len(sent)


def measure(name: str, url: str, repeats: int) -> None:
    app, ids, client, headers = scaling.filled_app(url, fill)
    engine = app.extensions["dotledger.engine"]
    bare = bare_app(url)
    bare_client = bare.test_client()

    def posting(test_client, path: str, **kwargs):
        def call() -> None:
            response = test_client.post(path, json=ENTRY, **kwargs)
            if response.status_code != 201:
                raise RuntimeError(f"{path} answered {response.status_code}: {response.get_data(as_text=True)[:300]}")
        return call

    calls = {}
    for size, cid in ids.items():
        calls[f"bare {size}"] = posting(bare_client, f"/entries/{cid}")
        calls[f"dotledger {size}"] = posting(client, f"/api/v1/waste_containers/{cid}/entries", headers=headers)
    times = scaling.medians(calls, repeats)
    counted = {"bare": statements(bare.extensions["engine"], calls[f"bare {SIZES[0]}"]),  # after the warm-up
               "dotledger": statements(engine, calls[f"dotledger {SIZES[0]}"])}
    print(f"{name}: add-entry as a ratio to the bare insert of the same rows, medians of {repeats} interleaved calls "
          f"(goal ≤ 2×); statements per request: dotledger {counted['dotledger']}, bare {counted['bare']}")
    for size in SIZES:
        ours, base = times[f"dotledger {size}"], times[f"bare {size}"]
        print(f"  {name} add-entry at {size:>6} entries: {ours / base:5.2f}×  "
              f"({ours * 1e3:.2f} ms against {base * 1e3:.2f} ms)")
    print(f"  {name} flat: {SIZES[-1]} against {SIZES[0]} entries: "
          f"{times[f'dotledger {SIZES[-1]}'] / times[f'dotledger {SIZES[0]}']:5.2f}×")
    engine.dispose()
    bare.extensions["engine"].dispose()


def on_postgres(run) -> None:
    """``run(url)`` in a schema of its own on the PostgreSQL server, dropped afterwards."""
    try:
        admin = create_engine(POSTGRES)
        schema = f"bench_{uuid.uuid4().hex[:10]}"
        with admin.begin() as conn:
            conn.execute(text(f'CREATE SCHEMA "{schema}"'))
    except Exception as exc:  # no server, no driver, no rights
        print(f"PostgreSQL: skipped ({POSTGRES} not reachable: {type(exc).__name__})")
        return
    try:
        separator = "&" if "?" in POSTGRES else "?"
        run(f"{POSTGRES}{separator}options=-csearch_path%3D{schema}")
    finally:
        with admin.begin() as conn:
            conn.execute(text(f'DROP SCHEMA "{schema}" CASCADE'))
        admin.dispose()


def on_both(measure, repeats: int, script: str) -> None:
    """``measure(name, url, repeats)`` on a fresh SQLite file, then on PostgreSQL; the command that reproduces it."""
    with tempfile.TemporaryDirectory() as folder:
        measure("SQLite", f"sqlite:///{Path(folder) / 'bench.sqlite'}", repeats)
    on_postgres(lambda url: measure("PostgreSQL", url, repeats))
    print(f"reproduce: .venv/bin/python bench/{script}")


def main() -> None:
    on_both(measure, int(sys.argv[1]) if len(sys.argv) > 1 else 200, "add_entry.py")


if __name__ == "__main__":
    main()
