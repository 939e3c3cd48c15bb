"""Sessions: reads take no write lock, writes take it up front, a read answers while a long report runs."""

from __future__ import annotations

import datetime as dt
import random
import threading
import time

import pytest
from sqlalchemy import event, insert

from service.schemas import LabIn
from service.store import inventory, month_totals
from service.store.db import ReadOnlySession, make_engine, make_sessionmaker, session_scope, upgrade
from service.store.models import Lab, Location, WasteContainer, WasteEntry, WasteEntryElement
from service.vocab import STREAMS
from tests.conftest import make_app, make_user


def _begins(engine) -> list[str]:
    seen: list[str] = []
    event.listen(engine, "before_cursor_execute",
                 lambda conn, cursor, statement, *args: seen.append(statement) if statement.startswith("BEGIN") else None)
    return seen


def test_reads_begin_deferred_and_writes_immediate(sqlite_url):
    upgrade(sqlite_url)
    engine = make_engine(sqlite_url)
    factory = make_sessionmaker(engine)
    begins = _begins(engine)
    try:
        with session_scope(factory, write=False) as session:
            session.query(Lab).all()
        with session_scope(factory) as session:
            inventory.create_record(session, Lab, LabIn(code="T-1", name="Transaction lab"))
        # SQLite's own syntax: a plain BEGIN is DEFERRED (sqlite.org/lang_transaction.html)
        assert begins == ["BEGIN", "BEGIN IMMEDIATE"]
    finally:
        engine.dispose()


def test_a_reading_session_refuses_to_write(database_url):
    upgrade(database_url)
    engine = make_engine(database_url)
    try:
        with pytest.raises(ReadOnlySession):
            with session_scope(make_sessionmaker(engine), write=False) as session:
                inventory.create_record(session, Lab, LabIn(code="T-2", name="Not written"))
        with session_scope(make_sessionmaker(engine), write=False) as session:
            assert session.query(Lab).count() == 0
    finally:
        engine.dispose()


def test_requests_choose_by_method(sqlite_url, rules_dir):
    app = make_app(sqlite_url, rules_dir)
    token = make_user(app, "admin@test.example", "admin")
    begins = _begins(app.extensions["dotledger.engine"])
    client, headers = app.test_client(), {"Authorization": f"Bearer {token}"}
    try:
        assert client.get("/api/v1/labs", headers=headers).status_code == 200
        assert client.post("/api/v1/labs", json={"code": "T-3", "name": "Posted"}, headers=headers).status_code == 201
        assert begins == ["BEGIN", "BEGIN IMMEDIATE"]
    finally:
        app.extensions["dotledger.engine"].dispose()


def _fill(engine, entries: int, containers: int = 300) -> None:
    """Waste entries over many containers and 24 months, inserted in bulk (a report with many rows)."""
    rng = random.Random(11)
    now = dt.datetime(2026, 1, 1, tzinfo=dt.timezone.utc)
    with engine.begin() as conn:
        conn.execute(insert(Lab), [{"id": 1, "code": "R-1", "name": "Report lab", "created_at": now, "updated_at": now}])
        conn.execute(insert(Location), [{"id": 1, "lab_id": 1, "building": "R", "room": "R-1", "storage": "SAA",
                                         "kind": "satellite_accumulation_area", "created_at": now, "updated_at": now}])
        conn.execute(insert(WasteContainer), [
            {"id": n, "label": f"R-W{n}", "lab_id": 1, "location_id": 1, "stream": STREAMS[n % 3], "form": "liquid",
             "capacity_text": "200 L", "capacity_micro": 200_000_000, "acute_hazardous": False, "state": "open",
             "created_at": now, "updated_at": now} for n in range(1, containers + 1)])
        conn.execute(insert(WasteEntry), [
            {"id": i, "container_id": rng.randrange(1, containers + 1), "description": "report load", "volume_ul": 10_000,
             "mass_ug": 0, "at": now - dt.timedelta(minutes=rng.randrange(0, 730 * 24 * 60))}
            for i in range(1, entries + 1)])
        conn.execute(insert(WasteEntryElement), [{"entry_id": i, "element": s, "mass_ug": rng.randrange(1, 50_000)}
                                                 for i in range(1, entries + 1) for s in ("Cd", "Se")])
        month_totals.rebuild(conn)  # rows inserted around the ORM: the monthly totals the report reads, from them


@pytest.mark.slow
def test_a_read_answers_while_a_long_report_runs(sqlite_url, rules_dir):
    """GET /labs during a ledger report (XLSX of every element × container × month) takes a fraction of it.

    Before, every request began IMMEDIATE and the GET waited for the whole report. The GET and the
    report share the interpreter, so the GET is slowed by the report's Python work, never blocked by it.
    """
    app = make_app(sqlite_url, rules_dir)
    token = make_user(app, "admin@test.example", "admin")
    headers = {"Authorization": f"Bearer {token}"}
    engine = app.extensions["dotledger.engine"]
    _fill(engine, 60_000)
    report_path = "/api/v1/reports/waste?by=element,container,month&format=xlsx"
    started, report = threading.Event(), {}

    def first_statement(conn, cursor, statement, *args):
        if threading.current_thread().name == "report":
            started.set()

    def run_report():
        t0 = time.perf_counter()
        response = app.test_client().get(report_path, headers=headers)
        report.update(status=response.status_code, seconds=time.perf_counter() - t0, done=time.perf_counter())

    try:
        app.test_client().get("/api/v1/labs", headers=headers)  # warm up outside the measurement
        event.listen(engine, "before_cursor_execute", first_statement)
        worker = threading.Thread(target=run_report, name="report")
        worker.start()
        assert started.wait(60)
        t0 = time.perf_counter()
        labs = app.test_client().get("/api/v1/labs", headers=headers)
        read_seconds, read_done = time.perf_counter() - t0, time.perf_counter()
        worker.join(300)
        assert labs.status_code == 200 and report["status"] == 200
        assert read_done < report["done"], "the report ended before the read: make it longer"
        assert read_seconds < 0.5 * report["seconds"], (read_seconds, report["seconds"])
    finally:
        engine.dispose()


def test_statements_sent_together_take_effect_and_a_failure_is_sqlalchemys_own(database_url):
    """``sent_together``: on PostgreSQL psycopg's pipeline mode (psycopg.org/psycopg3/docs/advanced/pipeline.html),
    elsewhere one by one; the rows are written either way, and a unique violation inside is an IntegrityError
    of SQLAlchemy (what the API's error handler answers 409 to), raised by the end of the block."""
    from sqlalchemy import select
    from sqlalchemy.exc import IntegrityError

    from service.store.sql import sent_together

    upgrade(database_url)
    engine = make_engine(database_url)
    table = Lab.__table__
    now = dt.datetime(2026, 1, 1, tzinfo=dt.timezone.utc)
    row = {"name": "Pipeline lab", "created_at": now, "updated_at": now}
    codes = select(table.c.code).order_by(table.c.code)
    try:
        with engine.begin() as connection:
            with sent_together(connection):
                # keys given: an INSERT whose key the database makes reads it back (RETURNING on PostgreSQL)
                connection.execute(insert(table), {**row, "id": 901, "code": "P-1"})
                connection.execute(insert(table), [{**row, "id": 902, "code": "P-2"},
                                                   {**row, "id": 903, "code": "P-3"}])
            assert connection.execute(codes).scalars().all() == ["P-1", "P-2", "P-3"]
        with pytest.raises(IntegrityError), engine.begin() as connection:
            with sent_together(connection):
                connection.execute(insert(table), {**row, "id": 904, "code": "P-4"})
                connection.execute(insert(table), {**row, "id": 905, "code": "P-1"})  # lab codes are unique
        with engine.connect() as connection:  # the failed transaction left nothing
            assert connection.execute(codes).scalars().all() == ["P-1", "P-2", "P-3"]
    finally:
        engine.dispose()


def test_rows_read_with_core_join_the_session_as_the_orm_loads_them(database_url):
    """``sql.as_loaded``: a row read with a Core statement becomes the object the ORM would have loaded (every
    column equal to ``session.get``'s, nothing for a flush to write), a change to it is flushed and audited
    with the stored value as "before", the session's own object is answered for a key it holds, and
    ``refresh`` gives that object the row's values (what ``populate_existing`` does)."""
    from sqlalchemy import select

    from service.store.audit import AuditEvent
    from service.store.sql import as_loaded

    upgrade(database_url)
    engine = make_engine(database_url)
    factory = make_sessionmaker(engine)
    try:
        with session_scope(factory) as session:
            lab_id = inventory.create_record(session, Lab, LabIn(code="CORE-1", name="Core read lab")).id
        table = Lab.__table__
        with session_scope(factory, write=False) as session:
            expected = {c.name: getattr(session.get(Lab, lab_id), c.name) for c in table.columns}
        statements = []
        event.listen(engine, "before_cursor_execute", lambda *args: statements.append(args[2]))
        with session_scope(factory) as session:
            row = session.connection().execute(select(table).where(table.c.id == lab_id)).mappings().one()
            lab = as_loaded(session, Lab, row)
            assert {c.name: getattr(lab, c.name) for c in table.columns} == expected
            assert lab in session and not session.new and not session.dirty and not session.is_modified(lab)
            read = len(statements)
            session.flush()
            assert len(statements) == read  # nothing to write
            assert as_loaded(session, Lab, {**row, "name": "other"}) is lab and lab.name == "Core read lab"
            lab.name = "Core read lab, renamed"
            session.flush()
            change = session.scalars(select(AuditEvent).where(AuditEvent.entity == "labs")
                                     .order_by(AuditEvent.id.desc())).first()
            assert change.action == "update"
            assert change.before["name"] == "Core read lab" and change.after["name"] == "Core read lab, renamed"
            assert as_loaded(session, Lab, row, refresh=True) is lab and lab.name == "Core read lab"
    finally:
        engine.dispose()
