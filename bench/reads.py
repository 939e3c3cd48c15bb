"""Procedure and container reads and lists of 100, as ratios to a bare query returning the same rows.

    .venv/bin/python bench/reads.py [REPEATS]        # default 60 timed calls per case

Loads the demonstration scenario into a fresh database (SQLite, then PostgreSQL), adds 110 procedures
(two planned draws each, at scales 1 to 3, half of them approved) and 110 waste containers with an
entry each through the service functions, and times through the app's test client
``GET /api/v1/procedures?limit=100``, ``GET /api/v1/procedures/<id>``, ``GET /api/v1/waste_containers?limit=100``
and ``GET /api/v1/waste_containers/<id>`` (with their findings, element masses and contents). The
baseline of each is a bare Flask view in the same process: one plain SQLAlchemy query of the same
rows with their child rows (steps, draws and waste plan; running totals), turned into JSON, no checks.
The calls take turns (interleaved) and the medians are compared. The goal is ≤ 3×.

PostgreSQL: DOTLEDGER_BENCH_POSTGRES_URL, default postgresql+psycopg://postgres@127.0.0.1:5432/test;
the run uses a schema of its own, dropped afterwards (skipped when the server cannot be reached).
"""

from __future__ import annotations

import sys
from pathlib import Path

from click.testing import CliRunner
from flask import Flask, jsonify
from sqlalchemy import select
from sqlalchemy.orm import selectinload, sessionmaker

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from bench.add_entry import on_both  # noqa: E402
from bench.container_scaling import medians  # noqa: E402
from service.app import create_app  # noqa: E402
from service.cli import main as cli  # noqa: E402
from service.schemas import (  # noqa: E402
    ContainerIn,
    ElementAmountIn,
    EntryComponentIn,
    EntryIn,
    PlannedDrawIn,
    ProcedureIn,
    StepIn,
    WastePlanIn,
)
from service.store import identity, procedures, waste  # noqa: E402
from service.store.db import make_engine, session_scope  # noqa: E402
from service.store.models import Lab, Location, Procedure, Stock, Substance, User, WasteContainer  # noqa: E402

ROWS = 110


def seed(app) -> dict[str, int]:
    """ROWS procedures and ROWS containers (one entry each) on the demo scenario; the ids read and a token."""
    rules = app.extensions["dotledger.rules"]
    with session_scope(app.extensions["dotledger.sessions"]) as s:
        s.info["actor"] = {"user_id": None, "label": "bench seed"}
        lab = s.scalar(select(Lab).where(Lab.code == "C-214"))
        saa = s.scalar(select(Location).where(Location.kind == "satellite_accumulation_area"))
        researcher = s.scalar(select(User).where(User.email == "researcher@example.org"))
        officer = s.scalar(select(User).where(User.email == "safety@example.org"))
        admin = s.scalar(select(User).where(User.email == "admin@example.org"))
        stocks = list(s.scalars(select(Stock).where(Stock.lab_id == lab.id, Stock.retired_at.is_(None))
                                .order_by(Stock.id)))
        acetone = s.scalar(select(Substance.id).where(Substance.key == "acetone"))
        made = []
        for n in range(ROWS):
            picked = [stocks[n % len(stocks)], stocks[(n + 1) % len(stocks)]]
            body = ProcedureIn(lab_id=lab.id, title=f"Bench batch {n}", scale=1 + n % 3,
                               steps=[StepIn(operation="hold", temperature_c=20, atmosphere="argon")],
                               draws=[PlannedDrawIn(stock_id=stock.id,
                                                    amount="1.5 mg" if stock.quantity_kind == "mass" else "0.25 mL")
                                      for stock in picked],
                               waste_plan=[WastePlanIn(stream="contaminated solids", contents="wipes")])
            made.append(procedures.create_procedure(s, body, researcher))
        for proc in made[: ROWS // 2]:
            procedures.transition(s, proc, "submit", researcher, None, rules)
            procedures.transition(s, proc, "approve", officer, "reviewed for the bench", rules)
        boxes = [waste.create_container(s, ContainerIn(label=f"B-W{n}", lab_id=lab.id, location_id=saa.id,
                                                       stream="non_halogenated_solvent_heavy_metals", capacity="20 L"))
                 for n in range(ROWS)]
        for n, box in enumerate(boxes):
            waste.add_entry(s, box.id, EntryIn(description=f"wash {n}", volume="10 mL",
                                               components=[EntryComponentIn(substance_id=acetone, volume="5 mL")],
                                               elements=[ElementAmountIn(element="Cd", mass="1 mg")]), researcher.id)
        return {"procedure": made[0].id, "container": boxes[0].id,
                "token": identity.issue_token(s, admin, "bench").secret}


def _columns(row) -> dict:
    return {c.key: getattr(row, c.key) for c in row.__table__.columns}


def bare_app(url: str) -> Flask:
    """The baseline: each read as one plain query of the same rows and their child rows, as JSON."""
    engine = make_engine(url)
    factory = sessionmaker(bind=engine)
    app = Flask("bare")
    app.extensions["engine"] = engine
    proc_query = select(Procedure).options(selectinload(Procedure.steps), selectinload(Procedure.draws),
                                           selectinload(Procedure.waste_plan)).order_by(Procedure.id)
    box_query = select(WasteContainer).options(
        selectinload(WasteContainer.totals), selectinload(WasteContainer.element_totals),
        selectinload(WasteContainer.component_totals)).order_by(WasteContainer.id)

    def proc_json(p: Procedure) -> dict:
        return {**_columns(p), "steps": [_columns(x) for x in p.steps],
                "draws": [{k: str(v) if k == "amount_micro" else v for k, v in _columns(x).items()} for x in p.draws],
                "waste_plan": [_columns(x) for x in p.waste_plan]}

    def box_json(c: WasteContainer) -> dict:
        return {**_columns(c), "totals": _columns(c.totals) if c.totals else None,
                "elements": [_columns(x) for x in c.element_totals],
                "components": [_columns(x) for x in c.component_totals]}

    @app.get("/procedures")
    def procs():
        with factory() as session:
            return jsonify([proc_json(p) for p in session.scalars(proc_query.limit(100))])

    @app.get("/procedures/<int:ident>")
    def proc(ident: int):
        with factory() as session:
            return jsonify(proc_json(session.scalars(proc_query.where(Procedure.id == ident)).one()))

    @app.get("/waste_containers")
    def boxes():
        with factory() as session:
            return jsonify([box_json(c) for c in session.scalars(box_query.limit(100))])

    @app.get("/waste_containers/<int:ident>")
    def box(ident: int):
        with factory() as session:
            return jsonify(box_json(session.scalars(box_query.where(WasteContainer.id == ident)).one()))

    return app


def measure(name: str, url: str, repeats: int) -> None:
    result = CliRunner().invoke(cli, ["demo"], env={"DOTLEDGER_DATABASE_URL": url})
    if result.exit_code != 0:
        raise RuntimeError(result.output)
    app = create_app({"DATABASE_URL": url, "TESTING": True})
    ids = seed(app)
    client, headers = app.test_client(), {"Authorization": f"Bearer {ids['token']}"}
    bare = bare_app(url)
    bare_client = bare.test_client()
    paths = {"GET /procedures?limit=100": ("/procedures?limit=100", "/procedures"),
             "GET /procedures/{id}": (f"/procedures/{ids['procedure']}", f"/procedures/{ids['procedure']}"),
             "GET /waste_containers?limit=100": ("/waste_containers?limit=100", "/waste_containers"),
             "GET /waste_containers/{id}": (f"/waste_containers/{ids['container']}",
                                            f"/waste_containers/{ids['container']}")}

    def getting(test_client, path: str, **kwargs):
        def call() -> None:
            response = test_client.get(path, **kwargs)
            if response.status_code != 200:
                raise RuntimeError(f"{path} answered {response.status_code}: {response.get_data(as_text=True)[:300]}")
        return call

    calls = {}
    for label, (ours, base) in paths.items():
        calls[f"dotledger {label}"] = getting(client, f"/api/v1{ours}", headers=headers)
        calls[f"bare {label}"] = getting(bare_client, base)
    times = medians(calls, repeats)
    print(f"{name}: reads as a ratio to a bare query of the same rows, medians of {repeats} interleaved calls "
          f"(goal ≤ 3×)")
    for label in paths:
        ours, base = times[f"dotledger {label}"], times[f"bare {label}"]
        print(f"  {name} {label:<32} {ours / base:5.2f}×  ({ours * 1e3:.2f} ms against {base * 1e3:.2f} ms)")
    app.extensions["dotledger.engine"].dispose()
    bare.extensions["engine"].dispose()


def main() -> None:
    on_both(measure, int(sys.argv[1]) if len(sys.argv) > 1 else 60, "reads.py")


if __name__ == "__main__":
    main()
