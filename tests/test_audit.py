"""The audit log: automatic recording, the hash chain, tamper detection, concurrency."""

from __future__ import annotations

import datetime as dt
import hashlib
import json
from concurrent.futures import ThreadPoolExecutor
from decimal import Decimal

import pytest
from alembic import command
from alembic.autogenerate import compare_metadata
from alembic.config import Config
from alembic.migration import MigrationContext
from sqlalchemy import event, inspect, select, text
from sqlalchemy.orm import Session, sessionmaker

from service.schemas import LabIn, LabPatch
from service.store import audit, inventory
from service.store.audit import GENESIS, AuditEvent, AuditHead, event_digest, list_events, verify_chain
from service.store.db import MIGRATIONS, make_engine, make_sessionmaker, session_scope, upgrade
from service.store.models import Base, Lab, utcnow

UTC = dt.timezone.utc


@pytest.fixture
def sessions(database_url):
    """A session factory with the audit log installed, on a database at the newest revision."""
    upgrade(database_url, "heads")
    engine = make_engine(database_url)
    factory = make_sessionmaker(engine)
    audit.install(factory)
    yield factory
    engine.dispose()


def _lab_events(factory, **filters) -> list[AuditEvent]:
    with session_scope(factory) as session:
        return list_events(session, entity="labs", limit=None, **filters).items


def _verify(factory) -> audit.ChainReport:
    with session_scope(factory) as session:
        return verify_chain(session)


def _create_labs(factory, count: int, prefix: str = "L") -> list[int]:
    ids = []
    with session_scope(factory) as session:
        for n in range(count):
            ids.append(inventory.create_record(session, Lab, LabIn(code=f"{prefix}-{n}", name=f"group {n}")).id)
    return ids


# --- the digest ---------------------------------------------------------------

# The canonical encoding written out by hand: keys sorted, no whitespace, UTF-8, time in UTC.
# Its SHA-256 is computed with hashlib (FIPS 180-4), independently of event_digest.
CANONICAL = (
    '{"action":"update","actor_label":"safety@example.org","actor_user_id":7,'
    '"after":{"building":null,"code":"C-214","name":"Gruppe für Nanokristalle"},'
    '"at":"2026-01-02T03:04:05.000006+00:00","before":{"code":"C-214","name":"Kolloid-Gruppe"},'
    '"entity":"labs","entity_id":"3","prev_hash":"' + "0" * 64 + '"}'
)
EVENT = dict(
    prev_hash=GENESIS,
    at=dt.datetime(2026, 1, 2, 5, 4, 5, 6, tzinfo=dt.timezone(dt.timedelta(hours=2))),
    actor_user_id=7,
    actor_label="safety@example.org",
    entity="labs",
    entity_id=3,
    action="update",
    before={"name": "Kolloid-Gruppe", "code": "C-214"},
    after={"name": "Gruppe für Nanokristalle", "code": "C-214", "building": None},
)


def test_digest_is_sha256_of_the_canonical_encoding():
    assert event_digest(**EVENT) == hashlib.sha256(CANONICAL.encode("utf-8")).hexdigest()


@pytest.mark.parametrize(
    "field, value",
    [
        ("prev_hash", "f" * 64),
        ("at", dt.datetime(2026, 1, 2, 3, 4, 5, 7, tzinfo=UTC)),
        ("actor_user_id", None),
        ("actor_label", "system"),
        ("entity", "stocks"),
        ("entity_id", 4),
        ("action", "retire"),
        ("before", None),
        ("after", {"name": "Gruppe für Nanokristalle", "code": "C-215", "building": None}),
    ],
)
def test_digest_depends_on_every_field(field, value):
    assert event_digest(**{**EVENT, field: value}) != event_digest(**EVENT)


def test_digest_refuses_a_naive_time():
    with pytest.raises(ValueError, match="naive"):
        event_digest(**{**EVENT, "at": dt.datetime(2026, 1, 2)})


@pytest.mark.parametrize(
    "value, expected",
    [
        (dt.datetime(2026, 1, 2, 5, 0, tzinfo=dt.timezone(dt.timedelta(hours=2))), "2026-01-02T03:00:00.000000+00:00"),
        (dt.date(2026, 2, 28), "2026-02-28"),
        (Decimal("0.10"), "0.10"),
        (float("nan"), "nan"),
        ({"a": (1, 2.5)}, {"a": [1, 2.5]}),
        (None, None),
    ],
)
def test_json_safe(value, expected):
    assert audit.json_safe(value) == expected


def test_secrets_are_dropped_and_marked():
    before = {"id": 1, "email": "a@example.org", "password_hash": "old", "token_hash": "t1"}
    after = {"id": 1, "email": "a@example.org", "password_hash": "new", "token_hash": "t1"}
    safe_before, safe_after = audit.redact_secrets(before, after)
    assert safe_before == {"id": 1, "email": "a@example.org"}
    assert safe_after == {"id": 1, "email": "a@example.org", "password_changed": True}
    assert before["password_hash"] == "old"  # the inputs are left alone
    assert audit.redact_secrets(None, {"token_hash": "t2"}) == (None, {"token_changed": True})
    assert audit.redact_secrets({"token_hash": "t2"}, None) == ({}, None)


# --- recording ----------------------------------------------------------------


def test_lab_lifecycle_is_recorded_with_actor(sessions):
    actor = {"user_id": 7, "label": "manager@example.org"}
    with session_scope(sessions) as session:
        session.info["actor"] = actor
        lab = inventory.create_record(session, Lab, LabIn(code="C-214", name="Colloid group", building="C"))
        inventory.update_record(session, lab, LabPatch(name="Colloidal Nanocrystal Group"))
        inventory.retire(session, lab)
        lab_id, created, retired = lab.id, lab.created_at, lab.retired_at
    create, change, retire = _lab_events(sessions)
    assert [e.action for e in (create, change, retire)] == ["create", "update", "retire"]
    assert {(e.actor_user_id, e.actor_label, e.entity_id) for e in (create, change, retire)} == {
        (7, "manager@example.org", str(lab_id))
    }
    assert create.before is None
    assert create.after == {
        "id": lab_id, "code": "C-214", "name": "Colloid group", "building": "C",
        "created_at": created.isoformat(timespec="microseconds"),
        "updated_at": create.after["updated_at"], "retired_at": None,
    }
    assert change.before["name"] == "Colloid group" and change.after["name"] == "Colloidal Nanocrystal Group"
    assert change.before == {**create.after}
    assert retire.before["retired_at"] is None
    assert retire.after["retired_at"] == retired.astimezone(UTC).isoformat(timespec="microseconds")
    assert [e.prev_hash for e in (change, retire)] == [create.hash, change.hash]
    assert _verify(sessions).ok


def test_without_actor_the_system_is_named(sessions):
    _create_labs(sessions, 1)
    (event_,) = _lab_events(sessions)
    assert (event_.actor_user_id, event_.actor_label) == (None, "system")


def test_bookkeeping_and_unchanged_values_are_not_recorded(sessions):
    (lab_id,) = _create_labs(sessions, 1)
    with session_scope(sessions) as session:
        lab = session.get(Lab, lab_id)
        lab.updated_at = utcnow()
        session.flush()
        lab.name = lab.name  # same value: no change
        session.flush()
    assert [e.action for e in _lab_events(sessions)] == ["create"]


def test_before_state_of_an_unloaded_value_comes_from_the_database(sessions):
    (lab_id,) = _create_labs(sessions, 1)
    with session_scope(sessions) as session:
        lab = session.get(Lab, lab_id)
        session.expire(lab)
        lab.name = "renamed without loading"
    change = _lab_events(sessions)[-1]
    assert (change.before["name"], change.after["name"]) == ("group 0", "renamed without loading")
    assert change.before["code"] == change.after["code"] == "L-0"


def test_a_created_row_is_recorded_as_stored_without_reading_it_back(sessions):
    """A column the INSERT leaves out, with no default in the model or the schema, is NULL in the stored row
    and in the event; the event is made from what the session sent, with no SELECT of the new row."""
    engine, sent = sessions.kw["bind"], []

    def listener(conn, cursor, statement, *args):
        sent.append(" ".join(statement.split()).upper())

    event.listen(engine, "before_cursor_execute", listener)
    try:
        with session_scope(sessions) as session:
            lab = Lab(code="N-0", name="no building given")  # building left out
            session.add(lab)
            session.flush()
            lab_id = lab.id
    finally:
        event.remove(engine, "before_cursor_execute", listener)
    assert not [s for s in sent if s.startswith("SELECT") and "FROM LABS" in s], sent
    (created,) = _lab_events(sessions)
    with engine.connect() as connection:
        row = connection.execute(select(Lab.__table__).where(Lab.__table__.c.id == lab_id)).mappings().one()
    assert row["building"] is None
    assert created.after == audit.json_safe(dict(row))
    assert _verify(sessions).ok


def test_a_delete_is_recorded(sessions):
    (lab_id,) = _create_labs(sessions, 1)
    with session_scope(sessions) as session:
        session.delete(session.get(Lab, lab_id))
    deleted = _lab_events(sessions)[-1]
    assert (deleted.action, deleted.before["code"], deleted.after) == ("delete", "L-0", None)
    assert _verify(sessions).ok


def test_a_rolled_back_change_leaves_no_event(sessions):
    _create_labs(sessions, 2)
    with pytest.raises(RuntimeError):
        with session_scope(sessions) as session:
            inventory.create_record(session, Lab, LabIn(code="gone", name="never kept"))
            raise RuntimeError("abandon")
    _create_labs(sessions, 1, prefix="M")
    assert [e.id for e in _lab_events(sessions)] == [1, 2, 3]
    assert _verify(sessions).events_checked == 3


def test_installing_twice_records_once(sessions):
    audit.install(sessions)
    event.listen(Session, "before_flush", audit._before_flush)
    event.listen(Session, "after_flush", audit._after_flush)
    try:  # also registered on the Session class: the factory's sessions see both
        _create_labs(sessions, 2)
    finally:
        event.remove(Session, "before_flush", audit._before_flush)
        event.remove(Session, "after_flush", audit._after_flush)
    assert len(_lab_events(sessions)) == 2
    assert _verify(sessions).ok


# --- the chain ----------------------------------------------------------------


@pytest.mark.parametrize("batch_size", [1000, 2])
def test_an_edited_event_is_named(sessions, batch_size):
    _create_labs(sessions, 6)
    target = _lab_events(sessions)[3].id
    with session_scope(sessions) as session:
        forged = json.dumps({"code": "L-3", "name": "forged"})
        session.execute(text('UPDATE audit_events SET "after" = :after WHERE id = :id'), {"after": forged, "id": target})
    with session_scope(sessions) as session:
        report = verify_chain(session, batch_size=batch_size)
    assert (report.ok, report.first_broken_id, report.events_checked) == (False, target, target - 1)
    assert "hash" in report.reason


def test_a_removed_middle_event_is_named(sessions):
    _create_labs(sessions, 5)
    with session_scope(sessions) as session:
        session.execute(text("DELETE FROM audit_events WHERE id = 3"))
    report = _verify(sessions)
    assert (report.ok, report.first_broken_id) == (False, 4)
    assert "missing" in report.reason


def test_a_removed_last_event_is_caught_by_the_head(sessions):
    _create_labs(sessions, 4)
    with session_scope(sessions) as session:
        session.execute(text("DELETE FROM audit_events WHERE id = 4"))
    report = _verify(sessions)
    assert (report.ok, report.first_broken_id, report.events_checked) == (False, 4, 3)
    assert "head" in report.reason


def test_a_rewritten_hash_breaks_the_next_link(sessions):
    _create_labs(sessions, 4)
    with session_scope(sessions) as session:
        row = session.get(AuditEvent, 2)
        rehashed = event_digest(row.prev_hash, row.at, row.actor_user_id, row.actor_label, row.entity,
                                row.entity_id, row.action, row.before, {"code": "L-1", "name": "forged"})
        session.execute(text('UPDATE audit_events SET "after" = :after, hash = :hash WHERE id = 2'),
                        {"after": json.dumps({"code": "L-1", "name": "forged"}), "hash": rehashed})
    report = _verify(sessions)
    assert (report.ok, report.first_broken_id) == (False, 3)


def test_concurrent_writers_make_one_chain(sessions):
    def write(worker: int) -> None:
        for n in range(10):  # one transaction per lab, so the writers interleave
            _create_labs(sessions, 1, prefix=f"W{worker}-{n}")

    with ThreadPoolExecutor(max_workers=16) as pool:
        list(pool.map(write, range(16)))
    events = _lab_events(sessions)
    assert [e.id for e in events] == list(range(1, 161))
    assert len({e.entity_id for e in events}) == 160
    report = _verify(sessions)
    assert (report.ok, report.events_checked) == (True, 160)


def test_list_events_filters(sessions):
    (first,) = _create_labs(sessions, 1, prefix="A")
    middle = utcnow()
    (second,) = _create_labs(sessions, 1, prefix="B")
    with session_scope(sessions) as session:
        inventory.retire(session, session.get(Lab, second))
    assert [e.entity_id for e in _lab_events(sessions, until=middle)] == [str(first)]
    assert [e.action for e in _lab_events(sessions, since=middle)] == ["create", "retire"]
    assert [e.action for e in _lab_events(sessions, entity_id=second)] == ["create", "retire"]
    assert _lab_events(sessions, entity_id=first, since=middle) == []
    with session_scope(sessions) as session:
        assert [e.id for e in list_events(session, limit=1, offset=1)] == [2]
        assert list_events(session, entity="stocks").items == []


# --- the migration ------------------------------------------------------------


def test_migration_matches_the_models(database_url):
    upgrade(database_url, "heads")
    engine = make_engine(database_url)
    only_audit = {"include_object": lambda _obj, name, kind, *_: kind != "table" or name.startswith("audit_")}
    try:
        with engine.connect() as connection:
            context = MigrationContext.configure(connection, opts={"compare_type": True, **only_audit})
            assert compare_metadata(context, Base.metadata) == []
            head = connection.execute(select(AuditHead.__table__)).all()
            assert [tuple(row) for row in head] == [(1, 0, GENESIS)]
    finally:
        engine.dispose()


def test_migration_downgrades_and_upgrades(sqlite_url):
    config = Config()
    config.set_main_option("script_location", str(MIGRATIONS))
    config.set_main_option("sqlalchemy.url", sqlite_url)
    upgrade(sqlite_url, "heads")
    command.downgrade(config, "0001")
    engine = make_engine(sqlite_url)
    try:
        with engine.connect() as connection:
            assert not {"audit_events", "audit_head"} & set(inspect(connection).get_table_names())
        upgrade(sqlite_url, "heads")
        with engine.connect() as connection:
            assert {"audit_events", "audit_head"} <= set(inspect(connection).get_table_names())
    finally:
        engine.dispose()



def test_every_new_factory_records(sessions):
    # Regression: event.contains() keys on id(), and a fresh factory may reuse the id of a
    # collected one; installing must not be skipped for it, or its writes go unrecorded.
    engine = sessions.kw["bind"]
    for i in range(30):
        factory = sessionmaker(bind=engine, expire_on_commit=False)
        audit.install(factory)
        with session_scope(factory) as session:
            inventory.create_record(session, Lab, LabIn(code=f"F-{i}", name="factory check"))
        del factory
    assert len(_lab_events(sessions)) == 30
    assert _verify(sessions).ok
